package main

import (
	"fmt"
	"math"
	"nullseek/ident/morse"
	"nullseek/internal/angle"
	"nullseek/internal/atomicfile"
	"nullseek/internal/testtool"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"nullseek/bearing"
	"nullseek/demo"
	"nullseek/geo"
	"nullseek/heading"
	"nullseek/sim"
)

// calScene is an invented scene for the calibration round trip: one
// station whose Yagi is narrower and has less front-to-back than the
// nominal one, and whose heading sensor reads mountErr degrees low.
type calScene struct {
	lat0, lon0 float64
	real       bearing.Pattern
	mountErr   float64
}

func newCalScene(t *testing.T) calScene {
	real, err := bearing.Yagi(44, 12)
	if err != nil {
		t.Fatal(err)
	}
	return calScene{lat0: 46.8127, lon0: 7.4415, real: real, mountErr: 7.3}
}

func (c calScene) at(eM, nM float64) (float64, float64) { return geo.FromENU(c.lat0, c.lon0, eM, nM) }

// render writes the station's recording of the given beacons to dir/NAME.
func (c calScene) render(t *testing.T, dir, name string, turn heading.SteadyTurn, durS float64, beacons ...sim.Beacon) string {
	t.Helper()
	sc := sim.Scenario{
		Name: name, Start: time.Date(2026, 4, 11, 8, 0, 0, 0, time.UTC),
		CenterHz: 145.0e6, ChannelHz: 145.0125e6, SampleRate: 96000, DurationS: durS,
		NoiseDBFS: -45, DeviationHz: 2500, Seed: 3, Beacons: beacons,
	}
	st := sim.Station{Name: name, Lat: c.lat0, Lon: c.lon0, Antenna: c.real, AntennaName: "yagi",
		Turn: turn, HeadingRef: heading.True, RippleDB: 0.3}
	var outs atomicfile.Set
	if err := demo.StageStationIQ(&outs, sc, st, dir); err != nil {
		t.Fatal(err)
	}
	if err := outs.Commit(); err != nil {
		t.Fatal(err)
	}
	return filepath.Join(dir, "station-"+name+".sigmf-meta")
}

func calBeacon(id string, lat, lon, firstS, onS, tone float64) sim.Beacon {
	return sim.Beacon{ID: id, Lat: lat, Lon: lon, ToneHz: tone, WPM: 18, CarrierHz: 60, LevelDB: -3,
		FirstOnS: firstS, OnS: onS, PeriodS: 1000, Mode: morse.ModeFM}
}

// geodAzimuth runs GeographicLib's GeodSolve -i (2.1.2 here) for the
// forward azimuth from point 1 to point 2, degrees in [0, 360).
func geodAzimuth(t *testing.T, lat1, lon1, lat2, lon2 float64) float64 {
	t.Helper()
	bin := testtool.Need(t, "GeodSolve")
	out := testtool.Run(t, fmt.Sprintf("%.10f %.10f %.10f %.10f\n", lat1, lon1, lat2, lon2), bin, "-i", "-p", "9")
	f := strings.Fields(out)
	if len(f) != 3 {
		t.Fatalf("GeodSolve output %q", out)
	}
	az, err := strconv.ParseFloat(f[0], 64)
	if err != nil {
		t.Fatal(err)
	}
	return math.Mod(az+360, 360)
}

