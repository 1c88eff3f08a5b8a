package mapplot

import (
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Label placement. The fix and station names are placed when the map is
// drawn, where their true size on the canvas is known: each label tries a
// few positions around its anchor (a station's triangle, a fix's 95 %
// ellipse) and takes the one that covers the least — never, when any
// position allows it, an ellipse, a station, a fix mark, the grid's
// letters and numbers, the legend, the scale bar or another label; lines
// of position only cost a little, and the label sits on a light box so a
// line under it does not hide it.

// mapLabel is one name to place.
type mapLabel struct {
	text  string
	col   color.Color
	size  vg.Length
	at    plotter.XY // anchor (km)
	r     vg.Length  // the anchor mark's radius (station triangle)
	box   [4]float64 // ellipse's bounding box (km: x0, y0, x1, y1) for a fix; zero for a station
	isFix bool
}

// labelPlacer is the plotter that places and draws the labels.
type labelPlacer struct {
	labels   []mapLabel
	ellipses []plotter.XYs   // 95 % ellipses (km)
	lines    []plotter.XYs   // lines of position (km)
	points   []plotter.XY    // stations and fixes (km): marks to keep clear
	boxes    []plotter.XY    // the grid's letters and numbers (km)
	boxText  []string        // and what they say
	avoid    *[]vg.Rectangle // canvas areas to keep clear (legend, scale bar), set before drawing
	// cost is, per label, what its chosen place covers (filled in when
	// drawn: 0 clear, ≥ 100 over an ellipse, mark, label or the legend,
	// 3 per line of position crossed, 0.4 per step down the preferences).
	cost []float64
	// placed, ell and keepClear record (canvas units) the chosen boxes, the
	// ellipses and the marks and areas to keep clear, for the tests.
	placed    []rect
	ell       [][]vg.Point
	keepClear []rect
	area      rect
	grid      []rect // the grid's letters and numbers
}

type rect = vg.Rectangle

func overlaps(a, b rect) bool {
	return a.Min.X < b.Max.X && b.Min.X < a.Max.X && a.Min.Y < b.Max.Y && b.Min.Y < a.Max.Y
}

// segHitsRect reports whether the segment p–q passes through r
// (Liang–Barsky clipping).
func segHitsRect(p, q vg.Point, r rect) bool {
	t0, t1 := 0.0, 1.0
	dx, dy := float64(q.X-p.X), float64(q.Y-p.Y)
	for _, e := range [4][2]float64{
		{-dx, float64(p.X - r.Min.X)}, {dx, float64(r.Max.X - p.X)},
		{-dy, float64(p.Y - r.Min.Y)}, {dy, float64(r.Max.Y - p.Y)},
	} {
		pp, qq := e[0], e[1]
		if pp == 0 {
			if qq < 0 {
				return false
			}
			continue
		}
		t := qq / pp
		if pp < 0 {
			t0 = math.Max(t0, t)
		} else {
			t1 = math.Min(t1, t)
		}
		if t0 > t1 {
			return false
		}
	}
	return true
}

// inside reports whether pt lies inside the closed polygon poly.
func inside(pt vg.Point, poly []vg.Point) bool {
	in := false
	for i, j := 0, len(poly)-1; i < len(poly); j, i = i, i+1 {
		a, b := poly[i], poly[j]
		if (a.Y > pt.Y) != (b.Y > pt.Y) && pt.X < (b.X-a.X)*(pt.Y-a.Y)/(b.Y-a.Y)+a.X {
			in = !in
		}
	}
	return in
}

func (lp *labelPlacer) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	tr := func(q plotter.XY) vg.Point { return vg.Point{X: trX(q.X), Y: trY(q.Y)} }
	path := func(xy plotter.XYs) []vg.Point {
		out := make([]vg.Point, len(xy))
		for i, q := range xy {
			out[i] = tr(q)
		}
		return out
	}
	var ell, lines [][]vg.Point
	for _, e := range lp.ellipses {
		ell = append(ell, path(e))
	}
	for _, l := range lp.lines {
		lines = append(lines, path(l))
	}
	var hard []rect
	for _, q := range lp.points {
		pt := tr(q)
		r := vg.Points(5)
		hard = append(hard, rect{Min: vg.Point{X: pt.X - r, Y: pt.Y - r}, Max: vg.Point{X: pt.X + r, Y: pt.Y + r}})
	}
	lp.grid = nil
	for i, q := range lp.boxes {
		// about the glyphs' extent at 9 pt (capitals and digits)
		gs := p.Legend.TextStyle
		gs.Font.Size = vg.Points(9)
		pt := tr(q)
		rx, ry := gs.Width(lp.boxText[i])/2+vg.Points(0.3), vg.Points(3.5)
		b := rect{Min: vg.Point{X: pt.X - rx, Y: pt.Y - ry}, Max: vg.Point{X: pt.X + rx, Y: pt.Y + ry}}
		hard = append(hard, b)
		lp.grid = append(lp.grid, b)
	}
	if lp.avoid != nil {
		hard = append(hard, *lp.avoid...)
	}
	lp.ell, lp.keepClear, lp.area = ell, append([]rect(nil), hard...), c.Rectangle
	pad := vg.Points(2)
	gap := vg.Points(4)
	for _, l := range lp.labels {
		sty := p.Legend.TextStyle
		sty.Font.Size = l.size
		sty.Color = l.col
		sty.XAlign, sty.YAlign = draw.XLeft, draw.YCenter
		w := sty.Width(l.text) + 2*pad
		h := sty.FontExtents().Height + 2*pad
		// candidate lower-left corners, in order of preference
		var cands []vg.Point
		if l.isFix {
			x0, y0 := trX(l.box[0]), trY(l.box[1])
			x1, y1 := trX(l.box[2]), trY(l.box[3])
			cy := tr(l.at).Y - h/2
			cx := tr(l.at).X - w/2
			cands = []vg.Point{
				{X: x1 + gap, Y: cy}, {X: x0 - gap - w, Y: cy}, {X: cx, Y: y1 + gap}, {X: cx, Y: y0 - gap - h},
				{X: x1 + gap, Y: y1 - h/2}, {X: x1 + gap, Y: y0 - h/2}, {X: x0 - gap - w, Y: y1 - h/2}, {X: x0 - gap - w, Y: y0 - h/2},
			}
		} else {
			a := tr(l.at)
			d := l.r + gap
			dd := d * 0.75
			cands = []vg.Point{
				{X: a.X + d, Y: a.Y - h/2}, {X: a.X + dd, Y: a.Y - dd - h}, {X: a.X + dd, Y: a.Y + dd},
				{X: a.X - d - w, Y: a.Y - h/2}, {X: a.X - dd - w, Y: a.Y - dd - h}, {X: a.X - dd - w, Y: a.Y + dd},
				{X: a.X - w/2, Y: a.Y - d - h}, {X: a.X - w/2, Y: a.Y + d},
			}
			// farther out, should all of those be taken
			far := 2.5 * d
			cands = append(cands, vg.Point{X: a.X + far, Y: a.Y - h/2}, vg.Point{X: a.X - far - w, Y: a.Y - h/2},
				vg.Point{X: a.X - w/2, Y: a.Y + far}, vg.Point{X: a.X - w/2, Y: a.Y - far - h})
		}
		best, bestCost := rect{}, math.Inf(1)
		for k, ll := range cands {
			b := rect{Min: ll, Max: vg.Point{X: ll.X + w, Y: ll.Y + h}}
			cost := 0.4 * float64(k)
			if b.Min.X < c.Min.X || b.Max.X > c.Max.X || b.Min.Y < c.Min.Y || b.Max.Y > c.Max.Y {
				cost += 1000
			}
			for _, o := range hard {
				if overlaps(b, o) {
					cost += 100
				}
			}
			for _, e := range ell {
				if polyHits(e, b, true) {
					cost += 100
				}
			}
			for _, ln := range lines {
				if polyHits(ln, b, false) {
					cost += 3
				}
			}
			if cost < bestCost {
				best, bestCost = b, cost
			}
		}
		hard = append(hard, best)
		lp.cost = append(lp.cost, bestCost)
		lp.placed = append(lp.placed, best)
		c.SetColor(color.NRGBA{R: 255, G: 255, B: 255, A: 215})
		c.Fill(best.Path())
		c.FillText(sty, vg.Point{X: best.Min.X + pad, Y: (best.Min.Y + best.Max.Y) / 2}, l.text)
	}
}

// polyHits reports whether the polyline (closed: a polygon, whose inside
// counts too) touches the box.
func polyHits(pl []vg.Point, b rect, closed bool) bool {
	for i := 1; i < len(pl); i++ {
		if segHitsRect(pl[i-1], pl[i], b) {
			return true
		}
	}
	return closed && len(pl) > 2 && inside(vg.Point{X: (b.Min.X + b.Max.X) / 2, Y: (b.Min.Y + b.Max.Y) / 2}, pl)
}
