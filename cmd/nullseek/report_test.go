package main

import (
	"bytes"
	"context"
	"encoding/base64"
	"encoding/json"
	"fmt"
	"html"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"nullseek/bearing"
	"nullseek/demo"
	"nullseek/geo"
	"nullseek/ident/fingerprint"
	"nullseek/ident/schedule"
	"nullseek/report/reporttest"
	"nullseek/sim"
	"nullseek/survey"
)

var dataURI = regexp.MustCompile(`src="data:image/(png|svg\+xml);base64,([A-Za-z0-9+/=]*)"`)

// embeddedImages returns the bytes of every image embedded in the page.
func embeddedImages(t *testing.T, page string) [][]byte {
	t.Helper()
	var out [][]byte
	// html/template writes + as &#43; in attributes
	for _, m := range dataURI.FindAllStringSubmatch(html.UnescapeString(page), -1) {
		b, err := base64.StdEncoding.DecodeString(m[2])
		if err != nil {
			t.Fatalf("embedded image: %v", err)
		}
		out = append(out, b)
	}
	return out
}

// demoGrid is the event grid the demo fixes on, as fix --grid takes it.
func demoGrid(t *testing.T) string {
	sc, err := sim.Demo()
	if err != nil {
		t.Fatal(err)
	}
	return (&geo.Grid{OriginLat: sc.GridOriginLat, OriginLon: sc.GridOriginLon, CellM: sc.GridCellM,
		Cols: sc.GridCols, Rows: sc.GridRows, FirstRow: 1}).String()
}

// readFixJSON parses the lines `fix --json` printed.
func readFixJSON(t *testing.T, s string) map[string]geo.FixReport {
	t.Helper()
	out := map[string]geo.FixReport{}
	dec := json.NewDecoder(strings.NewReader(s))
	for {
		var f geo.FixReport
		if err := dec.Decode(&f); err == io.EOF {
			return out
		} else if err != nil {
			t.Fatal(err)
		}
		out[f.Ident] = f
	}
}

// checkFixRows compares the page's fix rows, as Chromium shows them, with
// the fixes `nullseek fix --json` works out from the same bearings file:
// position to 1e-5° and the ellipse to a metre or two (the page's fixes may
// come from the bearings before the CSV rounded them to 0.01°), the cell
// and the locator exactly.
func checkFixRows(t *testing.T, rows [][]string, want map[string]geo.FixReport) {
	t.Helper()
	if len(rows) != len(want) {
		t.Fatalf("%d fix rows, want %d", len(rows), len(want))
	}
	num := func(s string) float64 {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil {
			t.Fatalf("fix row cell %q: %v", s, err)
		}
		return v
	}
	for _, r := range rows {
		f, ok := want[r[0]]
		if !ok {
			t.Fatalf("fix row for %q, which fix did not fix", r[0])
		}
		near := func(what string, got, want, tol float64) {
			if math.Abs(got-want) > tol {
				t.Errorf("%s %s: page %v, fix --json %v", f.Ident, what, got, want)
			}
		}
		near("latitude", num(r[1]), f.Lat, 2e-5)
		near("longitude", num(r[2]), f.Lon, 2e-5)
		if r[3] != f.Maidenhead || r[4] != f.GridCell {
			t.Errorf("%s: locator %s cell %s, fix --json %s %s", f.Ident, r[3], r[4], f.Maidenhead, f.GridCell)
		}
		near("probability", num(r[5]), 100*f.Ellipse.Probability, 0.5)
		near("semi-major axis", num(r[6]), f.Ellipse.SemiMajorM, 2.5)
		near("semi-minor axis", num(r[7]), f.Ellipse.SemiMinorM, 2.5)
		near("long axis", num(r[8]), f.Ellipse.OrientationDeg, 1.5)
		if r[9] != strconv.Itoa(f.Stations) || r[10] != strconv.Itoa(len(f.Used)) {
			t.Errorf("%s: stations %s bearings %s, fix --json %d %d", f.Ident, r[9], r[10], f.Stations, len(f.Used))
		}
		if len(f.Cells) > 0 && !strings.HasPrefix(r[12], f.Cells[0].Cell+" ") {
			t.Errorf("%s: most probable cells %q, fix --json starts with %s", f.Ident, r[12], f.Cells[0].Cell)
		}
	}
}

