package geo

import (
	"math"
	"math/rand/v2"
	"nullseek/internal/angle"
	"strings"
	"testing"
)

// Column letters follow the spreadsheet convention (common practice): A..Z,
// then AA, AB, …, AZ, BA, …, ZZ, AAA.
func TestColumnLabel(t *testing.T) {
	for _, c := range []struct {
		i int
		s string
	}{{0, "A"}, {5, "F"}, {25, "Z"}, {26, "AA"}, {27, "AB"}, {51, "AZ"}, {52, "BA"}, {701, "ZZ"}, {702, "AAA"}} {
		if got := ColumnLabel(c.i); got != c.s {
			t.Errorf("ColumnLabel(%d) = %q want %q", c.i, got, c.s)
		}
		if got := ColumnIndex(strings.ToLower(c.s)); got != c.i {
			t.Errorf("ColumnIndex(%q) = %d want %d", c.s, got, c.i)
		}
	}
	if ColumnIndex("A1") != -1 || ColumnIndex("") != -1 || ColumnLabel(-1) != "" {
		t.Error("bad labels accepted")
	}
}

// Cells by construction on the plane at the origin: 250 m cells, the point
// 600 m along the column direction and 300 m along the row direction is in
// the third column, second row: C2. Row directions as documented on Grid.
func TestGridCellAt(t *testing.T) {
	lat0, lon0 := 46.0, 7.0
	cases := []struct {
		spec   string
		e, n   float64
		want   string
		inside bool
	}{
		{"cell=250 rotation=0 cols=A-L rows=1-9", 600, -300, "C2", true},
		{"cell=250 rotation=0 cols=A-L rows=1-9 rowdir=up", 600, 300, "C2", true},
		{"cell=250 rotation=90 cols=A-L rows=1-9", -300, -600, "C2", true}, // up = east, right = south
		{"cell=250 rotation=-30 cols=C-H rows=4-8", 600*math.Cos(-30*deg) - 300*math.Sin(-30*deg), -600*math.Sin(-30*deg) - 300*math.Cos(-30*deg), "E5", true},
		{"cell=250 rotation=0 cols=A-L rows=1-9", -10, -300, "", false},
		{"cell=250 rotation=0 cols=A-L rows=1-9", 600, 10, "", false},
		{"cell=100 cols=A-AA rows=1-3", 2650, -250, "AA3", true},
		{"cell=100 cols=A-AA rows=1-3", 2710, -250, "", false},
	}
	for _, c := range cases {
		g, err := ParseGrid("origin=46,7 " + c.spec)
		if err != nil {
			t.Fatal(err)
		}
		lat, lon := FromENU(lat0, lon0, c.e, c.n)
		got, col, row, ok := g.CellAt(lat, lon)
		if got != c.want || ok != c.inside {
			t.Errorf("%s at (%v,%v): %q %v (col %d row %d), want %q", c.spec, c.e, c.n, got, ok, col, row, c.want)
		}
		if ok {
			clat, clon := g.CellCenter(col, row)
			if l, _, _, _ := g.CellAt(clat, clon); l != got {
				t.Errorf("centre of %s is in %s", got, l)
			}
		}
	}
}

func TestParseGridErrors(t *testing.T) {
	for _, s := range []string{"", "cell=250", "origin=1,2", "origin=1 cell=2", "origin=1,2 cell=x", "origin=1,2 cell=250 cols=L-A",
		"origin=1,2 cell=250 rows=a-b", "origin=1,2 cell=250 colour=red", "origin=1,2 cell=0", "origin=95,2 cell=250", "origin=1,2 cell=250 rowdir=sideways",
		"origin=1,2 cell=50000 cols=A-Z"} {
		if _, err := ParseGrid(s); err == nil {
			t.Errorf("ParseGrid(%q) accepted", s)
		}
	}
	g, err := ParseGrid("origin=1,2 cell=250 rotation=10 cols=C-H rows=4-8 rowdir=up")
	if err != nil {
		t.Fatal(err)
	}
	g2, err := ParseGrid(g.String())
	if err != nil || *g2 != *g {
		t.Errorf("round trip %v → %v (%v)", g, g2, err)
	}
	g3, err := ReadGridJSON(strings.NewReader(`{"origin_lat":1,"origin_lon":2,"cell_m":250,"rotation_deg":10,"cols":"C-H","rows":"4-8","row_direction":"up"}`))
	if err != nil || *g3 != *g {
		t.Errorf("JSON grid %v (%v)", g3, err)
	}
	if _, err := ReadGridJSON(strings.NewReader(`{"origin_lat":1,"cell_m":250}`)); err == nil {
		t.Error("JSON grid without origin_lon accepted")
	}
}

