// Package mapplot draws position fixes as a map with gonum/plot: stations,
// lines of position with their sigma wedges, error ellipses, the event grid
// with its labels and the bearing-likelihood shading. Plotting is kept out of
// geo, which does the Earth; this package only draws.
package mapplot

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/color"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"nullseek/geo"
	"nullseek/internal/palette"
)

// Options controls Render; zero values give the defaults (Defaults).
type Options struct {
	// SizeCm is the side of the square picture, 2..200 cm; default 22 cm.
	SizeCm float64
	// ShadeCells is the shading raster's side in samples, 10..2000;
	// default 240.
	ShadeCells int
	// Title above the map; default names the transmitters.
	Title string
	// ColorOf gives a transmitter's colour index (internal/palette) by
	// ident, so several maps and the KML agree; nil: the order of the fixes.
	ColorOf map[string]int
	// Underlay is a georeferenced picture drawn under everything else
	// (UnderlaySpec.Load); nil for none. One that covers none of the map's
	// area is an error (ErrUnderlayOutside).
	Underlay *Underlay
}

// Defaults are the values zero Options fields take.
var Defaults = Options{SizeCm: 22, ShadeCells: 240}

// Validate checks the sizes: zero (the default) or within the documented
// range.
func (o Options) Validate() error {
	if o.SizeCm != 0 && !(o.SizeCm >= 2 && o.SizeCm <= 200) {
		return fmt.Errorf("map size %v cm is outside 2..200", o.SizeCm)
	}
	if o.ShadeCells != 0 && (o.ShadeCells < 10 || o.ShadeCells > 2000) {
		return fmt.Errorf("map shading raster %d is outside 10..2000 samples a side", o.ShadeCells)
	}
	return nil
}

// Format returns "png" or "svg" from a file name's extension, or an error.
func Format(path string) (string, error) {
	l := strings.ToLower(path)
	switch {
	case strings.HasSuffix(l, ".png"):
		return "png", nil
	case strings.HasSuffix(l, ".svg"):
		return "svg", nil
	}
	return "", fmt.Errorf("map file %q: name it .png or .svg", path)
}

// The colours are shared with the KML export (internal/palette).
var (
	colRejected = palette.Rejected
	colEllipse  = palette.Ellipse
	colGrid     = palette.Grid
	colStation  = palette.Station
)

// frame maps lat/lon to km east/north of a reference point.
type frame struct{ lat0, lon0 float64 }

func (f frame) xy(lat, lon float64) (x, y float64) {
	e, n := geo.ENU(f.lat0, f.lon0, lat, lon)
	return e / 1e3, n / 1e3
}

func (f frame) line(pts [][2]float64) plotter.XYs {
	out := make(plotter.XYs, len(pts))
	for i, p := range pts {
		out[i].X, out[i].Y = f.xy(p[0], p[1])
	}
	return out
}

// Render draws the fixes (and the grid when not nil) as "png" or "svg" and
// returns the encoded picture. The map is a square of equal east and north
// scale in km from the grid origin (or the first fix without a grid).
func Render(fixes []*geo.Fix, g *geo.Grid, format string, opt Options) ([]byte, error) {
	b, _, err := render(fixes, g, format, opt)
	return b, err
}

