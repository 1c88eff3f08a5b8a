// Package polarplot draws a bearing fit as a polar plot (gonum.org/v1/plot):
// the measured levels, the fitted pattern, the bearing with its ±1σ wedge and
// an ambiguous alternative dashed. North is up and degrees run clockwise;
// the radius is level in dB, from the top of the plot down a fixed range.
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
	// SizeCm is the side of the square image (default 16 cm).
	SizeCm float64
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
// written to a temporary name and renamed into place.
func Write(path string, pts []bearing.Point, est bearing.Estimate, p bearing.Pattern, title string) error {
	return WriteOptions(path, pts, est, p, title, Options{})
}

// WriteOptions is Write with options.
func WriteOptions(path string, pts []bearing.Point, est bearing.Estimate, p bearing.Pattern, title string, o Options) error {
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
	wt, err := pl.WriterTo(vg.Length(size)*vg.Centimeter, vg.Length(size)*vg.Centimeter, ext)
	if err != nil {
		return fmt.Errorf("polar plot %s: %w", path, err)
	}
	if err := atomicfile.WriteFunc(path, func(w io.Writer) error {
		_, err := wt.WriteTo(w)
		return err
	}); err != nil {
		return fmt.Errorf("polar plot: %w", err)
	}
	return nil
}

// xy maps a bearing (degrees clockwise from north) and radius to plot
// coordinates with north up.
func xy(bearingDeg, r float64) plotter.XY {
	s, c := math.Sincos(bearingDeg * math.Pi / 180)
	return plotter.XY{X: r * s, Y: r * c}
}

// Plot builds the plot without writing it.
func Plot(pts []bearing.Point, est bearing.Estimate, p bearing.Pattern, title string, o Options) (*plot.Plot, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	if math.IsNaN(est.BearingDeg) || math.IsNaN(est.SigmaDeg) {
		return nil, fmt.Errorf("estimate has no bearing")
	}
	// Level scale: top = highest of data and fit.
	top := math.Inf(-1)
	lo := math.Inf(1)
	for _, q := range pts {
		if !math.IsNaN(q.LevelDB) && !math.IsInf(q.LevelDB, 0) {
			top = math.Max(top, q.LevelDB)
			lo = math.Min(lo, q.LevelDB)
		}
	}
	fit := make(plotter.XYs, 0, 721)
	var fitLv []float64
	for k := 0; k <= 720; k++ {
		h := float64(k) / 2
		l := est.FittedLevelDB(p, h)
		fitLv = append(fitLv, l)
		top = math.Max(top, l)
		lo = math.Min(lo, l)
	}
	if math.IsInf(top, 0) || math.IsNaN(top) {
		return nil, fmt.Errorf("no finite levels to plot")
	}
	top = math.Ceil(top/5) * 5
	rng := o.RangeDB
	if rng == 0 {
		rng = math.Min(math.Max(math.Ceil((top-lo+3)/10)*10, 10), 60)
	}
	rad := func(l float64) float64 { return math.Min(math.Max((l-(top-rng))/rng, 0), 1) }
	for k, l := range fitLv {
		fit = append(fit, xy(float64(k)/2, rad(l)))
	}

	pl := plot.New()
	pl.HideAxes()
	pl.X.Min, pl.X.Max = -1.32, 1.32
	pl.Y.Min, pl.Y.Max = -1.32, 1.32
	pl.Title.Text = title
	pl.Title.TextStyle.Font.Size = vg.Points(12)

	// Grid: level rings and 30° spokes.
	step := 10.0
	if rng <= 20 {
		step = 5
	}
	var ringLabels plotter.XYLabels
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
		ringLabels.XYs = append(ringLabels.XYs, xy(15, r))
		ringLabels.Labels = append(ringLabels.Labels, fmt.Sprintf("%.0f dB", top-l))
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
		spokeLabels.XYs = append(spokeLabels.XYs, xy(float64(a), 1.14))
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
		if math.IsNaN(q.LevelDB) || math.IsInf(q.LevelDB, 0) || math.IsNaN(q.HeadingDeg) || math.IsInf(q.HeadingDeg, 0) {
			continue
		}
		mp = append(mp, xy(q.HeadingDeg, rad(q.LevelDB)))
	}
	if len(mp) > 0 {
		sc, err := plotter.NewScatter(mp)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: colPoints, Radius: vg.Points(1.3), Shape: draw.CircleGlyph{}}
		pl.Add(sc)
		pl.Legend.Add("measured", sc)
	}

	// Fitted pattern.
	fl, err := plotter.NewLine(fit)
	if err != nil {
		return nil, err
	}
	fl.LineStyle = draw.LineStyle{Color: colFit, Width: vg.Points(1.2)}
	pl.Add(fl)
	pl.Legend.Add("fitted "+p.Name, fl)

	// Bearing and alternate.
	bl, err := plotter.NewLine(plotter.XYs{{}, xy(est.BearingDeg, 1.08)})
	if err != nil {
		return nil, err
	}
	bl.LineStyle = draw.LineStyle{Color: colBear, Width: vg.Points(2)}
	pl.Add(bl)
	pl.Legend.Add(fmt.Sprintf("bearing %.1f°", est.BearingDeg), bl)
	pl.Legend.Add(fmt.Sprintf("±1σ = ±%.2f°", sig), pg)
	if est.AltBearingDeg != nil {
		al, err := plotter.NewLine(plotter.XYs{{}, xy(*est.AltBearingDeg, 1.08)})
		if err != nil {
			return nil, err
		}
		al.LineStyle = draw.LineStyle{Color: colBear, Width: vg.Points(1.5), Dashes: []vg.Length{vg.Points(5), vg.Points(3)}}
		pl.Add(al)
		pl.Legend.Add(fmt.Sprintf("ambiguous %.1f°", *est.AltBearingDeg), al)
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
			l.TextStyle[i].Color = color.Gray{Y: 70}
		}
		pl.Add(l)
	}
	pl.Legend.Top = true
	pl.Legend.Left = true
	pl.Legend.TextStyle.Font.Size = vg.Points(9)
	return pl, nil
}
