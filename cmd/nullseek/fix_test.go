package main

import (
	"bufio"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"nullseek/geo"
	"nullseek/internal/angle"
)

// runFixCmd runs the command line args (args[0] is "fix") in-process and
// returns what it wrote to stdout and stderr, and its error.
func runFixCmd(t *testing.T, args ...string) (string, error) {
	t.Helper()
	out, errOut, err := runCLI(t, args...)
	return out + errOut, err
}

// synthCSV writes exact bearings (geo.Direct/Inverse, checked against
// GeodSolve in package geo) to two transmitters of known position.
func synthCSV(t *testing.T, dir string) (path string, truth map[string][2]float64) {
	t.Helper()
	truth = map[string][2]float64{"TX/1": {45.10, 6.20}, "TX/2": {45.09, 6.23}}
	var b strings.Builder
	b.WriteString("ident,station,lat,lon,bearing_deg,sigma_deg,reference,time\n")
	stations := []struct {
		name string
		lat  float64
		lon  float64
	}{{"P", 45.12, 6.18}, {"Q", 45.115, 6.26}, {"R", 45.07, 6.21}}
	for _, id := range []string{"TX/1", "TX/2"} {
		tr := truth[id]
		for _, s := range stations {
			_, az, _ := geo.Inverse(s.lat, s.lon, tr[0], tr[1])
			fmt.Fprintf(&b, "%s,%s,%.7f,%.7f,%.6f,2,true,2025-10-01T12:00:00Z\n", id, s.name, s.lat, s.lon, angle.Wrap360(az))
		}
	}
	path = filepath.Join(dir, "b.csv")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return path, truth
}

func TestFixCommandJSONAndFiles(t *testing.T) {
	dir := t.TempDir()
	in, truth := synthCSV(t, dir)
	gj, kml, png := filepath.Join(dir, "f.geojson"), filepath.Join(dir, "f.kml"), filepath.Join(dir, "m.png")
	out, err := runFixCmd(t, "fix", in, "--json", "--geojson", gj, "--kml", kml, "--map", png,
		"--grid", "origin=45.13,6.17 cell=500 cols=A-P rows=1-14")
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	sc := bufio.NewScanner(strings.NewReader(out))
	n := 0
	for sc.Scan() {
		n++
		var m map[string]any
		if err := json.Unmarshal(sc.Bytes(), &m); err != nil {
			t.Fatalf("line %d not JSON: %v", n, err)
		}
		// Stable field names from issue #5.
		for _, k := range []string{"ident", "lat", "lon", "ellipse", "maidenhead", "grid_cell", "cells", "used", "rejected"} {
			if _, ok := m[k]; !ok {
				t.Errorf("missing %q in %s", k, sc.Text())
			}
		}
		el := m["ellipse"].(map[string]any)
		for _, k := range []string{"semi_major_m", "semi_minor_m", "orientation_deg", "probability"} {
			if _, ok := el[k]; !ok {
				t.Errorf("ellipse lacks %q", k)
			}
		}
		id := m["ident"].(string)
		d, _, _ := geo.Inverse(m["lat"].(float64), m["lon"].(float64), truth[id][0], truth[id][1])
		if d > 0.05 {
			t.Errorf("%s: %.3f m from the truth", id, d)
		}
		if len(m["maidenhead"].(string)) != 8 || m["grid_cell"] == "" || len(m["cells"].([]any)) == 0 {
			t.Errorf("%s: locator %v cell %v cells %v", id, m["maidenhead"], m["grid_cell"], m["cells"])
		}
	}
	if n != 2 {
		t.Errorf("%d JSON lines, want 2", n)
	}
	for _, p := range []string{gj, kml, png} {
		st, err := os.Stat(p)
		if err != nil || st.Size() < 500 {
			t.Errorf("%s: %v", p, err)
		}
	}
	leftovers, _ := filepath.Glob(filepath.Join(dir, ".*tmp*"))
	if len(leftovers) > 0 {
		t.Errorf("temporary files left: %v", leftovers)
	}
	// The human table names locator, cell and cells.
	out, err = runFixCmd(t, "fix", in)
	if err != nil || !strings.Contains(out, "locator") || !strings.Contains(out, "grid cell") || !strings.Contains(out, "automatic grid") {
		t.Errorf("table: %v\n%s", err, out)
	}
}

// Bad input: one error line naming row and field, non-zero exit, no files.
func TestFixCommandBadInput(t *testing.T) {
	const hdr = "ident,station,lat,lon,bearing_deg,sigma_deg,reference,time\n"
	good := "T,A,45.1,6.1,40,2,true,\n"
	cases := []struct{ name, csv, want string }{
		{"latitude", hdr + good + "T,B,95,6.2,300,2,true,\n", `row 3, field "lat"`},
		{"bearing text", hdr + good + "T,B,45.1,6.2,NW,2,true,\n", `row 3, field "bearing_deg"`},
		{"sigma zero", hdr + good + "T,B,45.1,6.2,300,0,true,\n", `row 3, field "sigma_deg"`},
		{"station twice", hdr + good + "U,A,45.2,6.1,300,2,true,\n", `row 3, field "lat/lon"`},
		{"missing column", "ident,station,lat,lon,bearing_deg,reference\nT,A,1,2,3,true\n", `row 1, field "sigma_deg"`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			in := filepath.Join(dir, "in.csv")
			os.WriteFile(in, []byte(c.csv), 0o644)
			gj := filepath.Join(dir, "out.geojson")
			out, err := runFixCmd(t, "fix", in, "--geojson", gj, "--map", filepath.Join(dir, "m.png"))
			if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
				t.Fatalf("err %v, want one line with %q (out %q)", err, c.want, out)
			}
			if entries, _ := os.ReadDir(dir); len(entries) != 1 {
				t.Errorf("files written on bad input: %v", entries)
			}
		})
	}
	// Fewer than two usable bearings: a refusal, exit non-zero.
	dir := t.TempDir()
	in := filepath.Join(dir, "one.csv")
	os.WriteFile(in, []byte(hdr+good), 0o644)
	out, err := runFixCmd(t, "fix", in, "--json")
	if err == nil || !strings.Contains(out, "fewer than two usable bearings") {
		t.Errorf("one bearing: err %v out %q", err, out)
	}
}

