package bearing

import (
	"errors"
	"math"
	"math/rand/v2"
	"nullseek/heading"
	"nullseek/internal/angle"
	"path/filepath"
	"sort"
	"testing"
)

// backAndForth simulates a clockwise turn from 0° to 360° and back at
// rateDegS, readings every dt seconds; each level belongs to the heading at
// T − lagS (levels late by lagS), the stamped heading is the one at T: a
// heading log early by lagS, i.e. late by −lagS in the module's convention
// (package heading).
func backAndForth(seed uint64, p Pattern, truth, snrDB, rateDegS, lagS float64) []Point {
	rng := rand.New(rand.NewPCG(seed, 9))
	period := 2 * 360 / rateDegS
	head := func(t float64) float64 {
		t = math.Mod(t+4*period, period)
		if t < period/2 {
			return rateDegS * t
		}
		return 360 - rateDegS*(t-period/2)
	}
	const dt = 1.0 / 60
	n := int(2 * period / dt)
	hTrue := make([]float64, n)
	tt := make([]float64, n)
	for i := range tt {
		tt[i] = float64(i) * dt
		hTrue[i] = head(tt[i] - lagS)
	}
	pts := simThermal(rng, p, truth, snrDB, 32, hTrue, tt)
	for i := range pts {
		pts[i].HeadingDeg = angle.Wrap360(head(tt[i]))
	}
	return pts
}

// relogged joins points again with their own headings taken as a heading
// log lagS seconds late (heading.Track.WithLag and At: the one place the
// lag is applied); a point the lagged log does not cover is left out.
func relogged(t testing.TB, points []Point, lagS float64) []Point {
	t.Helper()
	pts := append([]Point(nil), points...)
	sort.SliceStable(pts, func(i, j int) bool { return pts[i].T < pts[j].T })
	tr := &heading.Track{MaxGapS: -1}
	for _, p := range pts {
		if n := len(tr.Samples); n == 0 || p.T > tr.Samples[n-1].T {
			tr.Samples = append(tr.Samples, heading.Sample{T: p.T, Deg: angle.Wrap360(p.HeadingDeg)})
		}
	}
	if err := tr.Validate(); err != nil {
		t.Fatal(err)
	}
	tr = tr.WithLag(lagS)
	out := pts[:0]
	for _, p := range pts {
		if h, ok := tr.At(p.T); ok {
			p.HeadingDeg = h
			out = append(out, p)
		}
	}
	return out
}

func TestEstimateLag(t *testing.T) {
	loop := mustPattern(SmallLoop(30))
	yagi := mustPattern(Yagi(60, 18))
	floor := 0.0
	cases := []struct {
		name string
		p    Pattern
		rate float64
		lagS float64
	}{
		{"loop+0.2s", loop, 30, 0.2},
		{"loop-0.15s", loop, 30, -0.15},
		{"loop0", loop, 30, 0},
		{"yagi+0.3s@20", yagi, 20, 0.3},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			pts := backAndForth(7, c.p, 237, 20, c.rate, c.lagS)
			lag, sig, err := EstimateLag(pts, c.p, LagOptions{Fit: FitOptions{NoiseFloorDB: &floor, Bootstrap: -1}})
			if err != nil {
				t.Fatal(err)
			}
			// Levels late by c.lagS are a log late by −c.lagS (the sign is
			// the convention's: package heading).
			want := -c.lagS
			t.Logf("log lag %.4f ± %.4f s (injected %.2f)", lag, sig, want)
			if math.Abs(lag-want) > 4*sig+0.002 || sig > 0.02 {
				t.Errorf("lag %.4f ± %.4f s, injected %.3f", lag, sig, want)
			}
			// Applying the lag through the heading track brings the
			// bearing back to the truth.
			fixed := relogged(t, pts, lag)
			est, err := Fit(fixed, c.p, FitOptions{NoiseFloorDB: &floor, Bootstrap: -1})
			if err != nil {
				t.Fatal(err)
			}
			if e := circErr(est.BearingDeg, 237, c.p.Symmetry); math.Abs(e) > 4*est.SigmaDeg+c.rate*sig*4 {
				t.Errorf("after applying the lag: bearing %.3f ± %.3f, truth 237", est.BearingDeg, est.SigmaDeg)
			}
		})
	}
	oneWay := thermalSweep(1, loop, 100, 20, 0, 1, 360)
	if _, _, err := EstimateLag(oneWay, loop, LagOptions{}); !errors.Is(err, ErrBadInput) {
		t.Errorf("one direction only: %v", err)
	}
}

