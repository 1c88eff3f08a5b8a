package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"time"

	"nullseek/internal/angle"
	"nullseek/internal/testtool"
)

// geodInverse asks GeographicLib's GeodSolve (Debian geographiclib-tools
// 2.x, "GeodSolve -i -p 9", WGS84) for the forward azimuth (degrees) and
// the distance (metres) of each pair of points lat1 lon1 lat2 lon2.
func geodInverse(t *testing.T, pairs [][4]float64) (azi, dist []float64) {
	t.Helper()
	prog := testtool.Need(t, "GeodSolve")
	var in strings.Builder
	for _, p := range pairs {
		fmt.Fprintf(&in, "%.9f %.9f %.9f %.9f\n", p[0], p[1], p[2], p[3])
	}
	cmd := exec.Command(prog, "-i", "-p", "9")
	cmd.Stdin = strings.NewReader(in.String())
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("GeodSolve: %v", err)
	}
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		f := strings.Fields(line) // azi1 azi2 s12
		if len(f) != 3 {
			t.Fatalf("GeodSolve line %q", line)
		}
		a, err1 := strconv.ParseFloat(f[0], 64)
		s, err2 := strconv.ParseFloat(f[2], 64)
		if err1 != nil || err2 != nil {
			t.Fatalf("GeodSolve line %q", line)
		}
		azi, dist = append(azi, angle.Wrap360(a)), append(dist, s)
	}
	if len(azi) != len(pairs) {
		t.Fatalf("GeodSolve gave %d lines for %d pairs", len(azi), len(pairs))
	}
	return azi, dist
}