// TestCalibrateRoundTrip: calibrate on a transmitter at a known position
// with a heading sensor that is 7.3° off and a real pattern unlike the
// nominal one, then fit another transmitter from the same station with the
// saved pattern and offset. The known bearings are checked against
// GeodSolve; the truths are the invented scene's, computed here.
func TestCalibrateRoundTrip(t *testing.T) {
	sc := newCalScene(t)
	dir := t.TempDir()
	txLat, txLon := sc.at(1500, 2200)
	otherLat, otherLon := sc.at(-900, 700)
	// Calibration: the antenna turns 30°/s from 15° true; the sensor reads
	// mountErr less. The calibration transmitter keys first, another one
	// after it.
	calRec := sc.render(t, dir, "cal", heading.SteadyTurn{StartDeg: 15, RateDegPerS: 30}, 28,
		calBeacon("N0CALL/1", txLat, txLon, 1, 13, 800), calBeacon("N0CALL/2", otherLat, otherLon, 15.5, 12, 650))
	patPath := filepath.Join(dir, "pattern.json")
	sensor := func(start, rate float64) string { return fmt.Sprintf("%.3f:%g", start-sc.mountErr, rate) }
	r := inProcess(t, "calibrate", calRec, "--freq", "145.0125M", "--ids", "N0CALL/1,N0CALL/2",
		"--ident", "N0CALL/1", "--tx", fmt.Sprintf("%.8f,%.8f", txLat, txLon),
		"--station", fmt.Sprintf("%.8f,%.8f", sc.lat0, sc.lon0), "--turn", sensor(15, 30),
		"--antenna", "yagi", "--out", patPath, "--json")
	if r.code != 0 {
		t.Fatalf("calibrate: exit %d\n%s\n%s", r.code, r.stdout, r.stderr)
	}
	lines := jsonLines(t, r.stdout)
	if len(lines) != 1 {
		t.Fatalf("want one JSON object, got:\n%s", r.stdout)
	}
	c := lines[0]
	known := geodAzimuth(t, sc.lat0, sc.lon0, txLat, txLon)
	// GeographicLib GeodSolve 2.1.2 (WGS84) is the reference for the
	// known bearing station → transmitter.
	if kb := c["known_bearing_deg"].(float64); math.Abs(angle.Wrap180(kb-known)) > 2e-4 {
		t.Errorf("known bearing %.5f°, GeodSolve %.5f°", kb, known)
	}
	off, sig := c["mount_offset_deg"].(float64), c["north_offset_sigma_deg"].(float64)
	t.Logf("calibration: offset %+.3f° ± %.3f° (truth %+.1f°), %v bursts, %v points, beamwidth %v°, F/B %v dB",
		off, sig, sc.mountErr, c["bursts_used"], c["points_used"], c["width_deg"], c["front_back_db"])
	// The level noise alone is in sig; the 0.3 dB site ripple is not, so
	// the offset is held to a degree (a 0.3 dB ripple on a 44° beam's
	// flank, about 0.25 dB/°, moves it about that much).
	if d := off - sc.mountErr; math.Abs(d) > 1 {
		t.Errorf("measured mount offset %.3f° ± %.3f°, truth %.1f°", off, sig, sc.mountErr)
	}
	if c["ident"] != "N0CALL/1" || c["bursts_used"].(float64) != 1 {
		t.Errorf("calibrated on %v with %v bursts, want N0CALL/1's one burst", c["ident"], c["bursts_used"])
	}
	// The table for people says how to use the result.
	pat2 := filepath.Join(dir, "pattern2.json")
	rt := inProcess(t, "calibrate", calRec, "--freq", "145.0125M", "--ids", "N0CALL/1,N0CALL/2",
		"--ident", "N0CALL/1", "--known-bearing", fmt.Sprint(known), "--turn", sensor(15, 30), "--out", pat2)
	// The pattern file carries the mount offset: the advice needs no
	// --mount-offset, and says what it carries.
	if want := fmt.Sprintf("--antenna %s (it carries the mount offset %+.2f°", pat2, off); rt.code != 0 || !strings.Contains(rt.stdout, want) {
		t.Errorf("calibrate table (exit %d) does not say %q:\n%s%s", rt.code, want, rt.stdout, rt.stderr)
	}
	t.Logf("calibrate output:\n%s", rt.stdout)
	// The measured pattern against the one the scene rendered with.
	pat, err := bearing.LoadPattern(patPath)
	if err != nil {
		t.Fatal(err)
	}
	want, got := bearing.Shape(sc.real), bearing.Shape(pat)
	if math.Abs(got.WidthDeg-want.WidthDeg) > 3 || math.Abs(got.FrontBackDB-want.FrontBackDB) > 1.5 {
		t.Errorf("measured pattern: beamwidth %.1f° F/B %.1f dB; rendered with %.1f° and %.1f dB", got.WidthDeg, got.FrontBackDB, want.WidthDeg, want.FrontBackDB)
	}

	// Another transmitter, another recording from the same station, the
	// antenna turning the other way.
	fxLat, fxLon := sc.at(2100, -1300)
	chk := sc.render(t, dir, "check", heading.SteadyTurn{StartDeg: 200, RateDegPerS: -30}, 16,
		calBeacon("N0CALL/3", fxLat, fxLon, 1, 13, 720))
	truth := geodAzimuth(t, sc.lat0, sc.lon0, fxLat, fxLon) // GeodSolve 2.1.2, WGS84
	fit := func(extra ...string) (float64, float64) {
		t.Helper()
		args := append([]string{"bearing", chk, "--freq", "145.0125M", "--ids", "N0CALL/3",
			"--turn", sensor(200, -30), "--json"}, extra...)
		r := inProcess(t, args...)
		if r.code != 0 {
			t.Fatalf("bearing %v: exit %d\n%s", extra, r.code, r.stderr)
		}
		for _, m := range jsonLines(t, r.stdout) {
			if m["type"] == "bearing" && m["bearing_deg"] != nil {
				return m["bearing_deg"].(float64), m["sigma_deg"].(float64)
			}
		}
		t.Fatalf("no bearing:\n%s\n%s", r.stdout, r.stderr)
		return 0, 0
	}
	// The sigmas are the ones `bearing` reports: fit and the default 3°
	// site error in quadrature.
	// The file's own mount offset is used without --mount-offset; giving
	// the same again changes nothing; a different one is refused.
	b, s := fit("--antenna", patPath)
	e := angle.Wrap180(b - truth)
	t.Logf("calibrated fit: %.2f° ± %.2f°, truth %.2f°, error %+.2f°", b, s, truth, e)
	if math.Abs(e) > s || math.Abs(e) > 1.5 {
		t.Errorf("with the calibration: %.2f° ± %.2f°, truth %.2f° (error %+.2f°): want within 1σ and 1.5°", b, s, truth, e)
	}
	if b2, _ := fit("--antenna", patPath, "--mount-offset", fmt.Sprintf("%.3f", off)); math.Abs(angle.Wrap180(b2-b)) > 0.01 {
		t.Errorf("repeating the file's mount offset moved the bearing from %.3f° to %.3f°", b, b2)
	}
	rr := inProcess(t, "bearing", chk, "--freq", "145.0125M", "--ids", "N0CALL/3", "--turn", sensor(200, -30),
		"--antenna", patPath, "--mount-offset", fmt.Sprintf("%.3f", off+5))
	if rr.code == 0 || !strings.Contains(rr.stderr, "carries the mount offset") {
		t.Errorf("a --mount-offset other than the file's: exit %d, stderr %q; want a refusal naming the file's offset", rr.code, rr.stderr)
	}
	// Without it the sensor's error shows (the check above can fail).
	b0, s0 := fit("--antenna", "yagi")
	e0 := angle.Wrap180(b0 - truth)
	t.Logf("uncalibrated fit: %.2f° ± %.2f°, error %+.2f°", b0, s0, e0)
	// The fit now says how badly the nominal pattern fits (its sigma
	// covers the error), so the check is that the error is the sensor's
	// and the sigma wider than the calibrated fit's.
	if e0 > -5 || !(s0 > s) {
		t.Errorf("without the calibration the error is %+.2f° ± %.2f°, want about %+.1f° and a sigma wider than the calibrated %.2f°", e0, s0, -sc.mountErr, s)
	}
}

