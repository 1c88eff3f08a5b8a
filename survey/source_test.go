package survey

import (
	"fmt"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"nullseek/heading"
	"nullseek/internal/testtool"
	"nullseek/sdr"
)

// TestHeadingSourceChecks: every refusal of the heading source names the
// flag it comes from, and a magnetic track is turned to true by the
// declination given (true = magnetic + declination, east positive:
// common practice, and the convention of the World Magnetic Model).
func TestHeadingSourceChecks(t *testing.T) {
	ok := func() HeadingSource {
		return HeadingSource{Bearing: DefaultBearingOptions, Turn: &heading.SteadyTurn{StartDeg: 10, RateDegPerS: 30}}
	}
	info := sdr.Info{SampleRate: 48000, Samples: 48000 * 20, Start: time.Date(2026, 3, 1, 12, 0, 0, 0, time.UTC)}
	cases := []struct {
		name string
		edit func(h *HeadingSource)
		want string
	}{
		{"declination NaN", func(h *HeadingSource) { h.DeclinationDeg, h.DeclinationSet = math.NaN(), true }, "--declination"},
		{"declination 200", func(h *HeadingSource) { h.DeclinationDeg, h.DeclinationSet = 200, true }, "--declination"},
		{"station latitude 95", func(h *HeadingSource) { h.StationLat, h.HasStation = 95, true }, "--station"},
		{"site sigma NaN", func(h *HeadingSource) { h.Bearing.SiteSigmaDeg = math.NaN() }, "--site-sigma"},
		{"unknown reference", func(h *HeadingSource) { h.Ref = heading.Ref(7) }, "--heading-ref"},
		{"no source", func(h *HeadingSource) { h.Turn = nil }, "exactly one heading source"},
		{"two sources", func(h *HeadingSource) { h.LogPath = "h.csv" }, "exactly one heading source"},
		{"nmea rate without nmea", func(h *HeadingSource) { h.NMEARateHz = 10 }, "--nmea-rate"},
		{"magnetic without declination", func(h *HeadingSource) { h.Ref = heading.Magnetic }, "--declination"},
		{"missing log", func(h *HeadingSource) { h.Turn, h.LogPath = nil, filepath.Join(t.TempDir(), "none.csv") }, "--headings"},
	}
	for _, c := range cases {
		h := ok()
		c.edit(&h)
		_, err := h.Track(info, nil)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %v, want an error saying %q", c.name, err, c.want)
		}
	}
	h := ok()
	h.Ref, h.DeclinationDeg, h.DeclinationSet = heading.Magnetic, -4, true
	h.Turn.Ref = heading.Magnetic
	tr, err := h.Track(info, nil)
	if err != nil {
		t.Fatal(err)
	}
	if got, ok := tr.At(2); !ok || math.Abs(got-(10+60-4)) > 1e-9 {
		t.Errorf("magnetic 70° with declination −4° at 2 s: %v (%v), want 66° true", got, ok)
	}
	// A live capture's track stands in for the flags' source.
	h = ok()
	h.Turn, h.Live = nil, tr
	if _, err := h.Track(info, nil); err != nil {
		t.Errorf("live track: %v", err)
	}
}

// TestKnownBearing: the calibration bearing from --tx and --station is the
// geodesic azimuth GeographicLib's GeodSolve (-i) gives; --known-bearing
// is wrapped into [0, 360); misuse names the flags.
func TestKnownBearing(t *testing.T) {
	bin := testtool.Need(t, "GeodSolve")
	st := [2]float64{46.7, 7.4}
	for _, tx := range [][2]float64{{46.8, 7.45}, {46.69, 7.1}, {-12.5, 130.8}} {
		deg, how, err := KnownBearing{Tx: fmt.Sprintf("%v,%v", tx[0], tx[1]), Station: "s", HasStation: true, StationLat: st[0], StationLon: st[1]}.Degrees()
		if err != nil {
			t.Fatal(err)
		}
		out := testtool.Run(t, fmt.Sprintf("%v %v %v %v\n", st[0], st[1], tx[0], tx[1]), bin, "-i", "-p", "9")
		az, err := strconv.ParseFloat(strings.Fields(out)[0], 64)
		if err != nil {
			t.Fatal(err)
		}
		az = math.Mod(az+360, 360)
		if math.Abs(deg-az) > 1e-6 || !strings.Contains(how, "geodesic") {
			t.Errorf("to %v: %v (%s), GeodSolve %v", tx, deg, how, az)
		}
	}
	if deg, _, err := (KnownBearing{Bearing: "-90"}).Degrees(); err != nil || deg != 270 {
		t.Errorf("--known-bearing -90: %v %v, want 270", deg, err)
	}
	for _, c := range []struct {
		k    KnownBearing
		want string
	}{
		{KnownBearing{}, "--known-bearing DEG"},
		{KnownBearing{Bearing: "10", Tx: "1,2"}, "not both"},
		{KnownBearing{Bearing: "NaN"}, "--known-bearing"},
		{KnownBearing{Tx: "91,0", HasStation: true}, "--tx"},
		{KnownBearing{Tx: "1,2"}, "--station"},
		{KnownBearing{Tx: "46.7,7.4", Station: "46.7,7.4", HasStation: true, StationLat: 46.7, StationLon: 7.4}, "same place"},
	} {
		if _, _, err := c.k.Degrees(); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: %v, want %q", c.k, err, c.want)
		}
	}
}

// TestInputFlags: the recording flags' refusals name the flag; hertz
// values take the SI prefixes of units.ParseHz (BIPM SI brochure, table 7).
func TestInputFlags(t *testing.T) {
	f := InputFlags{Freq: "433.92MHz", RawFlags: sdr.RawFlags{Rate: "2.4M", Center: "433.9M"}}
	f.Receiver.ChannelRateHz, f.Receiver.MinBurstS = 48000, 0.1
	cfg, have, err := f.Config()
	if err != nil || !have || cfg.FreqHz != 433.92e6 || cfg.MergeGapS != 0 {
		t.Errorf("Config: %+v %v %v", cfg, have, err)
	}
	if p, err := f.Raw(); err != nil || p.SampleRate != 2.4e6 || p.CenterHz != 433.9e6 {
		t.Errorf("Raw: %+v %v", p, err)
	}
	for _, c := range []struct {
		f    InputFlags
		want string
	}{
		{InputFlags{Freq: "1M", Offset: "1k"}, "not both"},
		{InputFlags{Offset: "NaN"}, "--offset"},
		{InputFlags{Freq: "144.5mHz"}, "--freq"},
		{InputFlags{ChannelRateGiven: true}, "--channel-rate 0"},
	} {
		if _, _, err := c.f.Config(); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: %v, want %q", c.f, err, c.want)
		}
	}
}
