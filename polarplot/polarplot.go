// Package polarplot draws a bearing fit as a polar plot (gonum.org/v1/plot):
// the measured levels, the fitted pattern, the bearing with its ±1σ wedge and
// an ambiguous alternative dashed. North is up and degrees run clockwise;
// the radius is level in dB, from the top of the plot down a fixed range.
// The legend sits on a light box centred in a band under the circle, the
// ring labels on white boxes along a direction where no box meets the
// fitted pattern, the points or the bearing lines (the data are drawn over
// the boxes should none be clear), and the title and the legend print the
// bearing and sigma with one formatter (FormatBearing).
package polarplot

import (
	"fmt"
	"image/color"
	"io"
	"math"
	"nullseek/internal/atomicfile"
	"path/filepath"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"nullseek/bearing"
)

// Options tunes Plot. The zero value gives the defaults.
type Options struct {
	// RangeDB is the level range from the rim to the centre (default: the
	// measured span plus 3 dB, between 10 and 60 dB).
	RangeDB float64
	// SizeCm is the width of the image (default 16 cm); it is 1.2 times
	// as tall, for the legend band.
	SizeCm float64
	// Note is a line under the title, e.g. which north the bearing is
	// from and which direction of the antenna the heading named.
	Note string
}

// FormatBearing is the one way bearings and sigmas are printed on a plot,
// in the title and in the legend: "123.4° ± 3.2° (1σ)" (0.1° steps).
func FormatBearing(bearingDeg, sigmaDeg float64) string {
	return fmt.Sprintf("%.1f° ± %.1f° (1σ)", bearingDeg, sigmaDeg)
}

var (
	colPoints = color.RGBA{R: 40, G: 90, B: 200, A: 255}
	colFit    = color.RGBA{R: 20, G: 20, B: 20, A: 255}
	colBear   = color.RGBA{R: 210, G: 30, B: 30, A: 255}
	colWedge  = color.NRGBA{R: 230, G: 60, B: 60, A: 90}
	colGrid   = color.RGBA{R: 175, G: 175, B: 175, A: 255}
)

// Write draws the plot to path; the format follows the extension (.png,
// .svg, also .pdf/.eps/.jpg/.tif as gonum/plot supports). The file is
// written to a temporary name and renamed into place. The title is label
// followed by the bearing and sigma (FormatBearing).
func Write(path string, pts []bearing.Point, est bearing.Estimate, p bearing.Pattern, label string) error {
	return WriteOptions(path, pts, est, p, label, Options{})
}

// WriteOptions is Write with options.
func WriteOptions(path string, pts []bearing.Point, est bearing.Estimate, p bearing.Pattern, title string, o Options) error {
	var set atomicfile.Set
	defer set.Abort()
	if err := Stage(&set, path, pts, est, p, title, o); err != nil {
		return err
	}
	if err := set.Commit(); err != nil {
		return fmt.Errorf("polar plot: %w", err)
	}
	return nil
}

// Stage draws the plot into set, to appear at path when the set is
// committed with the run's other outputs.
func Stage(set *atomicfile.Set, path string, pts []bearing.Point, est bearing.Estimate, p bearing.Pattern, title string, o Options) error {
	ext := strings.TrimPrefix(strings.ToLower(filepath.Ext(path)), ".")
	if ext == "" {
		return fmt.Errorf("polar plot %s: no file extension to choose the format", path)
	}
	pl, err := Plot(pts, est, p, title, o)
	if err != nil {
		return fmt.Errorf("polar plot %s: %w", path, err)
	}
	size := o.SizeCm
	if size == 0 {
		size = defaultSizeCm
	}
	wt, err := pl.WriterTo(vg.Length(size)*vg.Centimeter, vg.Length(size*plotAspect)*vg.Centimeter, ext)
	if err != nil {
		return fmt.Errorf("polar plot %s: %w", path, err)
	}
	if err := set.WriteFunc(path, func(w io.Writer) error {
		_, err := wt.WriteTo(w)
		return err
	}); err != nil {
		return fmt.Errorf("polar plot: %w", err)
	}
	return nil
}

