package position

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"os/exec"
	"strconv"
	"strings"
	"testing"
	"time"

	"nullseek/internal/testtool"
	"nullseek/station"
)

var t0 = time.Date(2026, 5, 1, 10, 0, 0, 0, time.UTC)

func at(lat, lon float64, dt time.Duration) Fix {
	return Fix{Time: t0.Add(dt), LatDeg: lat, LonDeg: lon, Mode: Mode2D, Source: "test"}
}

// TestTrackGeodesic: an interpolated position is the point at the time's
// fraction along the WGS84 geodesic between the fixes, checked against
// GeographicLib's GeodSolve (-I lat1 lon1 lat2 lon2 -F: points at
// fractions of the inverse line, GeographicLib 2.1.2) on a long step, one
// across the antimeridian and one near the pole.
func TestTrackGeodesic(t *testing.T) {
	bin := testtool.Need(t, "GeodSolve")
	for _, c := range []struct{ lat1, lon1, lat2, lon2, frac float64 }{
		{48.1173, 11.516666, 48.2, 11.7, 0.3},
		{-16.5, 179.999, -16.49, -179.995, 0.75},
		{89.99, 0, 89.99, 90, 0.5},
	} {
		var tr Track
		for _, f := range []Fix{at(c.lat1, c.lon1, 0), at(c.lat2, c.lon2, 10*time.Second)} {
			if err := tr.Add(f); err != nil {
				t.Fatal(err)
			}
		}
		when := t0.Add(time.Duration(c.frac * float64(10*time.Second)))
		got, err := tr.At(when)
		if err != nil {
			t.Fatal(err)
		}
		cmd := exec.Command(bin, "-I", fmt.Sprint(c.lat1), fmt.Sprint(c.lon1), fmt.Sprint(c.lat2), fmt.Sprint(c.lon2), "-F", "-p", "12")
		cmd.Stdin = strings.NewReader(fmt.Sprintln(c.frac))
		var out bytes.Buffer
		cmd.Stdout = &out
		if err := cmd.Run(); err != nil {
			t.Fatal(err)
		}
		f := strings.Fields(out.String())
		lat, _ := strconv.ParseFloat(f[0], 64)
		lon, _ := strconv.ParseFloat(f[1], 64)
		dlon := math.Remainder(got.LonDeg-lon, 360)
		if math.Abs(got.LatDeg-lat) > 1e-9 || math.Abs(dlon) > 1e-9 || got.Held != 0 || !got.Time.Equal(when) {
			t.Errorf("%+v: got %v, %v (held %v), GeodSolve %v, %v", c, got.LatDeg, got.LonDeg, got.Held, lat, lon)
		}
	}
}