// readBearingRows reads a bearings file as fix does.
func readBearingRows(t *testing.T, path string) []geo.BearingRecord {
	t.Helper()
	fh, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	br, err := geo.NewBearingReader(fh)
	if err != nil {
		t.Fatal(err)
	}
	var out []geo.BearingRecord
	for {
		rec, err := br.Next()
		if err == io.EOF {
			return out
		}
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, rec)
	}
}

// writeSlotsJSON writes a slot plan of three transmitters as `slots
// --json` prints it (schedule.Build on start times every 45 s).
func writeSlotsJSON(t *testing.T, path string, ids []string, start time.Time) {
	t.Helper()
	var obs []fingerprint.Observation
	var labels []string
	for k := 0; k < 4; k++ {
		for i, id := range ids {
			s := float64(k)*45.003 + float64(i)*15 + 1
			obs = append(obs, fingerprint.Observation{Index: len(obs), StartS: s, EndS: s + 12, Start: start.Add(time.Duration(s * float64(time.Second))), Ident: id})
			labels = append(labels, id)
		}
	}
	plan, err := schedule.Build(obs, labels, schedule.Options{NominalPeriodS: 45, NextCount: 1, CaptureEndS: 180})
	if err != nil {
		t.Fatal(err)
	}
	b, err := json.Marshal(plan)
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, path, b)
}

// The demo's report.html and the report command on the demo's files, both
// opened in headless Chromium: every picture the demo drew is embedded
// (the very bytes of its files) and decodes in the browser at its size,
// the stations and transmitters of the scene are listed, and the fix rows
// agree with what `nullseek fix --json` works out from the demo's
// bearings.csv. Screenshots report-demo.png and report-command.png are
// kept in testtool.ArtifactDir.
func TestDemoReport(t *testing.T) {
	dir := t.TempDir()
	var out bytes.Buffer
	if err := demo.Run(context.Background(), &out, io.Discard, dir, false, ""); err != nil {
		t.Fatal(err)
	}
	sc, err := sim.Demo()
	if err != nil {
		t.Fatal(err)
	}
	var stations, ids []string
	for _, s := range sc.Stations {
		stations = append(stations, s.Name)
	}
	for _, b := range sc.Beacons {
		ids = append(ids, b.ID)
	}
	pictures, err := filepath.Glob(filepath.Join(dir, "*.png"))
	if err != nil {
		t.Fatal(err)
	}
	fix := cliRun(t, dir, "fix", "bearings.csv", "--grid", demoGrid(t), "--json")
	if fix.code != 0 {
		t.Fatalf("fix --json: exit %d: %s", fix.code, fix.stderr)
	}
	wantFixes := readFixJSON(t, fix.stdout)
	writeFile(t, filepath.Join(dir, "fixes.json"), []byte(fix.stdout))
	writeSlotsJSON(t, filepath.Join(dir, "slots.json"), ids, sc.Start)

	check := func(t *testing.T, page, shot string, wantImages int) reporttest.Probe {
		b, err := os.ReadFile(page)
		if err != nil {
			t.Fatal(err)
		}
		emb := embeddedImages(t, string(b))
		if len(emb) != wantImages {
			t.Fatalf("%d embedded images, want %d", len(emb), wantImages)
		}
		var sizes [][2]float64
		for i, im := range emb {
			found := false
			for _, p := range pictures {
				if f, _ := os.ReadFile(p); bytes.Equal(f, im) {
					found = true
				}
			}
			if !found {
				t.Errorf("embedded image %d is none of the demo's pictures", i)
			}
			cfg, err := png.DecodeConfig(bytes.NewReader(im)) // Go's image/png, standard library
			if err != nil {
				t.Fatalf("embedded image %d: %v", i, err)
			}
			sizes = append(sizes, [2]float64{float64(cfg.Width), float64(cfg.Height)})
		}
		p := reporttest.Load(t, page)
		if p.Scripts != 0 {
			t.Errorf("%d scripts in the page", p.Scripts)
		}
		for i, im := range p.Images {
			if w, h := im[0].(float64), im[1].(float64); w != sizes[i][0] || h != sizes[i][1] || im[2] != true {
				t.Errorf("image %d in Chromium: %v×%v (complete %v), the PNG says %v", i, w, h, im[2], sizes[i])
			}
		}
		if !slices.Equal(p.Stations, stations) || !slices.Equal(p.Transmitters, ids) || !slices.Equal(p.Slots, ids) {
			t.Errorf("stations %q transmitters %q slots %q, want %q and %q", p.Stations, p.Transmitters, p.Slots, stations, ids)
		}
		if len(p.BearingStations) != len(stations)*len(ids) {
			t.Errorf("%d bearing rows, want %d", len(p.BearingStations), len(stations)*len(ids))
		}
		checkFixRows(t, p.Fixes, wantFixes)
		reporttest.Screenshot(t, page, shot, 4200)
		return p
	}

	t.Run("demo", func(t *testing.T) {
		check(t, filepath.Join(dir, "report.html"), "report-demo.png", 1+len(stations)*len(ids))
	})
	t.Run("command", func(t *testing.T) {
		// what bearing --json would have printed at the first station
		rows := readBearingRows(t, filepath.Join(dir, "bearings.csv"))
		var bj bytes.Buffer
		for _, l := range rows {
			if l.Station == stations[0] {
				json.NewEncoder(&bj).Encode(survey.TxBearing{Ident: l.Ident, SigmaDeg: l.SigmaDeg,
					Combined: bearing.Combined{BearingDeg: l.BearingDeg, SigmaDeg: 1, BurstsUsed: 4}})
			}
		}
		writeFile(t, filepath.Join(dir, "bearing-0.json"), bj.Bytes())
		r := cliRun(t, dir, "report", "--out", "session.html", "bearings.csv", "--fixes", "fixes.json", "--slots", "slots.json",
			"--map", "map.png", "--polar", "polar-*.png", "--title", "Report of the demo",
			"--measured", "station="+stations[0]+",recording=station-"+stations[0]+".sigmf-data,antenna=yagi,heading=headings-"+stations[0]+".csv,bearing-json=bearing-0.json")
		if r.code != 0 || r.stderr != "" || !strings.HasPrefix(r.stdout, "wrote session.html: 3 stations, 3 transmitters, 9 bearings, 3 fixes, 10 pictures") {
			t.Fatalf("report: exit %d\nstdout %s\nstderr %s", r.code, r.stdout, r.stderr)
		}
		page := filepath.Join(dir, "session.html")
		p := check(t, page, "report-command.png", 1+len(stations)*len(ids))
		for _, row := range p.Bearings {
			want := "not recorded"
			if row[1] == stations[0] {
				want = "4"
			}
			if row[6] != want {
				t.Errorf("bearing row %q: bursts used %q, want %q", row, row[6], want)
			}
		}
		b, _ := os.ReadFile(page)
		s := html.UnescapeString(string(b))
		for _, want := range []string{"Report of the demo", "station-" + stations[0] + ".sigmf-data", "headings-" + stations[0] + ".csv", "Worked out from slots.json"} {
			if !strings.Contains(s, want) {
				t.Errorf("page lacks %q", want)
			}
		}
		// Without --fixes the command fixes the bearings itself, as fix does.
		r = cliRun(t, dir, "report", "--out", "computed.html", "bearings.csv", "--grid", demoGrid(t))
		if r.code != 0 {
			t.Fatalf("report without --fixes: exit %d: %s", r.code, r.stderr)
		}
		p = reporttest.Load(t, filepath.Join(dir, "computed.html"))
		checkFixRows(t, p.Fixes, wantFixes)
	})
}