// plotAspect is height over width; titleBand is the room above the circle
// for the title (data units: the circle has radius 1, its labels reach
// 1.2); what is left under the circle holds the legend.
const (
	plotAspect    = 1.24
	titleBand     = 0.34
	defaultSizeCm = 16
	// legendTop is where the legend band starts (data units): under the
	// spoke labels, which reach 1.12 plus half a line.
	legendTop = -1.22
)

// xy maps a bearing (degrees clockwise from north) and radius to plot
// coordinates with north up.
func xy(bearingDeg, r float64) plotter.XY {
	s, c := math.Sincos(bearingDeg * math.Pi / 180)
	return plotter.XY{X: r * s, Y: r * c}
}

// Plot builds the plot without writing it; label starts the title.
func Plot(pts []bearing.Point, est bearing.Estimate, p bearing.Pattern, label string, o Options) (*plot.Plot, error) {
	pl, _, err := build(pts, est, p, label, o)
	return pl, err
}

// layout is what build placed, for the tests.
type layout struct {
	legend    *legendBand
	ringBoxes [][4]float64 // data units
	fit       plotter.XYs
}

func build(pts []bearing.Point, est bearing.Estimate, p bearing.Pattern, label string, o Options) (*plot.Plot, *layout, error) {
	if err := p.Validate(); err != nil {
		return nil, nil, err
	}
	if !finite(est.BearingDeg) || !finite(est.SigmaDeg) {
		return nil, nil, fmt.Errorf("estimate has no bearing")
	}
	lay := &layout{}
	// Level scale: top = highest of data and fit.
	top := math.Inf(-1)
	lo := math.Inf(1)
	for _, q := range pts {
		if finite(q.LevelDB) {
			top = math.Max(top, q.LevelDB)
			lo = math.Min(lo, q.LevelDB)
		}
	}
	var fitLv []float64
	for k := 0; k <= 720; k++ {
		l := est.FittedLevelDB(p, float64(k)/2)
		fitLv = append(fitLv, l)
		if finite(l) {
			top = math.Max(top, l)
			lo = math.Min(lo, l)
		}
	}
	if !finite(top) || !finite(lo) {
		return nil, nil, fmt.Errorf("no finite levels to plot")
	}
	top = math.Ceil(top/5) * 5
	rng := o.RangeDB
	if rng == 0 {
		rng = math.Min(math.Max(math.Ceil((top-lo+3)/10)*10, 10), 60)
	}
	rad := func(l float64) float64 { return math.Min(math.Max((l-(top-rng))/rng, 0), 1) }
	fit := make(plotter.XYs, 0, len(fitLv))
	for k, l := range fitLv {
		fit = append(fit, xy(float64(k)/2, rad(l)))
	}

	pl := plot.New()
	pl.HideAxes()
	pl.X.Min, pl.X.Max = -1.32, 1.32
	// The title is drawn in data units too, so that the data area has the
	// image's aspect and the circle stays round.
	pl.Y.Max = 1.32 + titleBand
	pl.Y.Min = pl.Y.Max - 2.64*plotAspect
	title := label + ": " + FormatBearing(est.BearingDeg, est.SigmaDeg)

	// Grid: level rings and 30° spokes.
	step := 10.0
	if rng <= 20 {
		step = 5
	}
	var ringR []float64
	var ringText []string
	for l := 0.0; l <= rng+1e-9; l += step {
		r := 1 - l/rng
		if r <= 0 {
			continue
		}
		ring := make(plotter.XYs, 0, 181)
		for a := 0; a <= 360; a += 2 {
			ring = append(ring, xy(float64(a), r))
		}
		ln, err := plotter.NewLine(ring)
		if err != nil {
			return nil, nil, err
		}
		ln.LineStyle = draw.LineStyle{Color: colGrid, Width: vg.Points(0.5)}
		if l > 0 {
			ln.LineStyle.Dashes = []vg.Length{vg.Points(2), vg.Points(2)}
		}
		pl.Add(ln)
		ringR = append(ringR, r)
		ringText = append(ringText, fmt.Sprintf("%.0f dB", top-l))
	}
	var spokeLabels plotter.XYLabels
	for a := 0; a < 360; a += 30 {
		ln, err := plotter.NewLine(plotter.XYs{{}, xy(float64(a), 1)})
		if err != nil {
			return nil, nil, err
		}
		ln.LineStyle = draw.LineStyle{Color: colGrid, Width: vg.Points(0.5)}
		pl.Add(ln)
		lab := fmt.Sprintf("%d°", a)
		if a == 0 {
			lab = "N 0°"
		}
		spokeLabels.XYs = append(spokeLabels.XYs, xy(float64(a), 1.12))
		spokeLabels.Labels = append(spokeLabels.Labels, lab)
	}

	// The data are drawn over the ring labels' boxes (over), so that where a
	// box cannot keep clear the curve stays whole.
	var over, under []plot.Plotter

	// ±1σ wedge.
	sig := est.SigmaDeg
	wedge := plotter.XYs{{}}
	for k := 0; k <= 40; k++ {
		a := est.BearingDeg - sig + 2*sig*float64(k)/40
		wedge = append(wedge, xy(a, 1.05))
	}
	pg, err := plotter.NewPolygon(wedge)
	if err != nil {
		return nil, nil, err
	}
	pg.Color = colWedge
	pg.LineStyle.Width = 0
	over = append(over, pg)

	// Measured points.
	var mp plotter.XYs
	for _, q := range pts {
		if !finite(q.LevelDB) || !finite(q.HeadingDeg) {
			continue
		}
		mp = append(mp, xy(q.HeadingDeg, rad(q.LevelDB)))
	}
	var sc *plotter.Scatter
	if len(mp) > 0 {
		if sc, err = plotter.NewScatter(mp); err != nil {
			return nil, nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: colPoints, Radius: vg.Points(1.1), Shape: draw.CircleGlyph{}}
		over = append(over, sc)
	}

	// Fitted pattern.
	fl, err := plotter.NewLine(fit)
	if err != nil {
		return nil, nil, err
	}
	fl.LineStyle = draw.LineStyle{Color: colFit, Width: vg.Points(1.2)}
	over = append(over, fl)

	// Bearing and alternate.
	bl, err := plotter.NewLine(plotter.XYs{{}, xy(est.BearingDeg, 1.08)})
	if err != nil {
		return nil, nil, err
	}
	bl.LineStyle = draw.LineStyle{Color: colBear, Width: vg.Points(2)}
	over = append(over, bl)
	var al *plotter.Line
	if est.AltBearingDeg != nil {
		if al, err = plotter.NewLine(plotter.XYs{{}, xy(*est.AltBearingDeg, 1.08)}); err != nil {
			return nil, nil, err
		}
		al.LineStyle = draw.LineStyle{Color: colBear, Width: vg.Points(1.5), Dashes: []vg.Length{vg.Points(5), vg.Points(3)}}
		over = append(over, al)
	}

	// Ring labels on white boxes, all along one direction where no box
	// meets the fitted pattern, the measured points or the bearing lines.
	size := o.SizeCm
	if size == 0 {
		size = defaultSizeCm
	}
	ptPerUnit := size / 2.54 * 72 / 2.64 // points per data unit
	lsty := pl.Legend.TextStyle
	lsty.Font.Size = vg.Points(8)
	var boxes []labelBox
	for i := range ringR {
		boxes = append(boxes, labelBox{w: float64(lsty.Width(ringText[i])+vg.Points(4)) / ptPerUnit, h: float64(lsty.FontExtents().Height+vg.Points(2)) / ptPerUnit})
	}
	labelAt := ringLabelBearing(fit, mp, ringR, boxes, est)
	var ringLabels plotter.XYLabels
	for i, r := range ringR {
		c := xy(labelAt, r)
		w, h := boxes[i].w, boxes[i].h
		box, err := plotter.NewPolygon(plotter.XYs{{X: c.X - w/2, Y: c.Y - h/2}, {X: c.X + w/2, Y: c.Y - h/2}, {X: c.X + w/2, Y: c.Y + h/2}, {X: c.X - w/2, Y: c.Y + h/2}})
		if err != nil {
			return nil, nil, err
		}
		box.Color = color.White
		box.LineStyle.Width = 0
		under = append(under, box)
		lay.ringBoxes = append(lay.ringBoxes, boxAt(c, boxes[i]))
		ringLabels.XYs = append(ringLabels.XYs, c)
		ringLabels.Labels = append(ringLabels.Labels, ringText[i])
	}
	pl.Add(under...)
	pl.Add(over...)
	for _, lb := range []plotter.XYLabels{ringLabels, spokeLabels} {
		l, err := plotter.NewLabels(lb)
		if err != nil {
			return nil, nil, err
		}
		for i := range l.TextStyle {
			l.TextStyle[i].Font.Size = vg.Points(8)
			l.TextStyle[i].XAlign = draw.XCenter
			l.TextStyle[i].YAlign = draw.YCenter
			l.TextStyle[i].Color = color.Gray{Y: 60}
		}
		pl.Add(l)
	}

	// Title (and note) above the circle.
	tl := plotter.XYLabels{XYs: []plotter.XY{{X: 0, Y: 1.32 + titleBand*0.62}}, Labels: []string{title}}
	if o.Note != "" {
		tl.XYs = append(tl.XYs, plotter.XY{X: 0, Y: 1.32 + titleBand*0.25})
		tl.Labels = append(tl.Labels, o.Note)
	}
	tlab, err := plotter.NewLabels(tl)
	if err != nil {
		return nil, nil, err
	}
	for i := range tlab.TextStyle {
		tlab.TextStyle[i].Font.Size = vg.Points(12)
		if i > 0 {
			tlab.TextStyle[i].Font.Size = vg.Points(8.5)
		}
		tlab.TextStyle[i].XAlign = draw.XCenter
		tlab.TextStyle[i].YAlign = draw.YCenter
	}
	pl.Add(tlab)

	// Legend centred in the band under the circle, on a light box.
	leg := plot.NewLegend()
	if sc != nil {
		leg.Add(fmt.Sprintf("measured (%d readings)", len(mp)), sc)
	}
	leg.Add("fitted "+p.Name, fl)
	leg.Add("bearing "+FormatBearing(est.BearingDeg, est.SigmaDeg)+", shaded ±1σ", bl, pg)
	if al != nil {
		leg.Add(fmt.Sprintf("the other null %.1f° (a loop cannot tell them apart)", *est.AltBearingDeg), al)
	}
	leg.TextStyle.Font.Size = vg.Points(9)
	leg.Padding = vg.Points(2)
	lay.legend = &legendBand{leg: leg, top: legendTop}
	lay.fit = fit
	pl.Add(lay.legend)
	return pl, lay, nil
}