// TestTrackLimits: the At rules (Track.At's doc) at their edges.
func TestTrackLimits(t *testing.T) {
	var tr Track
	if _, err := tr.At(t0); !errors.Is(err, ErrStale) {
		t.Errorf("empty track: %v", err)
	}
	alt := func(f Fix, m, hdop float64) Fix {
		f.AltHAEM, f.HDOP, f.Mode, f.Quality = ptr(m), ptr(hdop), Mode3D, 1
		return f
	}
	for _, f := range []Fix{
		alt(at(50, 8, 0), 100, 1),
		alt(at(50.001, 8, 2*time.Second), 110, 3),
		at(50.002, 8, 12*time.Second), // 10 s gap: interpolated
		at(50.010, 8, 23*time.Second), // 11 s gap: not
	} {
		if err := tr.Add(f); err != nil {
			t.Fatal(err)
		}
	}
	type want struct {
		dt   time.Duration
		lat  float64
		held time.Duration
		err  error
	}
	for _, w := range []want{
		{-5 * time.Second, 50, 5 * time.Second, nil}, // held at the staleness
		{-5*time.Second - 1, 0, 0, ErrStale},
		{0, 50, 0, nil},
		{time.Second, 50.0005, 0, nil},
		{7 * time.Second, 50.0015, 0, nil},
		{12 * time.Second, 50.002, 0, nil},
		{17 * time.Second, 50.002, 5 * time.Second, nil}, // in the long gap, near its start
		{17*time.Second + 500*time.Millisecond, 0, 0, ErrStale},
		{18 * time.Second, 50.010, 5 * time.Second, nil}, // near its end
		{28 * time.Second, 50.010, 5 * time.Second, nil},
		{28*time.Second + 1, 0, 0, ErrStale},
	} {
		got, err := tr.At(t0.Add(w.dt))
		if !errors.Is(err, w.err) {
			t.Errorf("%v: error %v, want %v", w.dt, err, w.err)
			continue
		}
		if err != nil {
			if !strings.Contains(err.Error(), "nearest fix") {
				t.Errorf("%v: %v does not say how far the nearest fix is", w.dt, err)
			}
			continue
		}
		// 0.001° of latitude is 111 m: the geodesic and a linear blend of
		// latitude agree to well under 1e-9° on so short a meridian step.
		if math.Abs(got.LatDeg-w.lat) > 1e-9 || got.Held != w.held {
			t.Errorf("%v: lat %v held %v, want %v held %v", w.dt, got.LatDeg, got.Held, w.lat, w.held)
		}
	}
	mid, _ := tr.At(t0.Add(time.Second))
	if *mid.AltHAEM != 105 || *mid.HDOP != 3 || mid.Mode != Mode3D || mid.Quality != 1 {
		t.Errorf("between 3D fixes: %+v", mid)
	}
	if m, _ := tr.At(t0.Add(7 * time.Second)); m.AltHAEM != nil || m.HDOP != nil || m.Mode != Mode2D {
		t.Errorf("3D to 2D: %+v", m)
	}

	if err := tr.Add(at(50, 8, 20*time.Second)); !errors.Is(err, ErrOutOfOrder) {
		t.Errorf("earlier fix: %v", err)
	}
	if err := tr.Add(at(50.02, 8, 23*time.Second)); err != nil || tr.Len() != 4 {
		t.Errorf("same time replaces: %v, %d fixes", err, tr.Len())
	}
	for _, bad := range []Fix{
		{Time: t0.Add(time.Minute), LatDeg: 50, LonDeg: 8, Mode: ModeNoFix},
		{LatDeg: 50, LonDeg: 8, Mode: Mode2D},
		{Time: t0.Add(time.Minute), LatDeg: 91, LonDeg: 8, Mode: Mode2D},
		{Time: t0.Add(time.Minute), LatDeg: math.NaN(), LonDeg: 8, Mode: Mode2D},
		{Time: t0.Add(time.Minute), LatDeg: 50, LonDeg: 8, Mode: Mode3D, AltHAEM: ptr(math.Inf(1))},
	} {
		if err := tr.Add(bad); !errors.Is(err, ErrNoFix) {
			t.Errorf("%+v: %v", bad, err)
		}
	}
	tr.Trim(t0.Add(13 * time.Second))
	if f := tr.Fixes(); len(f) != 2 || !f[0].Time.Equal(t0.Add(12*time.Second)) {
		t.Errorf("trim kept %+v", f)
	}
	tr.Staleness = time.Second
	if _, err := tr.At(t0.Add(25 * time.Second)); !errors.Is(err, ErrStale) {
		t.Errorf("staleness 1 s: %v", err)
	}
}

func TestFixed(t *testing.T) {
	s, err := NewFixed(-33.8568, 151.2153, ptr(25))
	if err != nil {
		t.Fatal(err)
	}
	f, err := s.At(t0)
	if err != nil || f.LatDeg != -33.8568 || f.LonDeg != 151.2153 || *f.AltHAEM != 25 || !f.Time.Equal(t0) || f.Mode != Mode3D || s.Name() != "fixed" {
		t.Errorf("%+v %v", f, err)
	}
	*f.AltHAEM = 0
	if g, _ := s.At(t0); *g.AltHAEM != 25 {
		t.Error("At hands out the source's own altitude")
	}
	if _, err := NewFixed(95, 0, nil); !errors.Is(err, ErrNoFix) {
		t.Errorf("latitude 95: %v", err)
	}
}

// TestFromStation: each station-file source becomes its Source; values
// are carried unchanged (plumbing, no numeric reference needed).
func TestFromStation(t *testing.T) {
	alt := 412.0
	src, err := FromStation(&station.File{Path: "s.toml", Position: station.Position{
		Source: station.PositionFixed, HasLatLon: true, LatDeg: 45.125, LonDeg: 6.0625, AltM: &alt}})
	if err != nil {
		t.Fatal(err)
	}
	if f, _ := src.At(t0); f.LatDeg != 45.125 || f.LonDeg != 6.0625 || *f.AltHAEM != 412 {
		t.Errorf("fixed: %+v", f)
	}
	src, err = FromStation(&station.File{Path: "s.toml", Position: station.Position{Source: station.PositionGPSD, GPSD: "127.0.0.1:2948"}})
	if err != nil || src.Name() != "gpsd 127.0.0.1:2948" {
		t.Errorf("gpsd: %v %v", src, err)
	}
	for _, p := range []station.Position{
		{Source: station.PositionNMEA, NMEA: "serial:/dev/ttyUSB0"},
		{Source: station.PositionFixed},
		{Source: "glonass"},
	} {
		if _, err := FromStation(&station.File{Path: "s.toml", Position: p}); err == nil || !strings.HasPrefix(err.Error(), "s.toml: position.") {
			t.Errorf("%+v: %v", p, err)
		}
	}
}