// Every numeric flag of fix has bounds: one error line naming the flag, a
// non-zero exit and no file written (issue: --cell-samples 100000 ran out of
// memory, 3037000500 overflowed makeslice).
func TestFixCommandFlagBounds(t *testing.T) {
	dir := t.TempDir()
	in, _ := synthCSV(t, dir)
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"--cell-samples", "100000"}, "--cell-samples"},
		{[]string{"--cell-samples", "3037000500"}, "--cell-samples"},
		{[]string{"--cell-samples", "0"}, "--cell-samples"},
		{[]string{"--cell-samples", "-3"}, "--cell-samples"},
		{[]string{"--probability", "1"}, "probability"},
		{[]string{"--probability", "NaN"}, "probability"},
		{[]string{"--probability", "-0.5"}, "probability"},
		{[]string{"--probability", "0"}, "--probability"},
		{[]string{"--poor-crossing", "120"}, "poor crossing"},
		{[]string{"--declination", "400"}, "--declination"},
		{[]string{"--declination", "Inf"}, "--declination"},
		{[]string{"--map-size", "0.5"}, "--map-size"},
		{[]string{"--map-size", "1e9"}, "--map-size"},
		{[]string{"--auto-cells", "1"}, "--auto-cells"},
		{[]string{"--auto-cells", "1000000"}, "--auto-cells"},
		{[]string{"--cluster-km", "-1"}, "--cluster-km"},
		{[]string{"--cluster-km", "NaN"}, "--cluster-km"},
		{[]string{"--grid", "origin=45.13,6.17 cell=0.5 cols=A-P rows=1-14"}, "cell size"},
		{[]string{"--grid", "origin=45.13,6.17 cell=10 cols=3000 rows=3000"}, "cells"},
		{[]string{"--grid", "origin=45.13,6.17 cell=10 cols=1000 rows=1000", "--cell-samples", "8"}, "--cell-samples"},
		{[]string{"--grid", "origin=95,6.17 cell=250"}, "latitude"},
		{[]string{"--map", filepath.Join(dir, "m.gif")}, "--map"},
	}
	for _, c := range cases {
		gj := filepath.Join(dir, "out.geojson")
		args := append([]string{"fix", in, "--geojson", gj}, c.args...)
		_, err := runFixCmd(t, args...)
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%v: err %v, want one line naming %q", c.args, err, c.want)
		}
		if _, serr := os.Stat(gj); serr == nil {
			t.Errorf("%v: GeoJSON written on bad flags", c.args)
			os.Remove(gj)
		}
	}
}

// A header-only bearings file is an error (it used to exit 0 with no
// output); JSON booleans are accepted where booleans are natural.
func TestFixCommandHeaderOnlyAndBooleans(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "h.csv")
	os.WriteFile(in, []byte("ident,station,lat,lon,bearing_deg,sigma_deg,reference,time\n"), 0o644)
	if _, err := runFixCmd(t, "fix", in); err == nil || !strings.Contains(err.Error(), "no bearing rows after the header") {
		t.Errorf("header only: %v", err)
	}
	js := filepath.Join(dir, "b.json")
	os.WriteFile(js, []byte(`[{"ident":"T","station":"A","lat":45.1,"lon":6.1,"bearing_deg":90,"sigma_deg":2,"reference":"true","ambiguous":false},
	{"ident":"T","station":"B","lat":45.11,"lon":6.15,"bearing_deg":180,"sigma_deg":2,"reference":"true","ambiguous":true}]`), 0o644)
	out, err := runFixCmd(t, "fix", js, "--json")
	if err != nil || !strings.Contains(out, `"type":"fix"`) {
		t.Errorf("JSON booleans: %v\n%s", err, out)
	}
}

// A map that cannot be written does not take the fixes with it: they are
// printed, the GeoJSON is written, and the exit status says what failed.
func TestFixCommandOutputFails(t *testing.T) {
	dir := t.TempDir()
	in, _ := synthCSV(t, dir)
	gj := filepath.Join(dir, "f.geojson")
	out, err := runFixCmd(t, "fix", in, "--geojson", gj, "--map", filepath.Join(dir, "missing", "m.png"))
	if err == nil || !strings.Contains(err.Error(), "m.png not written") {
		t.Errorf("err %v", err)
	}
	if !strings.Contains(out, "TX/1") || !strings.Contains(out, "TX/2") {
		t.Errorf("fixes not printed:\n%s", out)
	}
	if _, err := os.Stat(gj); err != nil {
		t.Errorf("GeoJSON not written: %v", err)
	}
}
