package mapplot

import (
	"bytes"
	"encoding/xml"
	"fmt"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"testing"

	"nullseek/geo"
	"nullseek/internal/palette"

	"gonum.org/v1/plot/vg"
)

func testFix(t *testing.T) ([]*geo.Fix, *geo.Grid) {
	t.Helper()
	lat0, lon0 := -27.5, 153.0
	var lops []geo.LOP
	for i, az := range []float64{10, 130, 250} {
		la, lo, _ := geo.Direct(lat0, lon0, az, 1500+400*float64(i))
		_, b, _ := geo.Inverse(la, lo, lat0, lon0)
		lops = append(lops, geo.LOP{Ident: "T1", Station: string(rune('A' + i)), Lat: la, Lon: lo, BearingDeg: b + 1, SigmaDeg: 3})
	}
	f, err := geo.SolveFix(lops, geo.FixOptions{})
	if err != nil {
		t.Fatal(err)
	}
	g, err := geo.ParseGrid("origin=-27.49,152.99 cell=250 cols=A-H rows=1-8")
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Place(g, 2); err != nil {
		t.Fatal(err)
	}
	return []*geo.Fix{f}, g
}

// The PNG decodes, has the requested size and is not blank: it holds many
// colours, including the ellipse red and the shading orange.
func TestRenderPNG(t *testing.T) {
	fixes, g := testFix(t)
	b, err := Render(fixes, g, "png", Options{SizeCm: 12})
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	r := img.Bounds()
	if r.Dx() < 300 || r.Dy() != r.Dx() {
		t.Errorf("size %v", r)
	}
	colours := map[[3]uint32]bool{}
	red := 0
	for y := r.Min.Y; y < r.Max.Y; y += 2 {
		for x := r.Min.X; x < r.Max.X; x += 2 {
			cr, cg, cb, _ := img.At(x, y).RGBA()
			colours[[3]uint32{cr >> 10, cg >> 10, cb >> 10}] = true
			if cr>>8 > 180 && cg>>8 < 60 && cb>>8 < 60 {
				red++
			}
		}
	}
	if len(colours) < 50 || red < 20 {
		t.Errorf("picture looks empty: %d colours, %d red samples", len(colours), red)
	}
}

func TestRenderSVGIsXML(t *testing.T) {
	fixes, g := testFix(t)
	b, err := Render(fixes, g, "svg", Options{})
	if err != nil {
		t.Fatal(err)
	}
	d := xml.NewDecoder(bytes.NewReader(b))
	for {
		if _, err := d.Token(); err == io.EOF {
			break
		} else if err != nil {
			t.Fatalf("SVG not XML: %v", err)
		}
	}
	if _, err := Format("x.jpg"); err == nil {
		t.Error("jpg accepted")
	}
	if _, err := Render(nil, g, "png", Options{}); err == nil {
		t.Error("empty fix list accepted")
	}
}

// The map draws a transmitter's bearings in its palette colour (shared
// with the KML export, internal/palette), chosen by ColorOf when given.
func TestRenderUsesPaletteColours(t *testing.T) {
	fixes, g := testFix(t)
	count := func(opt Options, want [3]uint8) int {
		b, err := Render(fixes, g, "png", opt)
		if err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(bytes.NewReader(b))
		if err != nil {
			t.Fatal(err)
		}
		n := 0
		r := img.Bounds()
		for y := r.Min.Y; y < r.Max.Y; y++ {
			for x := r.Min.X; x < r.Max.X; x++ {
				cr, cg, cb, _ := img.At(x, y).RGBA()
				if d := absDiff(cr>>8, uint32(want[0])) + absDiff(cg>>8, uint32(want[1])) + absDiff(cb>>8, uint32(want[2])); d < 24 {
					n++
				}
			}
		}
		return n
	}
	c0, c2 := palette.Transmitter(0), palette.Transmitter(2)
	first := count(Options{SizeCm: 10}, [3]uint8{c0.R, c0.G, c0.B})
	other := count(Options{SizeCm: 10, ColorOf: map[string]int{"T1": 2}}, [3]uint8{c2.R, c2.G, c2.B})
	if first < 50 || other < 50 {
		t.Errorf("pixels in the transmitter colour: %d (first), %d (ColorOf 2)", first, other)
	}
	if n := count(Options{SizeCm: 10, ColorOf: map[string]int{"T1": 2}}, [3]uint8{c0.R, c0.G, c0.B}); n > first/10 {
		t.Errorf("%d pixels still in colour 0 with ColorOf 2", n)
	}
	if _, err := Render(fixes, g, "png", Options{SizeCm: 500}); err == nil {
		t.Error("a 5 m map accepted")
	}
}

