package survey

import (
	"context"
	"math"
	"nullseek/ident"
	"nullseek/ident/morse"
	"strings"
	"testing"
	"time"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/internal/angle"
	"nullseek/receiver"
	"nullseek/sim"
)

// TestClippedSweep: a transmitter so close that the receiver's ADC hits
// its rails while the Yagi points at it. The readings taken at the rails
// understate the level (an 8-bit RTL-SDR clips at 0 and 255, common
// practice), so the fit must leave them out and say so, and still find the
// bearing from the pattern's flanks. The truth bearing is Inverse's
// (checked against GeodSolve in geo).
func TestClippedSweep(t *testing.T) {
	yagi, err := bearing.Yagi(60, 18)
	if err != nil {
		t.Fatal(err)
	}
	sc := sim.Scenario{Name: "clip", Start: time.Date(2026, 4, 2, 8, 0, 0, 0, time.UTC),
		CenterHz: 145e6, ChannelHz: 145.02e6, SampleRate: 96000, DurationS: 14, NoiseDBFS: -45,
		DeviationHz: 2500, Seed: 5}
	sc.Beacons = []sim.Beacon{{ID: "TEST/1", Lat: 48.001, Lon: 11.0, ToneHz: 800, WPM: 18,
		LevelDB: -16, FirstOnS: 1, OnS: 12.5, PeriodS: 60, Mode: morse.ModeFM}}
	st := sim.Station{Name: "near", Lat: 48.0, Lon: 11.0005, Antenna: yagi,
		Turn: heading.SteadyTurn{StartDeg: 100, RateDegPerS: 30}}
	src, err := sim.NewSource(sc, st)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Run(context.Background(), src, Options{Ident: ident.Options{IDs: []string{"TEST/1"}},
		Receiver: receiver.Config{FreqHz: sc.ChannelHz, MergeGapS: 1.5}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Records) != 1 || res.Records[0].Clipped == 0 {
		t.Fatalf("want one clipped burst, got %d bursts", len(res.Records))
	}
	tr, err := st.Turn.Track(0, sc.DurationS, 20)
	if err != nil {
		t.Fatal(err)
	}
	bbs, _ := Bearings(res, tr, yagi, bearing.FitOptions{}, 0)
	if bbs[0].Err != nil {
		t.Fatal(bbs[0].Err)
	}
	e := bbs[0].Est
	if !strings.Contains(strings.Join(e.Warnings, ";"), "clipping") {
		t.Errorf("no clipping warning: %v", e.Warnings)
	}
	truth := sim.TrueBearing(st, sc.Beacons[0])
	if d := angle.Wrap180(e.BearingDeg - truth); math.Abs(d) > 2 {
		t.Errorf("bearing %.2f°, truth %.2f° (clipped burst: %.1f%% of samples)", e.BearingDeg, truth, 100*res.Records[0].Clipped)
	}
	t.Logf("clipped %.1f%% of samples; bearing %.2f° ± %.2f°, truth %.2f°; %v", 100*res.Records[0].Clipped, e.BearingDeg, e.SigmaDeg, truth, e.Warnings)
}