// render is Render that also returns the label placer (for its costs).
func render(fixes []*geo.Fix, g *geo.Grid, format string, opt Options) ([]byte, *labelPlacer, error) {
	if len(fixes) == 0 {
		return nil, nil, errors.New("map: no fixes to draw")
	}
	if err := opt.Validate(); err != nil {
		return nil, nil, err
	}
	if opt.SizeCm == 0 {
		opt.SizeCm = Defaults.SizeCm
	}
	if opt.ShadeCells == 0 {
		opt.ShadeCells = Defaults.ShadeCells
	}
	fr := frame{fixes[0].Lat, fixes[0].Lon}
	if g != nil {
		fr = frame{g.OriginLat, g.OriginLon}
	}
	// Extent: stations, ellipses, grid.
	minX, maxX, minY, maxY := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	grow := func(x, y float64) {
		minX, maxX = math.Min(minX, x), math.Max(maxX, x)
		minY, maxY = math.Min(minY, y), math.Max(maxY, y)
	}
	for _, f := range fixes {
		for _, p := range geo.EllipsePolygon(f, f.Ellipse, 36) {
			grow(fr.xy(p[0], p[1]))
		}
		for _, b := range f.Bearings {
			if b.Validate() == nil {
				grow(fr.xy(b.Lat, b.Lon))
			}
		}
	}
	if g != nil {
		for _, p := range g.GridOutline() {
			grow(fr.xy(p[0], p[1]))
		}
	}
	span := math.Max(math.Max(maxX-minX, maxY-minY), 0.2) * 1.12
	cx, cy := (minX+maxX)/2, (minY+maxY)/2
	// A band across the top keeps the legend off the grid's column labels;
	// x grows as much so a kilometre stays as long both ways.
	// The band is as tall as the legend: one line per transmitter's
	// bearings, the two ellipses, the fix, the shading, the station and
	// perhaps rejected bearings, 13 pt each at 10 pt type.
	entries := len(fixes) + 6
	if opt.Underlay != nil {
		entries++
	}
	frac := math.Min(0.45, float64(entries*13+16)/(0.85*opt.SizeCm*72/2.54))
	band := span * frac / (1 - frac)
	x0, x1, y0, y1 := cx-span/2-band/2, cx+span/2+band/2, cy-span/2, cy+span/2+band

	p := plot.New()
	if opt.Title == "" {
		var ids []string
		for _, f := range fixes {
			ids = append(ids, f.Ident)
		}
		opt.Title = "Position fix: " + strings.Join(ids, ", ")
	}
	p.Title.Text = opt.Title
	p.X.Label.Text = fmt.Sprintf("km east of %s", geo.FormatLatLon(fr.lat0, fr.lon0))
	p.Y.Label.Text = "km north"
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = x0, x1, y0, y1
	p.X.Tick.Marker = kmTicks{}
	p.Y.Tick.Marker = kmTicks{}
	if u := opt.Underlay; u != nil {
		if u.coverage(fr, x0, y0, x1, y1) == 0 {
			return nil, nil, fmt.Errorf("underlay %s: %w (the map spans %.1f km around %s)", u.name, ErrUnderlayOutside, x1-x0, geo.FormatLatLon(geo.FromENU(fr.lat0, fr.lon0, cx*1e3, (y0+y1)/2*1e3)))
		}
		p.Add(underlayPlotter{u: u, fr: fr, x0: x0, y0: y0, x1: x1, y1: y1})
	} else {
		p.Add(plotter.NewGrid())
	}

	// Likelihood shading, each transmitter scaled to its own peak.
	n := opt.ShadeCells
	step := (x1 - x0) / float64(n) * 1e3 // the image spans the plot (square: x1−x0 = y1−y0)
	shade := make([]float64, n*n)
	for _, f := range fixes {
		lat0, lon0 := fr.lat0, fr.lon0
		d := geo.DensityRaster(f.Used(), lat0, lon0, x0*1e3, y0*1e3, step, n, n)
		for k, v := range d {
			shade[k] = math.Max(shade[k], v)
		}
	}
	img := image.NewRGBA(image.Rect(0, 0, n, n))
	for j := 0; j < n; j++ {
		for i := 0; i < n; i++ {
			v := shade[j*n+i]
			a := uint8(math.Round(170 * math.Sqrt(v)))
			img.Set(i, n-1-j, palette.WithAlpha(palette.Shade, a))
		}
	}
	p.Add(plotter.NewImage(img, x0, y0, x1, y1))

	lp := &labelPlacer{avoid: new([]vg.Rectangle)}
	if g != nil {
		// about how long a cell side is on the canvas (the data area is
		// some 85 % of the picture's side)
		cellPt := g.CellM / 1e3 / (x1 - x0) * 0.85 * opt.SizeCm / 2.54 * 72
		if err := addGrid(p, fr, g, cellPt); err != nil {
			return nil, nil, err
		}
		lp.boxes, lp.boxText = gridLabelXY(fr, g, cellPt)
	}
	seen := map[string]bool{}
	var stXY plotter.XYs
	var stNames []string
	legendRej := false
	for fi, f := range fixes {
		legendUsed := false
		ci := fi
		if c, ok := opt.ColorOf[f.Ident]; ok {
			ci = c
		}
		colUsed := palette.Transmitter(ci)
		colWedge := palette.WithAlpha(colUsed, 38)
		lines, _ := f.Drawn()
		for _, d := range lines {
			b := d.BearingUse
			L := math.Max(1.3*b.DistM, 0.15*span*1e3)
			if b.Used {
				wedge := []([2]float64){{b.Lat, b.Lon}}
				for k := 0; k <= 8; k++ {
					az := b.BearingDeg - b.SigmaDeg + 2*b.SigmaDeg*float64(k)/8
					la, lo, _ := geo.Direct(b.Lat, b.Lon, az, L)
					wedge = append(wedge, [2]float64{la, lo})
				}
				poly, err := plotter.NewPolygon(fr.line(wedge))
				if err != nil {
					return nil, nil, err
				}
				poly.Color = colWedge
				poly.LineStyle.Width = 0
				p.Add(poly)
			}
			ln, err := plotter.NewLine(fr.line(b.Line(L, 24)))
			if err != nil {
				return nil, nil, err
			}
			lp.lines = append(lp.lines, ln.XYs)
			ln.Width = vg.Points(1.2)
			ln.Color = colUsed
			if !b.Used {
				ln.Color = colRejected
				ln.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
				if !legendRej {
					p.Legend.Add("rejected bearing", ln)
					legendRej = true
				}
			} else if !legendUsed {
				p.Legend.Add(f.Ident+" bearings, wedge ±1σ", ln)
				legendUsed = true
			}
			p.Add(ln)
			if !seen[b.Station] {
				seen[b.Station] = true
				x, y := fr.xy(b.Lat, b.Lon)
				stXY = append(stXY, plotter.XY{X: x, Y: y})
				stNames = append(stNames, b.Station)
			}
		}
	}
	for _, f := range fixes {
		for _, e := range []struct {
			el     geo.Ellipse
			dashed bool
		}{{f.Ellipse, false}, {f.Ellipse1Sigma, true}} {
			ln, err := plotter.NewLine(fr.line(geo.EllipsePolygon(f, e.el, 72)))
			if err != nil {
				return nil, nil, err
			}
			if !e.dashed {
				lp.ellipses = append(lp.ellipses, ln.XYs)
			}
			ln.Color = colEllipse
			ln.Width = vg.Points(1.6)
			if e.dashed {
				ln.Width = vg.Points(0.8)
				ln.Dashes = []vg.Length{vg.Points(2), vg.Points(2)}
			}
			if f == fixes[0] {
				what := "%.0f%% error ellipse"
				if e.dashed {
					what = "1σ error ellipse (%.0f%%)"
				}
				p.Legend.Add(fmt.Sprintf(what, 100*e.el.Probability), ln)
			}
			p.Add(ln)
		}
		x, y := fr.xy(f.Lat, f.Lon)
		sc, err := plotter.NewScatter(plotter.XYs{{X: x, Y: y}})
		if err != nil {
			return nil, nil, err
		}
		sc.Shape = draw.CrossGlyph{}
		sc.Color = colEllipse
		sc.Radius = vg.Points(5)
		p.Add(sc)
		if f == fixes[0] {
			p.Legend.Add("fix: most likely position", sc)
			p.Legend.Add("shading: likelihood of the position", shadeThumb{})
		}
		label := f.Ident
		if f.GridCell != "" {
			label += "  cell " + f.GridCell
		}
		box := [4]float64{x, y, x, y}
		for _, q := range geo.EllipsePolygon(f, f.Ellipse, 36) {
			qx, qy := fr.xy(q[0], q[1])
			box = [4]float64{math.Min(box[0], qx), math.Min(box[1], qy), math.Max(box[2], qx), math.Max(box[3], qy)}
		}
		lp.points = append(lp.points, plotter.XY{X: x, Y: y})
		lp.labels = append(lp.labels, mapLabel{text: label, col: colEllipse, size: vg.Points(12), at: plotter.XY{X: x, Y: y}, box: box, isFix: true})
	}
	if len(stXY) > 0 {
		sc, err := plotter.NewScatter(stXY)
		if err != nil {
			return nil, nil, err
		}
		sc.Shape = draw.TriangleGlyph{}
		sc.Color = colStation
		sc.Radius = vg.Points(4.5)
		p.Add(sc)
		p.Legend.Add("station", sc)
		for i, q := range stXY {
			lp.points = append(lp.points, q)
			lp.labels = append(lp.labels, mapLabel{text: stNames[i], col: colStation, size: vg.Points(10), at: q, r: sc.Radius})
		}
	}
	p.Add(lp)
	if opt.Underlay != nil {
		p.Legend.Add("under it: "+filepath.Base(opt.Underlay.name), underlayThumb{opt.Underlay})
	}
	p.Add(furniture{spanKm: x1 - x0})
	p.Title.Padding = vg.Points(8)
	p.Legend.Top = true
	p.Legend.Left = true
	p.Legend.Padding = vg.Points(2)
	p.Legend.TextStyle.Font.Size = vg.Points(10)
	p.Legend.XOffs, p.Legend.YOffs = vg.Points(6), vg.Points(-6)

	side := vg.Length(opt.SizeCm) * vg.Centimeter
	cw, err := draw.NewFormattedCanvas(side, side, format)
	if err != nil {
		return nil, nil, fmt.Errorf("map: %w", err)
	}
	// The legend is drawn last, on a light box of its own, so that what
	// lies under it stays readable and it stays readable over the map.
	legend := p.Legend
	p.Legend = plot.NewLegend()
	// a margin round the picture: the title off the top edge
	dc := draw.Crop(draw.New(cw), 0, -vg.Points(4), 0, -vg.Points(6))
	da := p.DataCanvas(dc)
	// The legend's size from gonum's Legend.Rectangle (whose Left is the
	// mirror of Draw's in plot v0.17, and which leaves out the offsets),
	// placed where Draw puts the entries: top left, shifted by the offsets.
	flip := legend
	flip.Left = !legend.Left
	size := flip.Rectangle(da).Size()
	pad := vg.Points(4)
	top := da.Max.Y + legend.YOffs
	left := da.Min.X + legend.XOffs
	box := vg.Rectangle{Min: vg.Point{X: left - pad, Y: top - size.Y - legend.TextStyle.FontExtents().Descent - pad},
		Max: vg.Point{X: left + size.X + pad, Y: top + pad}}
	*lp.avoid = append(append(*lp.avoid, box), furnitureRects(da, x1-x0)...)
	p.Draw(dc)
	da.SetColor(color.NRGBA{R: 255, G: 255, B: 255, A: 225})
	da.Fill(box.Path())
	da.SetLineStyle(draw.LineStyle{Color: color.Gray{Y: 140}, Width: vg.Points(0.6)})
	da.Stroke(box.Path())
	legend.Draw(da)
	var buf bytes.Buffer
	if _, err := cw.WriteTo(&buf); err != nil {
		return nil, nil, fmt.Errorf("map: %w", err)
	}
	return buf.Bytes(), lp, nil
}

