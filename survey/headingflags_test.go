package survey

import (
	"math"
	"strings"
	"testing"

	"nullseek/heading"
)

// TestHeadingFlags: the heading flags parse into a source as their
// grammars say (a steady turn START:RATE[:T0], a LAT,LON position in
// decimal degrees, "magnetic" as the reference), and each refusal names
// its flag, checked in the order the flags are listed.
func TestHeadingFlags(t *testing.T) {
	f := DefaultHeadingFlags()
	if f.Ref != "true" || f.Bearing.Antenna != DefaultBearingOptions.Antenna {
		t.Fatalf("defaults: %+v", f)
	}
	f.Turn, f.Ref, f.Station, f.DeclinationDeg, f.DeclinationSet = "350:-12:2", "magnetic", "46.5,-7.25", 3, true
	h, err := f.Source(nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	if h.Turn == nil || h.Turn.StartDeg != 350 || h.Turn.RateDegPerS != -12 || h.Turn.StartS != 2 || h.Turn.Ref != heading.Magnetic ||
		h.Ref != heading.Magnetic || !h.HasStation || h.StationLat != 46.5 || h.StationLon != -7.25 || h.DeclinationDeg != 3 || !h.DeclinationSet {
		t.Errorf("source %+v (turn %+v)", h, h.Turn)
	}
	for _, c := range []struct {
		name string
		edit func(*HeadingFlags)
		want string
	}{
		{"site sigma first", func(f *HeadingFlags) { f.Bearing.SiteSigmaDeg, f.Ref = math.NaN(), "north" }, "--site-sigma"},
		{"reference word", func(f *HeadingFlags) { f.Ref = "mag" }, "--heading-ref"},
		{"declination before station", func(f *HeadingFlags) { f.DeclinationDeg, f.DeclinationSet, f.Station = 200, true, "x" }, "--declination"},
		{"station", func(f *HeadingFlags) { f.Station = "95,0" }, "--station"},
		{"turn", func(f *HeadingFlags) { f.Turn = "10" }, "--turn"},
	} {
		g := DefaultHeadingFlags()
		c.edit(&g)
		if _, err := g.Source(nil, nil); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %v, want an error naming %s", c.name, err, c.want)
		}
	}
}