// legendBand draws a legend centred in the band from data y = top down to
// the foot of the picture, on a white box with a grey edge.
type legendBand struct {
	leg plot.Legend
	top float64
	box vg.Rectangle // where it was drawn (canvas units), for the tests
	all vg.Rectangle // the canvas it was drawn on
}

func (lb *legendBand) Plot(c draw.Canvas, p *plot.Plot) {
	_, trY := p.Transforms(&c)
	top := trY(lb.top)
	// gonum/plot v0.17's Legend.Rectangle mirrors Left against Draw; its
	// size is what counts here
	flip := lb.leg
	flip.Left = !lb.leg.Left
	size := flip.Rectangle(c).Size()
	size.Y += lb.leg.TextStyle.FontExtents().Descent
	pad := vg.Points(6)
	cx, cy := (c.Min.X+c.Max.X)/2, (top+c.Min.Y)/2
	box := vg.Rectangle{Min: vg.Point{X: cx - size.X/2 - pad, Y: cy - size.Y/2 - pad}, Max: vg.Point{X: cx + size.X/2 + pad, Y: cy + size.Y/2 + pad}}
	lb.box, lb.all = box, c.Rectangle
	c.SetColor(color.NRGBA{R: 255, G: 255, B: 255, A: 235})
	c.Fill(box.Path())
	c.SetLineStyle(draw.LineStyle{Color: color.Gray{Y: 150}, Width: vg.Points(0.6)})
	c.Stroke(box.Path())
	leg := lb.leg
	leg.Top, leg.Left = true, true
	leg.XOffs, leg.YOffs = 0, 0
	inner := draw.Canvas{Canvas: c.Canvas, Rectangle: vg.Rectangle{Min: vg.Point{X: box.Min.X + pad, Y: box.Min.Y + pad}, Max: vg.Point{X: box.Max.X - pad, Y: box.Max.Y - pad}}}
	leg.Draw(inner)
}

