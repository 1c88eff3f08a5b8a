package locate

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"errors"
	"fmt"
	"image"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"nullseek/geo"
	"nullseek/internal/palette"
	"nullseek/internal/testtool"
	"nullseek/mapplot"
)

type station struct {
	name     string
	lat, lon float64
}

type tx struct {
	ident    string
	lat, lon float64
	stations []station
}

// geodAzimuths asks GeographicLib's GeodSolve (Debian geographiclib-tools
// 2.x, "GeodSolve -i -p 9", WGS84) for the azimuth from each station to its
// transmitter: exact bearings from outside the project.
func geodAzimuths(t *testing.T, txs []tx) [][]float64 {
	t.Helper()
	prog := testtool.Need(t, "GeodSolve")
	var in strings.Builder
	for _, x := range txs {
		for _, s := range x.stations {
			fmt.Fprintf(&in, "%.9f %.9f %.9f %.9f\n", s.lat, s.lon, x.lat, x.lon)
		}
	}
	lines := strings.Split(strings.TrimSpace(testtool.Run(t, in.String(), prog, "-i", "-p", "9")), "\n")
	var az [][]float64
	k := 0
	for _, x := range txs {
		var row []float64
		for range x.stations {
			f := strings.Fields(lines[k])
			k++
			a, err := strconv.ParseFloat(f[0], 64)
			if err != nil {
				t.Fatalf("GeodSolve line %q: %v", lines[k-1], err)
			}
			row = append(row, math.Mod(a+360, 360))
		}
		az = append(az, row)
	}
	return az
}

// bearingsCSV writes the transmitters' exact bearings (sigma 2°) as CSV.
func bearingsCSV(t *testing.T, txs []tx, repeat int) string {
	az := geodAzimuths(t, txs)
	var b strings.Builder
	b.WriteString("ident,station,lat,lon,bearing_deg,sigma_deg,reference,time\n")
	for r := 0; r < repeat; r++ {
		for i, x := range txs {
			for j, s := range x.stations {
				fmt.Fprintf(&b, "%s,%s,%.9f,%.9f,%.9f,2,true,2026-03-01T10:00:00Z\n", x.ident, s.name, s.lat, s.lon, az[i][j])
			}
		}
	}
	return b.String()
}

// Invented places: two events in different regions.
var farApart = []tx{
	{"N0CALL/1", 46.20, 7.30, []station{{"P", 46.23, 7.27}, {"Q", 46.18, 7.35}, {"R", 46.17, 7.26}}},
	{"N0CALL/2", -33.90, 151.10, []station{{"U", -33.87, 151.07}, {"V", -33.93, 151.14}}},
}

func run(t *testing.T, csv string, o Options) *Result {
	t.Helper()
	res, err := Run([]Source{{Name: "in.csv", R: strings.NewReader(csv)}}, o)
	if err != nil {
		t.Fatal(err)
	}
	return res
}

// Transmitters in different regions are each fixed on the truth (1 cm,
// GeodSolve bearings), each gets its own automatic grid holding its fix, and
// the map is drawn once per cluster; one run used to fail as a whole ("grid
// cell size 2e+06 m is outside 1..100000").
func TestFarApartTransmitters(t *testing.T) {
	dir := t.TempDir()
	o := Options{MapPath: filepath.Join(dir, "m.png"), GeoJSONPath: filepath.Join(dir, "f.geojson"), KMLPath: filepath.Join(dir, "f.kml")}
	res := run(t, bearingsCSV(t, farApart, 1), o)
	if len(res.Fixes) != 2 || len(res.Refused) != 0 || len(res.OutputErrors) != 0 {
		t.Fatalf("fixes %d refused %v output errors %v", len(res.Fixes), res.Refused, res.OutputErrors)
	}
	if len(res.Grids) != 2 {
		t.Fatalf("%d grids, want one per region", len(res.Grids))
	}
	for i, f := range res.Fixes {
		if d, _, _ := geo.Inverse(f.Lat, f.Lon, farApart[i].lat, farApart[i].lon); d > 0.01 {
			t.Errorf("%s: %.3f m from the truth", f.Ident, d)
		}
		if f.GridCell == "" || f.Grid == nil || !f.Grid.Auto || len(f.Cells) == 0 {
			t.Errorf("%s: cell %q grid %v cells %v", f.Ident, f.GridCell, f.Grid, f.Cells)
		}
	}
	for _, p := range []string{o.MapPath, filepath.Join(dir, "m-2.png"), o.GeoJSONPath, o.KMLPath} {
		if st, err := os.Stat(p); err != nil || st.Size() < 500 {
			t.Errorf("%s: %v", p, err)
		}
	}
}