func TestCalibrateRoundTrip(t *testing.T) {
	floor := 0.0
	cases := []struct {
		name     string
		truth    Pattern
		nominal  Pattern
		offset   float64
		known    float64
		tolDB    float64 // table agreement where the truth is above −15 dB
		depthTol float64 // 0 = skip null-depth check
	}{
		{"yagi", mustPattern(Yagi(45, 20)), mustPattern(Yagi(60, 15)), 7.3, 123, 0.3, 0},
		{"loop", mustPattern(SmallLoop(25)), mustPattern(SmallLoop(30)), -12.6, 301, 0.3, 1.5},
		{"body", mustPattern(BodyShield(10)), mustPattern(BodyShield(14)), 3.1, 45, 0.3, 0},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(17, 2))
			// Two full turns, true heading h; the sensor reports h − offset.
			h, tt := sweep(0, 0.5, 1440, 30)
			pts := simThermal(rng, c.truth, c.known, 40, 64, h, tt)
			for i := range pts {
				pts[i].HeadingDeg = angle.Wrap360(h[i] - c.offset)
			}
			meas, off, err := Calibrate(pts, c.known, c.nominal, CalibrateOptions{Fit: FitOptions{NoiseFloorDB: &floor, Bootstrap: -1}, Name: "cal " + c.name})
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(angle.Wrap180(off-c.offset)) > 0.1 {
				t.Errorf("north offset %.3f°, want %.1f°", off, c.offset)
			}
			for k := range meas.GainDB {
				if c.truth.GainDB[k] > -15 && math.Abs(meas.GainDB[k]-c.truth.GainDB[k]) > c.tolDB {
					t.Errorf("gain at %d°: %.2f dB, truth %.2f dB", k, meas.GainDB[k], c.truth.GainDB[k])
					break
				}
			}
			if c.depthTol > 0 {
				mn := 0.0
				for _, g := range meas.GainDB {
					mn = math.Min(mn, g)
				}
				if math.Abs(-mn-25) > c.depthTol {
					t.Errorf("measured null depth %.1f dB, truth 25 dB", -mn)
				}
			}
			// Save, load, and use on a fresh sweep at another bearing with the
			// calibrated sensor.
			path := filepath.Join(t.TempDir(), "cal.json")
			if err := SavePattern(path, meas); err != nil {
				t.Fatal(err)
			}
			loaded, err := LoadPattern(path)
			if err != nil {
				t.Fatal(err)
			}
			h2, t2 := sweep(33, 1, 360, 30)
			pts2 := simThermal(rng, c.truth, 77.7, 20, 32, h2, t2)
			for i := range pts2 {
				pts2[i].HeadingDeg = angle.Wrap360(h2[i] - c.offset + off) // sensor + correction
			}
			est, err := Fit(pts2, loaded, FitOptions{NoiseFloorDB: &floor, Bootstrap: -1})
			if err != nil {
				t.Fatal(err)
			}
			if e := circErr(est.BearingDeg, 77.7, loaded.Symmetry); math.Abs(e) > 4*est.SigmaDeg+0.1 {
				t.Errorf("fit with calibrated pattern: %.2f ± %.2f, truth 77.7", est.BearingDeg, est.SigmaDeg)
			}
		})
	}
	// A half sweep cannot measure a pattern.
	loop := mustPattern(SmallLoop(30))
	if _, _, err := Calibrate(thermalSweep(1, loop, 10, 30, 0, 1, 180), 10, loop, CalibrateOptions{}); !errors.Is(err, ErrCoverage) {
		t.Errorf("half sweep: %v", err)
	}
}