func absDiff(a, b uint32) uint32 {
	if a > b {
		return a - b
	}
	return b - a
}

// Names are placed clear of ellipses, station and fix marks, the grid's
// letters, the legend, the scale bar and each other (an invented scene of
// three transmitters seen from three stations, at two map sizes).
func TestLabelsClear(t *testing.T) {
	type pt struct{ lat, lon float64 }
	stations := map[string]pt{"hill": {-27.470, 153.010}, "ford": {-27.525, 152.985}, "gate": {-27.515, 153.045}}
	txs := map[string]pt{"TX/1": {-27.490, 153.025}, "TX/2": {-27.500, 153.000}, "TX/3": {-27.510, 153.020}}
	var fixes []*geo.Fix
	for _, id := range []string{"TX/1", "TX/2", "TX/3"} {
		var lops []geo.LOP
		for _, st := range []string{"hill", "ford", "gate"} {
			s, x := stations[st], txs[id]
			_, az, _ := geo.Inverse(s.lat, s.lon, x.lat, x.lon)
			lops = append(lops, geo.LOP{Ident: id, Station: st, Lat: s.lat, Lon: s.lon, BearingDeg: az + 1.5, SigmaDeg: 3})
		}
		f, err := geo.SolveFix(lops, geo.FixOptions{})
		if err != nil {
			t.Fatal(err)
		}
		fixes = append(fixes, f)
	}
	g, err := geo.ParseGrid("origin=-27.465,152.980 cell=500 cols=A-N rows=1-13")
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range fixes {
		if err := f.Place(g, 2); err != nil {
			t.Fatal(err)
		}
	}
	for _, size := range []float64{22, 14} {
		b, lp, err := render(fixes, g, "png", Options{SizeCm: size})
		if err != nil {
			t.Fatal(err)
		}
		if d := os.Getenv("NULLSEEK_PLOT_DIR"); d != "" { // keep it to look at
			os.WriteFile(filepath.Join(d, fmt.Sprintf("labels-%.0fcm.png", size)), b, 0o644)
		}
		if len(lp.placed) != 6 {
			t.Fatalf("%d labels placed, want 3 fixes and 3 stations", len(lp.placed))
		}
		checkLabels(t, fmt.Sprintf("%.0f cm", size), lp)
	}
}

// checkLabels fails t for each placed name that leaves the map or covers an
// ellipse, a mark, a grid label, the legend, the scale bar or another name.
func checkLabels(t *testing.T, what string, lp *labelPlacer) {
	t.Helper()
	for i, b := range lp.placed {
		name := lp.labels[i].text
		if b.Min.X < lp.area.Min.X || b.Max.X > lp.area.Max.X || b.Min.Y < lp.area.Min.Y || b.Max.Y > lp.area.Max.Y {
			t.Errorf("%s: %q leaves the map", what, name)
		}
		for _, e := range lp.ell {
			if polyHits(e, b, true) {
				t.Errorf("%s: %q covers an ellipse", what, name)
			}
		}
		for _, k := range lp.keepClear {
			if overlaps(b, k) {
				t.Errorf("%s: %q covers a mark, a grid label, the legend or the scale bar", what, name)
			}
		}
		for j, o := range lp.placed[:i] {
			if overlaps(b, o) {
				t.Errorf("%s: %q covers %q", what, name, lp.labels[j].text)
			}
		}
	}
	// grid letters and numbers (boxes of their glyphs at 9 pt): none
	// overlap, and neighbours along a row or column keep 2 pt apart
	gap := vg.Points(2)
	for i, a := range lp.grid {
		for _, b := range lp.grid[:i] {
			inRow := math.Abs(float64(a.Min.Y-b.Min.Y)) < 0.5
			inCol := math.Abs(float64(a.Min.X-b.Min.X)) < 0.5
			tooClose := (inRow && a.Min.X < b.Max.X+gap && b.Min.X < a.Max.X+gap) || (inCol && a.Min.Y < b.Max.Y+gap && b.Min.Y < a.Max.Y+gap)
			if overlaps(a, b) || tooClose {
				t.Errorf("%s: grid labels at %v and %v overlap or touch", what, a.Min, b.Min)
			}
		}
	}
}

// The small one-transmitter map (10 cm), where the scale bar and a station
// compete for the lower right corner.
func TestLabelsClearSmallMap(t *testing.T) {
	fixes, g := testFix(t)
	_, lp, err := render(fixes, g, "png", Options{SizeCm: 10})
	if err != nil {
		t.Fatal(err)
	}
	if len(lp.placed) != 4 {
		t.Fatalf("%d labels placed, want 1 fix and 3 stations", len(lp.placed))
	}
	checkLabels(t, "10 cm", lp)
}