// An output that cannot be made (the map's folder does not exist) is
// reported and the others are written; the fixes stay in the result.
func TestOptionalOutputFails(t *testing.T) {
	dir := t.TempDir()
	o := Options{MapPath: filepath.Join(dir, "no-such-dir", "m.png"), GeoJSONPath: filepath.Join(dir, "f.geojson")}
	res := run(t, bearingsCSV(t, farApart[:1], 1), o)
	if len(res.Fixes) != 1 || len(res.OutputErrors) != 1 || !strings.Contains(res.OutputErrors[0].Error(), "m.png not written") {
		t.Fatalf("fixes %d output errors %v", len(res.Fixes), res.OutputErrors)
	}
	if _, err := os.Stat(o.GeoJSONPath); err != nil {
		t.Errorf("GeoJSON not written beside the failed map: %v", err)
	}
	var buf bytes.Buffer
	if err := res.WriteTable(&buf); err != nil || !strings.Contains(buf.String(), "m.png not written") || !strings.Contains(buf.String(), "N0CALL/1") {
		t.Errorf("table: %v\n%s", err, buf.String())
	}
}

// Every row three times: counted once by default, so the fix and ellipse
// equal those of the single copy, and the repeats are reported. Kept on
// request, three identical independent bearings carry three times the
// information, so the covariance is a third and the semi-axes shrink by
// √3 (common practice: Fisher information adds over independent
// measurements).
func TestDuplicateRows(t *testing.T) {
	one := run(t, bearingsCSV(t, farApart[:1], 1), Options{})
	three := run(t, bearingsCSV(t, farApart[:1], 3), Options{})
	if three.Duplicates != 6 || three.Rows != 9 || three.DupFirst != 5 || three.DupOf != 2 {
		t.Errorf("duplicates %d rows %d first %d of %d", three.Duplicates, three.Rows, three.DupFirst, three.DupOf)
	}
	if w := strings.Join(three.Warnings, ";"); !strings.Contains(w, "6 rows repeat an earlier row exactly (first: in.csv row 5 repeats row 2)") || !strings.Contains(w, "--keep-duplicates") {
		t.Errorf("warning %q", w)
	}
	a, b := one.Fixes[0].Ellipse, three.Fixes[0].Ellipse
	if a != b || len(three.Fixes[0].Bearings) != 3 {
		t.Errorf("deduplicated ellipse %+v, single copy %+v", b, a)
	}
	kept := run(t, bearingsCSV(t, farApart[:1], 3), Options{KeepDuplicates: true})
	k := kept.Fixes[0].Ellipse
	if math.Abs(k.SemiMajorM*math.Sqrt(3)-a.SemiMajorM) > 1e-6*a.SemiMajorM || math.Abs(k.SemiMinorM*math.Sqrt(3)-a.SemiMinorM) > 1e-6*a.SemiMinorM {
		t.Errorf("kept: semi-axes %v, %v; want %v, %v", k.SemiMajorM, k.SemiMinorM, a.SemiMajorM/math.Sqrt(3), a.SemiMinorM/math.Sqrt(3))
	}
	if !strings.Contains(strings.Join(kept.Warnings, ";"), "kept as separate bearings") {
		t.Errorf("kept: warnings %v", kept.Warnings)
	}
}

// A file with a header and no rows (or an empty JSON array) is an error,
// not an empty success.
func TestNoRows(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"ident,station,lat,lon,bearing_deg,sigma_deg,reference\n", "no bearing rows after the header"},
		{"# only a comment\nident,station,lat,lon,bearing_deg,sigma_deg,reference\n# and another\n", "no bearing rows after the header"},
		{"[]", "no bearing entries"},
		{`{"bearings": []}`, "no bearing entries"},
	} {
		_, err := Run([]Source{{Name: "x", R: strings.NewReader(c.in)}}, Options{})
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "x: ") {
			t.Errorf("%q: err %v, want %q", c.in, err, c.want)
		}
	}
}

