package survey

import (
	"context"
	"strings"
	"testing"

	"nullseek/bearing"
	"nullseek/ident"
	"nullseek/receiver"
	"nullseek/sim"
)

// TestDemoRaisesNoWarnings: warnings fire only when something is wrong.
// The demo's scene (sim.Demo: invented, three stations, a site ripple of
// the size a real site has) is clean — nothing in it is wrong — so no
// burst's bearing may carry a flag or a warning, and every burst gives
// one. (This is a check on what the tool says, not on its accuracy: the
// accuracy checks are against GNU Radio recordings.)
func TestDemoRaisesNoWarnings(t *testing.T) {
	sc, err := sim.Demo()
	if err != nil {
		t.Fatal(err)
	}
	// two of the demo's 45 s cycles: six bursts a station
	sc.DurationS = 90 // ends in the gap after the sixth burst (76–88 s), so none is cut
	var ids []string
	for _, b := range sc.Beacons {
		ids = append(ids, b.ID)
	}
	stations := sc.Stations
	if testing.Short() {
		stations = stations[:1]
	}
	for _, st := range stations {
		src, err := sim.NewSource(sc, st)
		if err != nil {
			t.Fatal(err)
		}
		res, err := Run(context.Background(), src, Options{Receiver: receiver.Config{FreqHz: sc.ChannelHz, MergeGapS: 1.5}, Ident: ident.Options{IDs: ids}}, nil)
		if err != nil {
			t.Fatal(err)
		}
		tr, err := st.Turn.Track(0, sc.DurationS, 10)
		if err != nil {
			t.Fatal(err)
		}
		bbs, txs := Bearings(res, tr, st.Antenna, bearing.FitOptions{}, DefaultSiteSigmaDeg)
		for _, b := range bbs {
			if b.Err != nil {
				t.Errorf("%s burst %d: no bearing: %v", st.Name, b.Index, b.Err)
				continue
			}
			if len(b.Est.Flags) > 0 || len(b.Est.Warnings) > 0 {
				t.Errorf("%s burst %d: flags %v, warnings %q on clean data", st.Name, b.Index, b.Est.Flags, strings.Join(b.Est.Warnings, "; "))
			}
		}
		for _, x := range txs {
			if x.Err != nil || len(x.Combined.Warnings) > 0 || len(x.Flags) > 0 {
				t.Errorf("%s %s: %v, warnings %q, flags %v", st.Name, x.Ident, x.Err, x.Combined.Warnings, x.Flags)
			}
		}
	}
}