// TestCalibrateErrors: bad or missing flags give one clear line.
func TestCalibrateErrors(t *testing.T) {
	dir := t.TempDir()
	rec := filepath.Join(dir, "none.sigmf-meta")
	cases := []struct {
		name string
		args []string
		want string
	}{
		{"no bearing", []string{rec, "--out", "p.json", "--turn", "0:30"}, "--tx"},
		{"tx without station", []string{rec, "--tx", "46.8,7.4", "--out", "p.json"}, "--station"},
		{"both", []string{rec, "--tx", "46.8,7.4", "--known-bearing", "10", "--out", "p.json"}, "not both"},
		{"bad tx", []string{rec, "--tx", "46.8", "--station", "46.7,7.4", "--out", "p.json"}, "--tx"},
		{"bad known", []string{rec, "--known-bearing", "east", "--out", "p.json"}, "--known-bearing"},
		{"same place", []string{rec, "--tx", "46.8,7.4", "--station", "46.8,7.4", "--out", "p.json"}, "same place"},
		{"no out", []string{rec, "--known-bearing", "10"}, "--out"},
		{"missing file", []string{rec, "--known-bearing", "10", "--out", filepath.Join(dir, "p.json"), "--freq", "145M", "--turn", "0:30"}, "none.sigmf"},
	}
	for _, tc := range cases {
		r := inProcess(t, append([]string{"calibrate"}, tc.args...)...)
		t.Run(tc.name, func(t *testing.T) { oneLine(t, r, tc.want) })
	}
	if _, err := os.Stat(filepath.Join(dir, "p.json")); err == nil {
		t.Error("a pattern file was written by a failed run")
	}
}