// underlayThumb is the legend's swatch for the underlay: its mean colour,
// washed as drawn.
type underlayThumb struct{ u *Underlay }

func (t underlayThumb) Thumbnail(c *draw.Canvas) {
	var sum [4]float64
	pix := t.u.img.Pix
	n := 0
	for o := 0; o+3 < len(pix); o += 4 * 97 { // a sample of the pixels
		for k := 0; k < 4; k++ {
			sum[k] += float64(pix[o+k])
		}
		n++
	}
	k := 1 - underlayWash
	a := sum[3] / float64(n)
	col := color.RGBA{R: uint8(k*sum[0]/float64(n) + underlayWash*a), G: uint8(k*sum[1]/float64(n) + underlayWash*a), B: uint8(k*sum[2]/float64(n) + underlayWash*a), A: uint8(a)}
	c.SetColor(col)
	c.Fill(c.Rectangle.Path())
	c.SetLineStyle(draw.LineStyle{Color: color.Gray{Y: 120}, Width: vg.Points(0.5)})
	c.Stroke(c.Rectangle.Path())
}

// shadeThumb is the legend's swatch for the likelihood shading.
type shadeThumb struct{}

func (shadeThumb) Thumbnail(c *draw.Canvas) {
	c.SetColor(palette.WithAlpha(palette.Shade, palette.ShadeSwatchAlpha))
	c.Fill(c.Rectangle.Path())
}

