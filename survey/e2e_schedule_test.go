package survey

import (
	"context"
	"math"
	"nullseek/ident"
	"nullseek/ident/idmatch"
	"nullseek/ident/morse"
	"nullseek/ident/schedule"
	"slices"
	"testing"
	"time"

	"nullseek/bearing"
	"nullseek/geo"
	"nullseek/heading"
	"nullseek/receiver"
	"nullseek/sim"
)

// TestE2EScheduleSimulated renders four beacons sharing a 60 s cycle with
// known timer drifts (sim), runs survey.Run and survey.Schedule on what an
// omnidirectional receiver hears, and checks the slot plan against truth
// computed here from the scenario's own numbers (not a committed file):
//
//   - beacon k starts at F_k + n·P_k, P_k = 60 s·(1 + drift_k·1e-6), n = 0,1,…
//     (sim.Beacon's documented timing; a positive drift comes later each
//     cycle, the same sign as schedule.Transmitter.DriftPPM);
//   - the only closing pair is A = N0CALL/2 (+120 ppm) followed 0.3 s later
//     by B = N0CALL/3 (−60 ppm): A's end F_A + OnS + n·P_A meets B's start
//     F_B + n·P_B at n* = (F_B − F_A − OnS)/(P_A − P_B), time
//     F_A + OnS + n*·P_A (straight-line algebra).
//
// The forecast is sensitive to the measured on-time: sim's 4 ms raised-
// cosine keying ramps make the power edges about 2.5 ms inside the slot at
// each end, so the measured on-time is ~5 ms short, which moves the meeting
// by 5 ms / (P_A − P_B) ≈ 0.46 cycles; hence one cycle is a fair tolerance
// and not a loose one.
//
// The scenario is invented (placeholder calls); the reference is the
// algebra above, and the tolerances are the project issue's: order exact,
// period within 0.05 %, drift within 30 ppm, overlap within one cycle.
func TestE2EScheduleSimulated(t *testing.T) {
	const (
		periodS = 60.0
		onS     = 12.0
		cycles  = 6
	)
	flat := bearing.Pattern{Name: "omnidirectional", GainDB: make([]float64, bearing.PatternSteps), Symmetry: 1, Mode: bearing.Peak}
	if err := flat.Validate(); err != nil {
		t.Fatalf("flat pattern: %v", err)
	}
	lat0, lon0 := 10.0, 20.0 // invented
	at := func(eM, nM float64) (float64, float64) { return geo.FromENU(lat0, lon0, eM, nM) }
	type bc struct {
		id                    string
		firstS, driftPPM      float64
		toneHz, carrierHz, eM float64
	}
	truth := []bc{
		{"N0CALL/1", 1.0, +60, 700, 150, 800},
		{"N0CALL/2", 15.0, +120, 850, -300, -900},
		{"N0CALL/3", 27.3, -60, 1000, 400, 1000},
		{"N0CALL/4", 41.0, -40, 600, -120, -700},
	}
	sc := sim.Scenario{
		Name: "schedule-e2e", Place: "nowhere (invented)",
		Start:    time.Date(2026, 1, 2, 3, 0, 0, 0, time.UTC),
		CenterHz: 430.0e6, ChannelHz: 430.010e6,
		SampleRate: 48000, DurationS: cycles * periodS,
		NoiseDBFS: -45, DeviationHz: 2500, Seed: 11,
	}
	for _, x := range truth {
		la, lo := at(x.eM, 600)
		sc.Beacons = append(sc.Beacons, sim.Beacon{
			ID: x.id, Lat: la, Lon: lo, ToneHz: x.toneHz, WPM: 20, CarrierHz: x.carrierHz,
			LevelDB: -12, FirstOnS: x.firstS, OnS: onS, PeriodS: periodS, DriftPPM: x.driftPPM,
			Mode: morse.ModeFM,
		})
	}
	sla, slo := at(0, 0)
	st := sim.Station{Name: "centre", Lat: sla, Lon: slo, Antenna: flat, AntennaName: "omni",
		Turn: heading.SteadyTurn{StartDeg: 0, RateDegPerS: 0}, HeadingRef: heading.True}
	src, err := sim.NewSource(sc, st)
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Now()
	ids := make([]string, len(truth))
	for i, x := range truth {
		ids[i] = x.id
	}
	res, err := Run(context.Background(), src, Options{
		Receiver: receiver.Config{FreqHz: sc.ChannelHz},
		Ident:    ident.Options{Mode: morse.ModeFM, IDs: ids},
	}, nil)
	if err != nil {
		t.Fatal(err)
	}
	plan, err := Schedule(res, schedule.Options{NominalPeriodS: periodS})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("rendered and surveyed %.0f s in %.1f s: %d bursts", sc.DurationS, time.Since(t0).Seconds(), len(res.Records))
	for _, r := range res.Records {
		if r.Ident == idmatch.Unknown {
			t.Logf("burst %d at %.2f s: unknown (text %q)", r.Index, r.StartS, r.Text)
		}
	}

	if len(res.Records) != cycles*len(truth) {
		t.Errorf("%d bursts, want %d (%d beacons × %d cycles)", len(res.Records), cycles*len(truth), len(truth), cycles)
	}
	// Order: the cyclic order of first starts, rotated so the first heard
	// comes first (schedule.Plan.Order's definition).
	if !slices.Equal(plan.Order, ids) {
		t.Errorf("order %v, want %v", plan.Order, ids)
	}
	for _, x := range truth {
		tx := plan.Transmitter(x.id)
		if tx == nil || !tx.HasPeriod() {
			t.Errorf("%s: no fitted period (%+v)", x.id, tx)
			continue
		}
		wantP := periodS * (1 + x.driftPPM*1e-6)
		relErr := math.Abs(tx.PeriodS-wantP) / wantP
		t.Logf("%s: period %.5f s (truth %.5f, error %.1f ppm), drift %+.1f ± %.1f ppm (truth %+.0f), on %.3f s, %d bursts",
			x.id, tx.PeriodS, wantP, relErr*1e6, tx.DriftPPM, tx.DriftSigmaPPM, x.driftPPM, tx.OnS, tx.Bursts)
		if relErr > 0.0005 { // issue: period within 0.05 %
			t.Errorf("%s: period %.5f s, truth %.5f s (%.3f %% off)", x.id, tx.PeriodS, wantP, 100*relErr)
		}
		if d := math.Abs(tx.DriftPPM - x.driftPPM); d > 30 { // issue: drift within 30 ppm
			t.Errorf("%s: drift %+.1f ppm, truth %+.0f ppm", x.id, tx.DriftPPM, x.driftPPM)
		}
	}

	// The closing pair and its analytic meeting time.
	a, b := truth[1], truth[2]
	pA := periodS * (1 + a.driftPPM*1e-6)
	pB := periodS * (1 + b.driftPPM*1e-6)
	nStar := (b.firstS - a.firstS - onS) / (pA - pB)
	wantAt := a.firstS + onS + nStar*pA
	var found bool
	for _, c := range plan.Collisions {
		t.Logf("collision forecast %s → %s at %.0f s ± %.0f s (%.1f cycles after the end), closing %.2f ms/cycle, significant %v",
			c.A, c.B, c.AtS, c.SigmaS, c.Cycles, 1000*c.ClosingSPerCycle, c.Significant)
		if c.A == a.id && c.B == b.id {
			found = true
			t.Logf("truth: n* = %.2f cycles, at %.1f s; forecast off by %.1f s = %.2f cycles", nStar, wantAt, c.AtS-wantAt, (c.AtS-wantAt)/periodS)
			if math.Abs(c.AtS-wantAt) > periodS { // issue: within one cycle
				t.Errorf("overlap of %s and %s forecast at %.1f s, truth %.1f s (more than one %g s cycle off)", a.id, b.id, c.AtS, wantAt, periodS)
			}
			if !c.Significant || c.Already {
				t.Errorf("forecast significant=%v already=%v, want a significant future overlap", c.Significant, c.Already)
			}
		} else if c.Significant {
			t.Errorf("forecast a significant overlap of %s and %s, whose gap is opening", c.A, c.B)
		}
	}
	if !found {
		t.Errorf("no overlap forecast for the closing pair %s → %s", a.id, b.id)
	}
}
