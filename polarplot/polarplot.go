// Package polarplot draws a bearing fit as a polar plot (gonum.org/v1/plot):
// the measured levels, the fitted pattern, the bearing with its ±1σ wedge and
// an ambiguous alternative dashed. North is up and degrees run clockwise;
// the radius is level in dB, from the top of the plot down a fixed range.
// The legend sits in a band under the circle, the ring labels on white
// along the direction the fitted pattern leaves most free, and the title
// and the legend print the bearing and sigma with one formatter
// (FormatBearing).
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
	"nullseek/internal/angle"
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

// FormatBearing is the one way bearings and sigmas are printed on a plot:
// "123.4° ± 3.2°" (1σ, 0.1° steps).
func FormatBearing(bearingDeg, sigmaDeg float64) string {
	return fmt.Sprintf("%.1f° ± %.1f°", bearingDeg, sigmaDeg)
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
		size = 16
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
	plotAspect = 1.24
	titleBand  = 0.34
)

// xy maps a bearing (degrees clockwise from north) and radius to plot
// coordinates with north up.
func xy(bearingDeg, r float64) plotter.XY {
	s, c := math.Sincos(bearingDeg * math.Pi / 180)
	return plotter.XY{X: r * s, Y: r * c}
}

// Plot builds the plot without writing it; label starts the title.
func Plot(pts []bearing.Point, est bearing.Estimate, p bearing.Pattern, label string, o Options) (*plot.Plot, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	if !finite(est.BearingDeg) || !finite(est.SigmaDeg) {
		return nil, fmt.Errorf("estimate has no bearing")
	}
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
		return nil, fmt.Errorf("no finite levels to plot")
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
			return nil, err
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
			return nil, err
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

	// ±1σ wedge.
	sig := est.SigmaDeg
	wedge := plotter.XYs{{}}
	for k := 0; k <= 40; k++ {
		a := est.BearingDeg - sig + 2*sig*float64(k)/40
		wedge = append(wedge, xy(a, 1.05))
	}
	pg, err := plotter.NewPolygon(wedge)
	if err != nil {
		return nil, err
	}
	pg.Color = colWedge
	pg.LineStyle.Width = 0
	pl.Add(pg)

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
			return nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: colPoints, Radius: vg.Points(1.1), Shape: draw.CircleGlyph{}}
		pl.Add(sc)
	}

	// Fitted pattern.
	fl, err := plotter.NewLine(fit)
	if err != nil {
		return nil, err
	}
	fl.LineStyle = draw.LineStyle{Color: colFit, Width: vg.Points(1.2)}
	pl.Add(fl)

	// Bearing and alternate.
	bl, err := plotter.NewLine(plotter.XYs{{}, xy(est.BearingDeg, 1.08)})
	if err != nil {
		return nil, err
	}
	bl.LineStyle = draw.LineStyle{Color: colBear, Width: vg.Points(2)}
	pl.Add(bl)
	var al *plotter.Line
	if est.AltBearingDeg != nil {
		if al, err = plotter.NewLine(plotter.XYs{{}, xy(*est.AltBearingDeg, 1.08)}); err != nil {
			return nil, err
		}
		al.LineStyle = draw.LineStyle{Color: colBear, Width: vg.Points(1.5), Dashes: []vg.Length{vg.Points(5), vg.Points(3)}}
		pl.Add(al)
	}

	// Ring labels on white, along the spoke direction where the fitted
	// pattern and the points pass farthest from the rings.
	labelAt := ringLabelBearing(fitLv, mp, ringR, rad, est)
	var ringLabels plotter.XYLabels
	for i, r := range ringR {
		c := xy(labelAt, r)
		w, h := 0.026*float64(len(ringText[i]))+0.03, 0.075
		box, err := plotter.NewPolygon(plotter.XYs{{X: c.X - w/2, Y: c.Y - h/2}, {X: c.X + w/2, Y: c.Y - h/2}, {X: c.X + w/2, Y: c.Y + h/2}, {X: c.X - w/2, Y: c.Y + h/2}})
		if err != nil {
			return nil, err
		}
		box.Color = color.White
		box.LineStyle.Width = 0
		pl.Add(box)
		ringLabels.XYs = append(ringLabels.XYs, c)
		ringLabels.Labels = append(ringLabels.Labels, ringText[i])
	}
	for _, lb := range []plotter.XYLabels{ringLabels, spokeLabels} {
		l, err := plotter.NewLabels(lb)
		if err != nil {
			return nil, err
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
		return nil, err
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

	// Legend in the band under the circle, left aligned.
	if sc != nil {
		pl.Legend.Add(fmt.Sprintf("measured (%d readings)", len(mp)), sc)
	}
	pl.Legend.Add("fitted "+p.Name, fl)
	pl.Legend.Add("bearing "+FormatBearing(est.BearingDeg, est.SigmaDeg)+" (1σ wedge)", bl, pg)
	if al != nil {
		pl.Legend.Add(fmt.Sprintf("the other null %.1f° (a loop cannot tell them apart)", *est.AltBearingDeg), al)
	}
	pl.Legend.Top = false
	pl.Legend.Left = true
	pl.Legend.XOffs = vg.Points(10)
	pl.Legend.YOffs = vg.Points(8)
	pl.Legend.Padding = vg.Points(2)
	pl.Legend.TextStyle.Font.Size = vg.Points(9)
	return pl, nil
}

// ringLabelBearing picks, among the diagonal spokes, the bearing along
// which the fitted pattern and the measured points keep farthest from the
// ring radii (and off the bearing's own line).
func ringLabelBearing(fitLv []float64, mp plotter.XYs, ringR []float64, rad func(float64) float64, est bearing.Estimate) float64 {
	best, bestScore := 15.0, math.Inf(-1)
	for a := 15.0; a < 360; a += 30 {
		if math.Abs(angle.Diff(est.BearingDeg, a)) < 20 {
			continue
		}
		if est.AltBearingDeg != nil && math.Abs(angle.Diff(*est.AltBearingDeg, a)) < 20 {
			continue
		}
		score := math.Inf(1)
		// the curve near this bearing (±4°)
		for d := -8; d <= 8; d++ {
			k := (int(a*2) + d + 720) % 720
			if !finite(fitLv[k]) {
				continue
			}
			for _, r := range ringR {
				score = math.Min(score, math.Abs(rad(fitLv[k])-r))
			}
		}
		// points near this bearing
		var near int
		for _, q := range mp {
			ang := math.Atan2(q.X, q.Y) * 180 / math.Pi
			if math.Abs(angle.Diff(a, ang)) < 4 {
				for _, r := range ringR {
					if math.Abs(math.Hypot(q.X, q.Y)-r) < 0.05 {
						near++
					}
				}
			}
		}
		score -= 0.002 * float64(near)
		if score > bestScore {
			best, bestScore = a, score
		}
	}
	return best
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
