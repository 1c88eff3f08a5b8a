package geo

import (
	"math"
	"strings"
	"testing"
)

// FuzzReadGridJSON: any bytes as a grid JSON file: no panic, one-line
// errors; a grid that reads passes Validate, its first and last cells'
// centres fall in those cells, and its ParseGrid spec (String) reads back
// the same grid.
func FuzzReadGridJSON(f *testing.F) {
	for _, s := range []string{
		`{"origin_lat":51.5,"origin_lon":-0.12,"cell_m":250,"rotation_deg":0,"cols":"A-L","rows":"1-9","row_direction":"down"}`,
		`{"origin_lat":-33.9,"origin_lon":151.2,"cell_m":100,"rotation_deg":-12.5,"cols":"12","rows":"0-4","row_direction":"up"}`,
		`{"origin_lat":0,"origin_lon":0,"cell_m":1}`,
		`{"origin_lat":89,"origin_lon":180,"cell_m":100000,"cols":"A-E","rows":"5"}`,
		`{"origin_lat":1}`, `{"cols":"ZZZZZZZZZZZZZZ-A"}`, `[]`, `{"origin_lat":1e999}`, ``,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		g, err := ReadGridJSON(strings.NewReader(string(b)))
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("multi-line error %q", err)
			}
			return
		}
		if err := g.Validate(); err != nil {
			t.Fatalf("read an invalid grid: %v", err)
		}
		for _, c := range [][2]int{{0, 0}, {g.Cols - 1, g.Rows - 1}} {
			lat, lon := g.CellCenter(c[0], c[1])
			if math.IsNaN(lat) || math.IsNaN(lon) {
				t.Fatalf("cell %v centre is NaN", c)
			}
			if l, col, row, ok := g.CellAt(lat, lon); !ok || col != c[0] || row != c[1] || l != g.CellLabel(c[0], c[1]) {
				t.Fatalf("centre of cell %v (%s) read back as %q %d,%d %v", c, g.CellLabel(c[0], c[1]), l, col, row, ok)
			}
		}
		back, err := ParseGrid(g.String())
		if err != nil {
			t.Fatalf("spec %q of a read grid does not parse: %v", g.String(), err)
		}
		if back.Cols != g.Cols || back.Rows != g.Rows || back.FirstCol != g.FirstCol || back.FirstRow != g.FirstRow || back.RowsUp != g.RowsUp {
			t.Fatalf("spec round trip: %+v → %q → %+v", g, g.String(), back)
		}
	})
}