// Magnetic bearings: the declination used is reported per station with its
// source. WMM2025 values come from geo.Declination, which is checked
// against the official WMM2025 test values in package geo.
func TestDeclinationReported(t *testing.T) {
	x := farApart[0]
	az := geodAzimuths(t, []tx{x})[0]
	when := time.Date(2026, 3, 1, 10, 0, 0, 0, time.UTC)
	var b strings.Builder
	b.WriteString("ident,station,lat,lon,bearing_deg,sigma_deg,reference,time\n")
	for j, s := range x.stations {
		d, _ := geo.Declination(s.lat, s.lon, 0, when)
		fmt.Fprintf(&b, "%s,%s,%.9f,%.9f,%.9f,2,magnetic,%s\n", x.ident, s.name, s.lat, s.lon, az[j]-d, when.Format(time.RFC3339))
	}
	res := run(t, b.String(), Options{})
	if len(res.Declinations) != 3 {
		t.Fatalf("declinations %+v", res.Declinations)
	}
	for j, u := range res.Declinations {
		d, _ := geo.Declination(x.stations[j].lat, x.stations[j].lon, 0, when)
		if u.Station != x.stations[j].name || math.Abs(u.Deg-d) > 0.006 || u.Source != "WMM2025 2026-03-01" || u.Bearings != 1 {
			t.Errorf("use %+v, want %.2f at %s", u, d, x.stations[j].name)
		}
	}
	if d, _, _ := geo.Inverse(res.Fixes[0].Lat, res.Fixes[0].Lon, x.lat, x.lon); d > 0.01 {
		t.Errorf("fix %.3f m off after the magnetic correction", d)
	}
	var out bytes.Buffer
	_ = res.WriteTable(&out)
	if !strings.Contains(out.String(), "declination ") || !strings.Contains(out.String(), "° E for 1 magnetic bearing(s) at P (WMM2025 2026-03-01)") {
		t.Errorf("table lacks the declination:\n%s", out.String())
	}
	res = run(t, b.String(), Options{DeclinationDeg: -2.5, DeclinationSet: true})
	if len(res.Declinations) != 3 || res.Declinations[0].Source != "flag" || res.Declinations[0].Deg != -2.5 {
		t.Errorf("override: %+v", res.Declinations)
	}
	out.Reset()
	_ = res.WriteTable(&out)
	if !strings.Contains(out.String(), "declination 2.50° W for 1 magnetic bearing(s) at P (flag)") {
		t.Errorf("table:\n%s", out.String())
	}
}

// The JSON report: the grid spec that round-trips (ParseGrid and
// ReadGridJSON give the same grid), semi-axis keys, no cocked hat where
// none was computed (two stations), one with three stations.
func TestJSONReport(t *testing.T) {
	res := run(t, bearingsCSV(t, farApart, 1), Options{})
	var out bytes.Buffer
	if err := res.WriteJSON(&out); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(out.String()), "\n")
	if len(lines) != 2 {
		t.Fatalf("%d lines:\n%s", len(lines), out.String())
	}
	for i, ln := range lines {
		var m map[string]json.RawMessage
		if err := json.Unmarshal([]byte(ln), &m); err != nil {
			t.Fatal(err)
		}
		var typ string
		_ = json.Unmarshal(m["type"], &typ)
		if typ != "fix" {
			t.Errorf("type %q", typ)
		}
		var el map[string]float64
		_ = json.Unmarshal(m["ellipse"], &el)
		if _, ok := el["semi_major_m"]; !ok {
			t.Errorf("ellipse keys %v", el)
		}
		_, hat := m["cocked_hat_m"]
		_, area := m["cocked_hat_area_m2"]
		if want := len(farApart[i].stations) == 3; hat != want || area != want {
			t.Errorf("%s: cocked_hat_m present %v, area present %v; want %v", farApart[i].ident, hat, area, want)
		}
		var gs geo.GridSpec
		if err := json.Unmarshal(m["grid"], &gs); err != nil || !gs.Automatic {
			t.Fatalf("grid %s: %v", m["grid"], err)
		}
		g1, err := geo.ParseGrid(gs.Spec)
		if err != nil {
			t.Fatal(err)
		}
		g2, err := geo.ReadGridJSON(bytes.NewReader(m["grid"]))
		if err != nil {
			t.Fatal(err)
		}
		want := *res.Fixes[i].Grid
		want.Auto = false
		if *g1 != want || *g2 != want {
			t.Errorf("grid round trip: spec %+v, JSON %+v, want %+v", *g1, *g2, want)
		}
	}
}