// TestCLIBearingJSONToFix: what `bearing --json` prints is what `fix`
// needs, the same as the bearings CSV. An invented transmitter is heard
// at three invented stations; the bearing from each station to it is
// GeodSolve's azimuth (outside reference), and GNU Radio 3.10
// (testdata/bearing/make_rotating.py, command lines below) renders what
// each station's turning antenna hears: two small loops (one with a
// magnetic heading log, declination −5° east positive, invented) and a
// Yagi, each a 13 s transmission starting 2.5 s after the recording's
// core:datetime 2025-01-01T00:00:00Z. Then:
//
//   - each "bearing" line names the station, its position, the north
//     (true), the declination that turned the magnetic log, the alternate
//     bearing of a loop (the reciprocal) and the burst's UTC time (not
//     the capture start), and the CSV row says the same;
//   - fix on the JSON lines (files, and stdin), and on the CSVs, gives the
//     same fix, within 25 m of the truth (the bearings are good to a few
//     hundredths of a degree at 2–3 km);
//   - the fix is the geodesic intersection GeodSolve agrees with: the
//     azimuth from each station to the fix is within 0.2° of that
//     station's bearing (or its reciprocal for a loop).
func TestCLIBearingJSONToFix(t *testing.T) {
	txLat, txLon := 52.2300, 5.8900 // invented
	stations := []struct {
		name     string
		lat, lon float64
		pattern  string
		decl     string // magnetic heading log with this declination ("": true)
	}{
		{"s1", 52.2424, 5.8672, "loop", ""},
		{"s2", 52.2105, 5.8731, "loop", "-5"},
		{"s3", 52.2362, 5.9205, "yagi", ""},
	}
	var pairs [][4]float64
	for _, s := range stations {
		pairs = append(pairs, [4]float64{s.lat, s.lon, txLat, txLon})
	}
	truthAz, truthDist := geodInverse(t, pairs)
	dir := t.TempDir()
	var all strings.Builder
	var jsonFiles, csvFiles []string
	for i, s := range stations {
		rec := filepath.Join(dir, s.name)
		args := []string{"--rate", "96000", "--seconds", "16", "--bursts", "13:30", "--first-on", "2.5",
			"--pattern", s.pattern, "--bearing", fmt.Sprintf("%.6f", truthAz[i]), "--seed", strconv.Itoa(20 + i)}
		cli := []string{"bearing", filepath.Join(rec, "rotating_loop.sigmf-meta"), "--offset", "25000",
			"--headings", filepath.Join(rec, "rotating_loop_heading.csv"), "--antenna", s.pattern,
			"--station", fmt.Sprintf("%.6f,%.6f", s.lat, s.lon), "--json", "--bearings-csv", s.name + ".csv"}
		if s.decl != "" {
			args = append(args, "--declination", s.decl)
			cli = append(cli, "--heading-ref", "magnetic", "--declination", s.decl)
		}
		makeRotating(t, rec, args...)
		r := cliRun(t, dir, cli...)
		if r.code != 0 {
			t.Fatalf("%s: bearing exit %d\n%s", s.name, r.code, r.stderr)
		}
		b := txBearing(t, r.stdout)
		t.Logf("%s (%s, %.0f m away): bearing %v (alt %v) ± %v, truth %.4f°", s.name, s.pattern, truthDist[i],
			b["bearing_deg"], b["alt_bearing_deg"], b["sigma_deg"], truthAz[i])
		if e := loopErr(b, truthAz[i]); e > 0.2 {
			t.Errorf("%s: bearing %v, GeodSolve azimuth %.4f° (error %.3f°)", s.name, b["bearing_deg"], truthAz[i], e)
		}
		// what fix needs, on the line itself
		if b["station"] != fmt.Sprintf("%.5f %.5f", s.lat, s.lon) || b["lat"] != s.lat || b["lon"] != s.lon || b["reference"] != "true" {
			t.Errorf("%s: station, position or reference missing or wrong: %v", s.name, b)
		}
		when, err := time.Parse(time.RFC3339, fmt.Sprint(b["time"]))
		// make_rotating.py: on from --first-on 2.5 s after core:datetime
		if want := time.Date(2025, 1, 1, 0, 0, 2, 500e6, time.UTC); err != nil || when.Sub(want).Abs() > 50*time.Millisecond {
			t.Errorf("%s: time %v, want the burst's start %v (not the capture start)", s.name, b["time"], want)
		}
		if d, ok := b["declination_deg"].(float64); (s.decl == "") == ok || (ok && fmt.Sprint(d) != s.decl) {
			t.Errorf("%s: declination_deg %v, want %q (the one that turned the magnetic log)", s.name, b["declination_deg"], s.decl)
		}
		alt, hasAlt := b["alt_bearing_deg"].(float64)
		if amb := b["ambiguous"] == true; amb != (s.pattern == "loop") || amb != hasAlt ||
			(hasAlt && math.Abs(angle.Diff(alt, b["bearing_deg"].(float64)+180)) > 0.011) {
			t.Errorf("%s (%s): ambiguous %v, alt_bearing_deg %v: want a loop's reciprocal", s.name, s.pattern, b["ambiguous"], b["alt_bearing_deg"])
		}
		csvData, err := os.ReadFile(filepath.Join(dir, s.name+".csv"))
		if err != nil {
			t.Fatal(err)
		}
		rows := strings.Split(strings.TrimSpace(string(csvData)), "\n")
		if len(rows) != 2 || !strings.Contains(rows[0], "alt_bearing_deg") ||
			!strings.Contains(rows[1], fmt.Sprint(b["time"])) || !strings.Contains(rows[1], fmt.Sprint(b["station"])) {
			t.Errorf("%s: CSV does not carry the line's station and time:\n%s", s.name, csvData)
		}
		jf := filepath.Join(dir, s.name+".json")
		writeFile(t, jf, []byte(r.stdout))
		jsonFiles, csvFiles = append(jsonFiles, jf), append(csvFiles, filepath.Join(dir, s.name+".csv"))
		all.WriteString(r.stdout)
	}

	fixes := map[string]map[string]any{}
	for name, args := range map[string][]string{"json": jsonFiles, "csv": csvFiles} {
		r := cliRun(t, dir, append(append([]string{"fix"}, args...), "--json")...)
		if r.code != 0 {
			t.Fatalf("fix on the %s files: exit %d\n%s", name, r.code, r.stderr)
		}
		fixes[name] = fixLine(t, r.stdout)
	}
	var out, errb bytes.Buffer
	if err := execute([]string{"fix", "-", "--json"}, strings.NewReader(all.String()), &out, &errb); err != nil {
		t.Fatalf("fix on bearing --json from stdin: %v\n%s", err, errb.String())
	}
	fixes["stdin"] = fixLine(t, out.String())
	for _, name := range []string{"json", "stdin"} {
		if !reflect.DeepEqual(fixes[name], fixes["csv"]) {
			t.Errorf("fix from %s differs from fix from the CSVs:\n%v\n%v", name, fixes[name], fixes["csv"])
		}
	}
	f := fixes["json"]
	fLat, fLon := f["lat"].(float64), f["lon"].(float64)
	pairs = [][4]float64{{txLat, txLon, fLat, fLon}}
	for _, s := range stations {
		pairs = append(pairs, [4]float64{s.lat, s.lon, fLat, fLon})
	}
	az, dist := geodInverse(t, pairs)
	t.Logf("fix %.7f,%.7f: %.2f m from the truth (GeodSolve), ellipse 95%% semi-axes %v", fLat, fLon, dist[0], f["ellipse"])
	if dist[0] > 25 {
		t.Errorf("fix %.7f,%.7f is %.1f m from the truth %v,%v", fLat, fLon, dist[0], txLat, txLon)
	}
	used, _ := f["used"].([]any)
	if len(used) != len(stations) {
		t.Fatalf("fix used %d bearings, want %d: %v", len(used), len(stations), f)
	}
	for i, u := range used {
		m := u.(map[string]any)
		b := m["bearing_deg"].(float64)
		if e := math.Abs(angle.Diff(az[i+1], b)); e > 0.2 {
			t.Errorf("station %v: GeodSolve azimuth to the fix %.3f°, bearing used %.3f° (%.3f° off the intersection)", m["station"], az[i+1], b, e)
		}
	}
}

// fixLine is the one "fix" line of fix --json, without the input rows
// ("row" in used and rejected: a JSON line and a CSV row count apart).
func fixLine(t *testing.T, stdout string) map[string]any {
	t.Helper()
	var fix map[string]any
	for _, m := range jsonLines(t, stdout) {
		if m["type"] == "fix" {
			if fix != nil {
				t.Fatalf("more than one fix:\n%s", stdout)
			}
			fix = m
		}
	}
	if fix == nil {
		t.Fatalf("no fix line:\n%s", stdout)
	}
	for _, k := range []string{"used", "rejected"} {
		l, _ := fix[k].([]any)
		for _, u := range l {
			delete(u.(map[string]any), "row")
		}
	}
	b, _ := json.Marshal(fix)
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	return m
}
