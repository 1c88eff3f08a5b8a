package survey

import (
	"context"
	"nullseek/ident"
	"nullseek/ident/morse"
	"testing"
	"time"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/receiver"
	"nullseek/sim"
)

// TestKeyingModes: the same identifier keyed as a tone on FM (MCW), as a
// tone on AM (A2A, the mode of many 2 m direction-finding events; IARU R2
// ARDF rules v1.0, 2016) and as a keyed carrier (A1A) is detected and read in auto mode. The
// keying comes from morse.Encode, checked against ITU-R M.1677-1 timing.
func TestKeyingModes(t *testing.T) {
	flat, err := bearing.BodyShield(1) // nearly omnidirectional receiving antenna
	if err != nil {
		t.Fatal(err)
	}
	sc := sim.Scenario{
		Name: "modes", Start: time.Date(2026, 3, 1, 12, 0, 0, 0, time.UTC),
		CenterHz: 433.9e6, ChannelHz: 433.92e6, SampleRate: 96000, DurationS: 40,
		NoiseDBFS: -45, DeviationHz: 2500, Seed: 3,
	}
	ids := []string{"TEST/7", "QRP/2", "N0CALL/9"}
	modes := []morse.Mode{morse.ModeFM, morse.ModeAM, morse.ModeCW}
	for i, id := range ids {
		sc.Beacons = append(sc.Beacons, sim.Beacon{ID: id, Lat: 46.0 + 0.01*float64(i), Lon: 7.0, ToneHz: 800,
			WPM: 16, CarrierHz: float64(100 * i), LevelDB: -15, FirstOnS: 1 + 13*float64(i), OnS: 11,
			PeriodS: 120, Mode: modes[i]})
	}
	st := sim.Station{Name: "s", Lat: 46.05, Lon: 7.05, Antenna: flat, Turn: heading.SteadyTurn{RateDegPerS: 10}}
	src, err := sim.NewSource(sc, st)
	if err != nil {
		t.Fatal(err)
	}
	// Keyed carrier has real silences between elements and words: keep them
	// inside one burst.
	res, err := Run(context.Background(), src, Options{Ident: ident.Options{IDs: ids}, Receiver: receiverConfig(sc.ChannelHz, 1.0)}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Records) != 3 {
		for _, r := range res.Records {
			t.Logf("burst %d %.2f–%.2f s %s %q", r.Index, r.StartS, r.EndS, r.Mode, r.Text)
		}
		t.Fatalf("%d bursts, want 3", len(res.Records))
	}
	for i, r := range res.Records {
		if r.Mode != modes[i].String() || r.Ident != ids[i] {
			t.Errorf("burst %d: mode %s ident %s (%q), want %s %s", i+1, r.Mode, r.Ident, r.Text, modes[i], ids[i])
		}
	}
}

func receiverConfig(freqHz, mergeGapS float64) (c receiver.Config) {
	c.FreqHz = freqHz
	c.MergeGapS = mergeGapS
	return c
}