// Station names and identifiers come from files: a hostile one reaches
// the page as text, not markup.
func TestReportHostileNames(t *testing.T) {
	dir := t.TempDir()
	const evil = `<script>alert("x")</script>`
	txLat, txLon := 47.30, 8.50
	var csv strings.Builder
	csv.WriteString("ident,station,lat,lon,bearing_deg,sigma_deg,reference\n")
	for i, st := range []struct {
		name     string
		lat, lon float64
	}{{evil, 47.25, 8.45}, {"b&b", 47.26, 8.56}, {`"><img src=x onerror=alert(2)>`, 47.34, 8.47}} {
		_, az, _ := geo.Inverse(st.lat, st.lon, txLat, txLon)
		fmt.Fprintf(&csv, "%q,%q,%.6f,%.6f,%.3f,2,true\n", "ID/"+evil, st.name, st.lat, st.lon, az+float64(i%2))
	}
	writeFile(t, filepath.Join(dir, "b.csv"), []byte(strings.ReplaceAll(csv.String(), `\"`, `""`)))
	r := cliRun(t, dir, "report", "--out", "p.html", "b.csv", "--measured", "station="+evil+",antenna=<b>loop</b>")
	if r.code != 0 {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	b, err := os.ReadFile(filepath.Join(dir, "p.html"))
	if err != nil {
		t.Fatal(err)
	}
	if bytes.Contains(bytes.ToLower(b), []byte("<script")) || bytes.Contains(b, []byte("<img")) || bytes.Contains(b, []byte("<b>loop")) {
		t.Fatal("a name from the file became markup")
	}
	p := reporttest.Load(t, filepath.Join(dir, "p.html"))
	if p.Scripts != 0 || len(p.Images) != 0 {
		t.Fatalf("%d scripts and %d images in the page", p.Scripts, len(p.Images))
	}
	if !slices.Contains(p.Stations, evil) || !slices.Contains(p.Stations, "b&b") || len(p.Fixes) != 1 || p.Fixes[0][0] != "ID/"+evil {
		t.Fatalf("stations %q fixes %q", p.Stations, p.Fixes)
	}
}

// Bad input to report: one line naming the flag or file, no page written.
func TestCLIReportBadInput(t *testing.T) {
	const csv = "ident,station,lat,lon,bearing_deg,sigma_deg,reference\nA,s1,47.25,8.45,30,2,true\nA,s2,47.26,8.56,300,2,true\n"
	with := func(files map[string]string, args ...string) func(t *testing.T, dir string) []string {
		return func(t *testing.T, dir string) []string {
			writeFile(t, filepath.Join(dir, "b.csv"), []byte(csv))
			for n, c := range files {
				writeFile(t, filepath.Join(dir, n), []byte(c))
			}
			return args
		}
	}
	checkBadInput(t, []cliCase{
		{"no --out", with(nil, "report", "b.csv"), "--out"},
		{"--out a folder", with(nil, "report", "--out", ".", "b.csv"), "--out"},
		{"no bearings file", with(nil, "report", "--out", "p.html", "none.csv"), "none.csv"},
		{"stdin", with(nil, "report", "--out", "p.html", "-"), "not -"},
		{"bearings not CSV", with(map[string]string{"x.csv": "hello\n"}, "report", "--out", "p.html", "x.csv"), "x.csv"},
		{"--measured unknown key", with(nil, "report", "--out", "p.html", "b.csv", "--measured", "station=s1,colour=red"), "--measured"},
		{"--measured no station", with(nil, "report", "--out", "p.html", "b.csv", "--measured", "antenna=yagi"), "station=NAME"},
		{"--measured unknown station", with(nil, "report", "--out", "p.html", "b.csv", "--measured", "station=s9"), `"s9"`},
		{"--polar no match", with(nil, "report", "--out", "p.html", "b.csv", "--polar", "polar-*.png"), "--polar"},
		{"--map not a picture", with(map[string]string{"m.png": "GIF89a"}, "report", "--out", "p.html", "b.csv", "--map", "m.png"), "--map m.png"},
		{"--map missing", with(nil, "report", "--out", "p.html", "b.csv", "--map", "m.png"), "--map"},
		{"--slots not a plan", with(map[string]string{"s.json": `{"a":1}`}, "report", "--out", "p.html", "b.csv", "--slots", "s.json"), "--slots s.json"},
		{"--fixes not fix lines", with(map[string]string{"f.json": `{"type":"bearing"}`}, "report", "--out", "p.html", "b.csv", "--fixes", "f.json"), "--fixes f.json"},
		{"--fixes empty", with(map[string]string{"f.json": ""}, "report", "--out", "p.html", "b.csv", "--fixes", "f.json"), "no fix lines"},
		{"--fixes with --grid", with(map[string]string{"f.json": "{}"}, "report", "--out", "p.html", "b.csv", "--fixes", "f.json", "--grid", "origin=47,8 cell=500"), "--grid"},
		{"--measured bearing-json missing", with(nil, "report", "--out", "p.html", "b.csv", "--measured", "station=s1,bearing-json=none.json"), "bearing-json"},
		{"--measured bearing-json of another run", with(map[string]string{"bj.json": `{"type":"bearing","ident":"A","bearing_deg":31,"sigma_deg":2,"bursts_used":3}`},
			"report", "--out", "p.html", "b.csv", "--measured", "station=s1,bearing-json=bj.json"), "not the same run"},
		{"--measured bearing-json not bearing lines", with(map[string]string{"bj.json": `{"type":"fix"}`},
			"report", "--out", "p.html", "b.csv", "--measured", "station=s1,bearing-json=bj.json"), "bj.json"},
		{"--grid bad", with(nil, "report", "--out", "p.html", "b.csv", "--grid", "cell=-1"), "--grid"},
	})
}