// furniture draws a scale bar and a north arrow in the lower right corner
// of the map. The map is a local east/north plane (frame.xy), so north is
// straight up and a kilometre has one length both ways.
type furniture struct{ spanKm float64 }

// niceLength is the 1, 2 or 5 × 10^k km nearest below a fifth of the span.
func niceLength(spanKm float64) float64 {
	target := spanKm / 5
	e := math.Pow(10, math.Floor(math.Log10(target)))
	for _, m := range []float64{5, 2, 1} {
		if m*e <= target {
			return m * e
		}
	}
	return e
}

// furnitureRects bound what furniture draws on the data canvas c for a
// map spanKm wide: the scale bar with its label, and the north arrow with
// its N (the lengths of furniture.Plot).
func furnitureRects(c draw.Canvas, spanKm float64) []vg.Rectangle {
	px := vg.Length(niceLength(spanKm)/spanKm) * (c.Max.X - c.Min.X)
	right, bottom := c.Max.X-vg.Points(14), c.Min.Y+vg.Points(14)
	ax, ay := right-vg.Points(8), bottom+vg.Points(30)
	return []vg.Rectangle{
		{Min: vg.Point{X: right - px - vg.Points(3), Y: bottom - vg.Points(3)}, Max: vg.Point{X: right + vg.Points(3), Y: bottom + vg.Points(20)}},
		{Min: vg.Point{X: ax - vg.Points(8), Y: ay - vg.Points(2)}, Max: vg.Point{X: ax + vg.Points(8), Y: ay + vg.Points(38)}},
	}
}