// KML and map share colours: the i-th transmitter's bearings in palette
// colour i, the ellipse red; KML colours are aabbggrr (OGC KML 2.2 §16.9).
func TestKMLColoursAreTheMapColours(t *testing.T) {
	dir := t.TempDir()
	o := Options{KMLPath: filepath.Join(dir, "f.kml")}
	run(t, bearingsCSV(t, farApart, 1), o)
	data, err := os.ReadFile(o.KMLPath)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Styles []struct {
			ID    string `xml:"id,attr"`
			Line  string `xml:"LineStyle>color"`
			Poly  string `xml:"PolyStyle>color"`
			Width int    `xml:"LineStyle>width"`
		} `xml:"Document>Style"`
		Placemarks []struct {
			Name  string `xml:"name"`
			Style string `xml:"styleUrl"`
		} `xml:"Document>Placemark"`
		Folders []struct {
			Name       string `xml:"name"`
			Placemarks []struct {
				Name string `xml:"name"`
			} `xml:"Placemark"`
		} `xml:"Document>Folder"`
	}
	if err := xml.Unmarshal(data, &doc); err != nil {
		t.Fatal(err)
	}
	style := map[string]string{}
	for _, s := range doc.Styles {
		style[s.ID] = s.Line
	}
	if style["tx0"] != "ffc84614" || style["tx1"] != "ff788200" || style["ellipse"] != "ff0000c8" {
		t.Errorf("styles %v (want tx0 ffc84614 = rgb 20,70,200; ellipse ff0000c8 = rgb 200,0,0)", style)
	}
	if style["tx0"] != palette.KML(palette.Transmitter(0)) {
		t.Errorf("tx0 %s is not the map's first transmitter colour", style["tx0"])
	}
	used := map[string]string{}
	for _, p := range doc.Placemarks {
		if strings.Contains(p.Name, " from ") {
			used[strings.Split(p.Name, " from ")[0]] = p.Style
		}
	}
	if used["N0CALL/1"] != "#tx0" || used["N0CALL/2"] != "#tx1" {
		t.Errorf("bearing styles %v", used)
	}
	// Each grid's labels: one per column and per row.
	if len(doc.Folders) != 2 {
		t.Fatalf("%d grid folders", len(doc.Folders))
	}
}

// Bounds: each bad option is one error line naming the option.
func TestOptionsValidate(t *testing.T) {
	big, _ := geo.ParseGrid("origin=46,7 cell=10 cols=1000 rows=1000")
	cases := []struct {
		name string
		o    Options
		want string
	}{
		{"cell samples huge", Options{CellSamples: 100000}, "--cell-samples"},
		{"cell samples overflow", Options{CellSamples: 3037000500}, "--cell-samples"},
		{"cell samples negative", Options{CellSamples: -1}, "--cell-samples"},
		{"cells times samples", Options{Grid: big, CellSamples: 8}, "--cell-samples"},
		{"probability 1", Options{Fix: geo.FixOptions{Probability: 1}}, "probability"},
		{"probability NaN", Options{Fix: geo.FixOptions{Probability: math.NaN()}}, "probability"},
		{"poor crossing", Options{Fix: geo.FixOptions{PoorCrossingDeg: 95}}, "poor crossing"},
		{"declination", Options{DeclinationDeg: 200, DeclinationSet: true}, "--declination"},
		{"declination NaN", Options{DeclinationDeg: math.NaN(), DeclinationSet: true}, "--declination"},
		{"auto cells", Options{AutoCells: 100000}, "--auto-cells"},
		{"cluster", Options{ClusterKm: math.Inf(1)}, "--cluster-km"},
		{"map size", Options{Map: mapOpt(1e6)}, "--map-size"},
		{"map format", Options{MapPath: "m.jpg"}, "--map"},
	}
	for _, c := range cases {
		err := c.o.Validate()
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: %v, want one line naming %q", c.name, err, c.want)
		}
	}
	if err := (Options{}).Validate(); err != nil {
		t.Errorf("zero options: %v", err)
	}
}