func FuzzParseGrid(f *testing.F) {
	f.Add("origin=51.5,-0.12 cell=250 rotation=0 cols=A-L rows=1-9")
	f.Add("origin=0,0 cell=1 cols=ZZ rows=0-3 rowdir=up")
	f.Fuzz(func(t *testing.T, s string) {
		g, err := ParseGrid(s)
		if err != nil {
			return
		}
		lat, lon := g.CellCenter(0, 0)
		if l, _, _, ok := g.CellAt(lat, lon); !ok || l != g.CellLabel(0, 0) {
			t.Fatalf("first cell centre not in first cell: %q %v", l, ok)
		}
	})
}

// The probability map against the normal approximation (common practice:
// for small sigma the von Mises bearing likelihood is Gaussian, and two
// perpendicular bearings at range d give independent position errors of
// d·σ along each axis). Grid of 50 m cells centred on the true crossing,
// far (50 km) from the stations so that the change of range across the grid
// (which skews the true likelihood) stays below 0.5 %.
func TestProbMapGaussian(t *testing.T) {
	lat0, lon0 := 40.0, -3.0
	const d, sigmaDeg, cell = 50000.0, 0.1, 50.0
	var lops []LOP
	for i, az := range []float64{180, 270} {
		la, lo, _ := Direct(lat0, lon0, az, d)
		_, b, _ := Inverse(la, lo, lat0, lon0)
		lops = append(lops, LOP{Station: string(rune('A' + i)), Lat: la, Lon: lo, BearingDeg: angle.Wrap360(b), SigmaDeg: sigmaDeg})
	}
	olat, olon := FromENU(lat0, lon0, -4.5*cell, 4.5*cell)
	g := &Grid{OriginLat: olat, OriginLon: olon, CellM: cell, Cols: 9, Rows: 9, FirstRow: 1}
	pm, err := NewProbMap(lops, g, 8)
	if err != nil {
		t.Fatal(err)
	}
	s := d * sigmaDeg * deg
	phi := func(x float64) float64 { return 0.5 * (1 + math.Erf(x/s/math.Sqrt2)) }
	inGrid := sq(phi(4.5*cell) - phi(-4.5*cell))
	var sum float64
	for row := 0; row < 9; row++ {
		for col := 0; col < 9; col++ {
			x0, y0 := float64(col-4)*cell-cell/2, float64(row-4)*cell-cell/2
			want := (phi(x0+cell) - phi(x0)) * (phi(y0+cell) - phi(y0)) / inGrid
			got := pm.P[row*9+col]
			sum += got
			if math.Abs(got-want) > 0.03*want+1e-4 {
				t.Errorf("cell %s: %.4f want %.4f", g.CellLabel(col, row), got, want)
			}
		}
	}
	if math.Abs(sum-1) > 1e-12 {
		t.Errorf("probabilities sum to %v", sum)
	}
	top := pm.Top(3, 0)
	if top[0].Cell != "E5" {
		t.Errorf("top cell %v, want E5", top)
	}
}

func benchLOPs(n int) ([]LOP, float64, float64) {
	rng := rand.New(rand.NewPCG(3, 4))
	lops, lat, lon := randomScenario(rng, n, true)
	return lops, lat, lon
}

// BenchmarkFix10 times a 10-bearing fix including the leave-one-out test.
func BenchmarkFix10(b *testing.B) {
	lops, _, _ := benchLOPs(10)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := SolveFix(lops, FixOptions{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkProbMap200 times a 200×200-cell probability map from 10
// bearings (one sample per cell).
func BenchmarkProbMap200(b *testing.B) {
	lops, lat, lon := benchLOPs(10)
	olat, olon := FromENU(lat, lon, -5000, 5000)
	g := &Grid{OriginLat: olat, OriginLon: olon, CellM: 50, Cols: 200, Rows: 200, FirstRow: 1}
	b.ReportMetric(40000, "cells/op")
	for b.Loop() {
		pm, err := NewProbMap(lops, g, 1)
		if err != nil {
			b.Fatal(err)
		}
		_ = pm.Top(10, 0.005)
	}
}

// TestReadGridJSONTrailing: one object and nothing after it (RFC 8259 §2: a
// JSON text is one value).
func TestReadGridJSONTrailing(t *testing.T) {
	good := `{"origin_lat": 45.1, "origin_lon": 6.1, "cell_m": 250, "cols": "A-L", "rows": "1-9"}`
	if _, err := ReadGridJSON(strings.NewReader(good + "\n")); err != nil {
		t.Fatalf("one object: %v", err)
	}
	for _, tail := range []string{" {}", " garbage", "\n" + good} {
		if _, err := ReadGridJSON(strings.NewReader(good + tail)); err == nil || !strings.Contains(err.Error(), "more after") {
			t.Errorf("%q after the object: %v, want a refusal", tail, err)
		}
	}
}