func (f furniture) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	L := niceLength(f.spanKm)
	px := trX(p.X.Min+L) - trX(p.X.Min) // bar length on the canvas
	right := c.Max.X - vg.Points(14)
	bottom := c.Min.Y + vg.Points(14)
	ink := color.Gray{Y: 30}
	c.SetLineStyle(draw.LineStyle{Color: ink, Width: vg.Points(1.6)})
	var bar vg.Path
	bar.Move(vg.Point{X: right - px, Y: bottom})
	bar.Line(vg.Point{X: right, Y: bottom})
	for _, x := range []vg.Length{right - px, right - px/2, right} {
		bar.Move(vg.Point{X: x, Y: bottom})
		bar.Line(vg.Point{X: x, Y: bottom + vg.Points(5)})
	}
	c.Stroke(bar)
	sty := p.Legend.TextStyle
	sty.Color = ink
	sty.Font.Size = vg.Points(10)
	sty.XAlign, sty.YAlign = draw.XCenter, draw.YBottom
	label := strconv.FormatFloat(L, 'f', -1, 64) + " km"
	if L < 1 {
		label = strconv.FormatFloat(L*1000, 'f', -1, 64) + " m"
	}
	c.FillText(sty, vg.Point{X: right - px/2, Y: bottom + vg.Points(7)}, label)
	// North arrow above the bar.
	ax, ay := right-vg.Points(8), bottom+vg.Points(30)
	var head vg.Path
	head.Move(vg.Point{X: ax, Y: ay + vg.Points(22)})
	head.Line(vg.Point{X: ax - vg.Points(6), Y: ay})
	head.Line(vg.Point{X: ax, Y: ay + vg.Points(6)})
	head.Line(vg.Point{X: ax + vg.Points(6), Y: ay})
	head.Close()
	c.SetColor(ink)
	c.Fill(head)
	sty.YAlign = draw.YBottom
	c.FillText(sty, vg.Point{X: ax, Y: ay + vg.Points(24)}, "N")
}