// The automatic grid is anchored on round coordinates: moving every point
// by 30 m keeps the same grid (so the same cell names), the origin is a
// round number of degrees, and every point is inside.
func TestAutoGridStable(t *testing.T) {
	res := run(t, bearingsCSV(t, farApart[:1], 1), Options{})
	g := res.Fixes[0].Grid
	moved := farApart[0]
	moved.stations = append([]station{}, moved.stations...)
	for i := range moved.stations {
		moved.stations[i].lat += 30 / 111320.0
	}
	moved.lat += 30 / 111320.0
	g2 := run(t, bearingsCSV(t, []tx{moved}, 1), Options{}).Fixes[0].Grid
	if g.String() != g2.String() {
		t.Errorf("grid moved with the points: %s vs %s", g, g2)
	}
	for _, v := range []float64{g.OriginLat, g.OriginLon} {
		if s := strconv.FormatFloat(v, 'f', -1, 64); len(s) > 8 {
			t.Errorf("origin %v is not a round coordinate", v)
		}
	}
	for _, s := range farApart[0].stations {
		if _, _, _, ok := g.CellAt(s.lat, s.lon); !ok {
			t.Errorf("station %s outside the automatic grid", s.name)
		}
	}
}

func mapOpt(size float64) (m mapplot.Options) { m.SizeCm = size; return m }

// The underlay (mapplot's georeferenced picture): drawn under the map it
// covers, left off (with a warning) a map it misses, and a run whose maps
// it all misses stops with nothing written; a missing picture stops the
// run before any bearing is read.
func TestUnderlayOnTheMaps(t *testing.T) {
	dir := t.TempDir()
	pic := filepath.Join(dir, "sheet.png")
	img := image.NewNRGBA(image.Rect(0, 0, 64, 48))
	for i := range img.Pix {
		img.Pix[i] = 200
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(pic, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	// over N0CALL/1's region only
	o := Options{MapPath: filepath.Join(dir, "m.png"), Underlay: mapplot.UnderlaySpec{Path: pic, Ref: "sw=46.1,7.1 ne=46.3,7.5"}}
	res := run(t, bearingsCSV(t, farApart, 1), o)
	if len(res.Written) != 2 || len(res.OutputErrors) != 0 {
		t.Fatalf("written %v, errors %v", res.Written, res.OutputErrors)
	}
	if w := strings.Join(res.Warnings, "\n"); !strings.Contains(w, "m-2.png is drawn without the underlay") || strings.Contains(w, "m.png is drawn") {
		t.Errorf("warnings %q", w)
	}

	// over neither: nothing written
	out := t.TempDir()
	o = Options{MapPath: filepath.Join(out, "m.png"), GeoJSONPath: filepath.Join(out, "f.geojson"), Underlay: mapplot.UnderlaySpec{Path: pic, Ref: "sw=10,10 ne=10.1,10.1"}}
	_, err := Run([]Source{{Name: "in.csv", R: strings.NewReader(bearingsCSV(t, farApart[:1], 1))}}, o)
	if !errors.Is(err, mapplot.ErrUnderlayOutside) || strings.Contains(err.Error(), "\n") {
		t.Errorf("underlay far away: %v", err)
	}
	if ents, _ := os.ReadDir(out); len(ents) != 0 {
		t.Errorf("files written although the run failed: %v", ents)
	}

	// missing picture: refused before the bearings are read
	rd := &countingReader{r: strings.NewReader(bearingsCSV(t, farApart[:1], 1))}
	o.Underlay.Path = filepath.Join(dir, "nope.png")
	if _, err := Run([]Source{{Name: "in.csv", R: rd}}, o); err == nil || !strings.Contains(err.Error(), "nope.png") || rd.n != 0 {
		t.Errorf("missing picture: %v, %d bytes of bearings read", err, rd.n)
	}
	if err := (Options{Underlay: mapplot.UnderlaySpec{Path: pic}}).Validate(); err == nil || !strings.Contains(err.Error(), "--map") {
		t.Errorf("underlay without a map: %v", err)
	}
}

type countingReader struct {
	r io.Reader
	n int
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += n
	return n, err
}
