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
	if len(fixes) == 0 {
		return nil, errors.New("map: no fixes to draw")
	}
	if err := opt.Validate(); err != nil {
		return nil, err
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
	band := 0.12 * span
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
	p.Add(plotter.NewGrid())

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
			img.Set(i, n-1-j, color.NRGBA{R: 255, G: 150, B: 0, A: a})
		}
	}
	p.Add(plotter.NewImage(img, x0, y0, x1, y1))

	if g != nil {
		if err := addGrid(p, fr, g); err != nil {
			return nil, err
		}
	}
	seen := map[string]bool{}
	var stXY plotter.XYs
	var stNames []string
	legendUsed, legendRej := false, false
	for fi, f := range fixes {
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
					return nil, err
				}
				poly.Color = colWedge
				poly.LineStyle.Width = 0
				p.Add(poly)
			}
			ln, err := plotter.NewLine(fr.line(b.Line(L, 24)))
			if err != nil {
				return nil, err
			}
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
				p.Legend.Add("bearing, wedge = ±1 sigma", ln)
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
				return nil, err
			}
			ln.Color = colEllipse
			ln.Width = vg.Points(1.6)
			if e.dashed {
				ln.Width = vg.Points(0.8)
				ln.Dashes = []vg.Length{vg.Points(2), vg.Points(2)}
			} else if f == fixes[0] {
				p.Legend.Add(fmt.Sprintf("%.0f%% error ellipse", 100*e.el.Probability), ln)
			}
			p.Add(ln)
		}
		x, y := fr.xy(f.Lat, f.Lon)
		sc, err := plotter.NewScatter(plotter.XYs{{X: x, Y: y}})
		if err != nil {
			return nil, err
		}
		sc.Shape = draw.CrossGlyph{}
		sc.Color = colEllipse
		sc.Radius = vg.Points(5)
		p.Add(sc)
		label := f.Ident
		if f.GridCell != "" {
			label += "  " + f.GridCell
		}
		if err := addLabels(p, plotter.XYs{{X: x, Y: y}}, []string{label}, colEllipse, 12, vg.Points(8), vg.Points(6)); err != nil {
			return nil, err
		}
	}
	if len(stXY) > 0 {
		sc, err := plotter.NewScatter(stXY)
		if err != nil {
			return nil, err
		}
		sc.Shape = draw.TriangleGlyph{}
		sc.Color = colStation
		sc.Radius = vg.Points(4.5)
		p.Add(sc)
		p.Legend.Add("station", sc)
		if err := addLabels(p, stXY, stNames, colStation, 10, vg.Points(6), vg.Points(-12)); err != nil {
			return nil, err
		}
	}
	p.Legend.Top = true
	p.Legend.Left = true
	p.Legend.Padding = vg.Points(3)

	side := vg.Length(opt.SizeCm) * vg.Centimeter
	wt, err := p.WriterTo(side, side, format)
	if err != nil {
		return nil, fmt.Errorf("map: %w", err)
	}
	var buf bytes.Buffer
	if _, err := wt.WriteTo(&buf); err != nil {
		return nil, fmt.Errorf("map: %w", err)
	}
	return buf.Bytes(), nil
}

func addLabels(p *plot.Plot, xy plotter.XYs, text []string, c color.Color, sizePt float64, dx, dy vg.Length) error {
	lb, err := plotter.NewLabels(plotter.XYLabels{XYs: xy, Labels: text})
	if err != nil {
		return err
	}
	for i := range lb.TextStyle {
		lb.TextStyle[i].Color = c
		lb.TextStyle[i].Font.Size = vg.Points(sizePt)
	}
	lb.Offset = vg.Point{X: dx, Y: dy}
	p.Add(lb)
	return nil
}

// addGrid draws the cell lines and the column letters and row numbers just
// outside the first row and first column.
func addGrid(p *plot.Plot, fr frame, g *geo.Grid) error {
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
	var xy plotter.XYs
	var text []string
	for i := 0; i < g.Cols; i++ {
		la, lo := g.GridToLatLon(float64(i)+0.5, -0.35)
		x, y := fr.xy(la, lo)
		xy = append(xy, plotter.XY{X: x, Y: y})
		text = append(text, geo.ColumnLabel(g.FirstCol+i))
	}
	for j := 0; j < g.Rows; j++ {
		la, lo := g.GridToLatLon(-0.35, float64(j)+0.5)
		x, y := fr.xy(la, lo)
		xy = append(xy, plotter.XY{X: x, Y: y})
		text = append(text, fmt.Sprint(g.FirstRow+j))
	}
	lb, err := plotter.NewLabels(plotter.XYLabels{XYs: xy, Labels: text})
	if err != nil {
		return err
	}
	for i := range lb.TextStyle {
		lb.TextStyle[i].Color = color.NRGBA{G: 100, B: 50, A: 255}
		lb.TextStyle[i].Font.Size = vg.Points(9)
		lb.TextStyle[i].XAlign = draw.XCenter
		lb.TextStyle[i].YAlign = draw.YCenter
	}
	p.Add(lb)
	return nil
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