// addGrid draws the cell lines and the column letters and row numbers just
// outside the first row and first column.
func addGrid(p *plot.Plot, fr frame, g *geo.Grid, cellPt float64) error {
	seg := func(ax, ay, bx, by float64) error {
		la, lo := g.GridToLatLon(ax, ay)
		lb, lob := g.GridToLatLon(bx, by)
		ln, err := plotter.NewLine(fr.line([][2]float64{{la, lo}, {lb, lob}}))
		if err != nil {
			return err
		}
		ln.Color = colGrid
		ln.Width = vg.Points(0.7)
		p.Add(ln)
		return nil
	}
	cols, rows := float64(g.Cols), float64(g.Rows)
	for i := 0; i <= g.Cols; i++ {
		if err := seg(float64(i), 0, float64(i), rows); err != nil {
			return err
		}
	}
	for j := 0; j <= g.Rows; j++ {
		if err := seg(0, float64(j), cols, float64(j)); err != nil {
			return err
		}
	}
	xy, text := gridLabelXY(fr, g, cellPt)
	lb, err := plotter.NewLabels(plotter.XYLabels{XYs: xy, Labels: text})
	if err != nil {
		return err
	}
	for i := range lb.TextStyle {
		lb.TextStyle[i].Color = palette.GridLabel
		lb.TextStyle[i].Font.Size = vg.Points(9)
		lb.TextStyle[i].XAlign = draw.XCenter
		lb.TextStyle[i].YAlign = draw.YCenter
	}
	p.Add(lb)
	return nil
}

// gridLabelXY is where the column letters (first) and row numbers go,
// just outside the first row and the first column, and what they say.
// Where a cell side (cellPt points on the canvas) is too short for its
// label, only every second, fifth or tenth column or row is labelled, the
// first always.
func gridLabelXY(fr frame, g *geo.Grid, cellPt float64) (plotter.XYs, []string) {
	every := func(needPt float64) int {
		for _, k := range []int{1, 2, 5, 10, 20, 50} {
			if float64(k)*cellPt >= needPt {
				return k
			}
		}
		return 100
	}
	colW := 6.0*float64(len(geo.ColumnLabel(g.FirstCol+g.Cols-1))) + 3 // 9 pt type
	rowW := 12.0
	var xy plotter.XYs
	var text []string
	for i, k := 0, every(colW); i < g.Cols; i += k {
		la, lo := g.GridToLatLon(float64(i)+0.5, -0.35)
		x, y := fr.xy(la, lo)
		xy = append(xy, plotter.XY{X: x, Y: y})
		text = append(text, geo.ColumnLabel(g.FirstCol+i))
	}
	for j, k := 0, every(rowW); j < g.Rows; j += k {
		la, lo := g.GridToLatLon(-0.35, float64(j)+0.5)
		x, y := fr.xy(la, lo)
		xy = append(xy, plotter.XY{X: x, Y: y})
		text = append(text, fmt.Sprint(g.FirstRow+j))
	}
	return xy, text
}

// kmTicks marks about eight round steps (1, 2 or 5 times a power of ten).
type kmTicks struct{}

func (kmTicks) Ticks(lo, hi float64) []plot.Tick {
	raw := (hi - lo) / 8
	p10 := math.Pow(10, math.Floor(math.Log10(raw)))
	step := 10 * p10
	for _, m := range []float64{1, 2, 5} {
		if m*p10 >= raw {
			step = m * p10
			break
		}
	}
	var out []plot.Tick
	for v := math.Ceil(lo/step) * step; v <= hi+step*1e-9; v += step {
		out = append(out, plot.Tick{Value: v, Label: strconv.FormatFloat(math.Round(v/step)*step, 'f', -1, 64)})
	}
	return out
}