// labelBox is a ring label's size in data units.
type labelBox struct{ w, h float64 }

// ringLabelBearing picks the direction (5° steps) along which the ring
// labels' boxes, centred on their rings, meet the fewest pieces of the
// fitted pattern, measured points and bearing lines; between two spokes
// (15°, 45°, …) when that is as clear.
func ringLabelBearing(fit, mp plotter.XYs, ringR []float64, boxes []labelBox, est bearing.Estimate) float64 {
	best, bestCost := 45.0, math.Inf(1)
	for a := 0.0; a < 360; a += 5 {
		cost := 0.0
		if math.Mod(a, 30) != 15 {
			cost += 0.5
		}
		for i, r := range ringR {
			b := boxAt(xy(a, r), boxes[i])
			if hitsBox(fit, b) {
				cost += 100
			}
			for _, d := range []float64{est.BearingDeg - est.SigmaDeg, est.BearingDeg, est.BearingDeg + est.SigmaDeg} {
				if hitsBox(plotter.XYs{{}, xy(d, 1.08)}, b) {
					cost += 50
				}
			}
			if est.AltBearingDeg != nil && hitsBox(plotter.XYs{{}, xy(*est.AltBearingDeg, 1.08)}, b) {
				cost += 50
			}
			for _, q := range mp {
				if q.X >= b[0] && q.X <= b[2] && q.Y >= b[1] && q.Y <= b[3] {
					cost += 5
				}
			}
		}
		if cost < bestCost {
			best, bestCost = a, cost
		}
	}
	return best
}

// boxAt is the box (x0, y0, x1, y1) of size b centred on c.
func boxAt(c plotter.XY, b labelBox) [4]float64 {
	return [4]float64{c.X - b.w/2, c.Y - b.h/2, c.X + b.w/2, c.Y + b.h/2}
}

// hitsBox reports whether the polyline passes through the box
// (Liang–Barsky clipping of each segment).
func hitsBox(pl plotter.XYs, b [4]float64) bool {
	for k := 1; k < len(pl); k++ {
		p, q := pl[k-1], pl[k]
		t0, t1 := 0.0, 1.0
		dx, dy := q.X-p.X, q.Y-p.Y
		ok := true
		for _, e := range [4][2]float64{{-dx, p.X - b[0]}, {dx, b[2] - p.X}, {-dy, p.Y - b[1]}, {dy, b[3] - p.Y}} {
			if e[0] == 0 {
				if e[1] < 0 {
					ok = false
					break
				}
				continue
			}
			t := e[1] / e[0]
			if e[0] < 0 {
				t0 = math.Max(t0, t)
			} else {
				t1 = math.Min(t1, t)
			}
			if t0 > t1 {
				ok = false
				break
			}
		}
		if ok {
			return true
		}
	}
	return false
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
