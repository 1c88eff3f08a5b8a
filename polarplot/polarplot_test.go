package polarplot

import (
	"bytes"
	"fmt"
	"image/png"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"nullseek/bearing"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// loopSweep renders an invented demo sweep: a small loop, transmitter at
// truthDeg, additive dB noise (demo data only; the checks below are about
// files, not numbers).
func loopSweep(p bearing.Pattern, truthDeg float64) []bearing.Point {
	rng := rand.New(rand.NewPCG(1, 2))
	pts := make([]bearing.Point, 0, 360)
	est := bearing.Estimate{BearingDeg: truthDeg, LevelDB: -40, Noise: bearing.NoiseDB}
	for h := 0.0; h < 360; h += 1.5 {
		if h > 250 && h < 290 {
			continue // a gap, as in a partial sweep
		}
		l := math.Max(est.FittedLevelDB(p, h), -62+rng.NormFloat64())
		pts = append(pts, bearing.Point{T: h / 30, HeadingDeg: h, LevelDB: l + 2.5*rng.NormFloat64()})
	}
	return pts
}

func TestWrite(t *testing.T) {
	loop, err := bearing.SmallLoop(30)
	if err != nil {
		t.Fatal(err)
	}
	yagi, err := bearing.Yagi(60, 18)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if d := os.Getenv("NULLSEEK_PLOT_DIR"); d != "" {
		dir = d // keep the images to look at them
	}
	cases := []struct {
		name string
		p    bearing.Pattern
		file string
	}{
		{"loop png", loop, "loop.png"},
		{"loop svg", loop, "loop.svg"},
		{"yagi png", yagi, "yagi.png"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			pts := loopSweep(c.p, 212)
			est, err := bearing.Fit(pts, c.p, bearing.FitOptions{Bootstrap: -1})
			if err != nil {
				t.Fatal(err)
			}
			path := filepath.Join(dir, c.file)
			title := "N0CALL/1"
			if err := Write(path, pts, est, c.p, title); err != nil {
				t.Fatal(err)
			}
			b, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			switch filepath.Ext(path) {
			case ".png":
				img, err := png.Decode(bytes.NewReader(b))
				if err != nil {
					t.Fatalf("not a PNG: %v", err)
				}
				// taller than wide: a band under the circle holds
				// the legend
				if r := img.Bounds(); r.Dx() < 300 || math.Abs(float64(r.Dy())/float64(r.Dx())-plotAspect) > 0.01 {
					t.Errorf("image %v, want ≥ 300 px wide and %.2f times as tall", r, plotAspect)
				}
			case ".svg":
				if !bytes.Contains(b, []byte("<svg")) || !bytes.Contains(b, []byte("N 0°")) {
					t.Errorf("SVG lacks <svg> or the north label")
				}
			}
		})
	}
	if err := Write(filepath.Join(dir, "x.nope"), nil, bearing.Estimate{}, loop, ""); err == nil {
		t.Error("unknown extension: no error")
	}
	if err := Write(filepath.Join(dir, "noext"), nil, bearing.Estimate{}, loop, ""); err == nil {
		t.Error("no extension: no error")
	}
}

// Layout: the ring labels' boxes meet no piece of the fitted pattern, the
// legend's box lies inside the picture with a margin and under the spoke
// labels, and title and legend print the same bearing string
// (FormatBearing), for loop and Yagi sweeps from several directions.
func TestLayout(t *testing.T) {
	loop, err := bearing.SmallLoop(30)
	if err != nil {
		t.Fatal(err)
	}
	yagi, err := bearing.Yagi(60, 18)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range []bearing.Pattern{loop, yagi} {
		for _, truth := range []float64{0, 45, 100, 212, 300} {
			pts := loopSweep(p, truth)
			est, err := bearing.Fit(pts, p, bearing.FitOptions{Bootstrap: -1})
			if err != nil {
				t.Fatal(err)
			}
			pl, lay, err := build(pts, est, p, "N0CALL/1", Options{})
			if err != nil {
				t.Fatal(err)
			}
			name := fmt.Sprintf("%s at %v°", p.Name, truth)
			for i, b := range lay.ringBoxes {
				if hitsBox(lay.fit, b) {
					t.Errorf("%s: ring label %d sits on the fitted pattern", name, i)
				}
			}
			wt, err := pl.WriterTo(16*vg.Centimeter, 16*plotAspect*vg.Centimeter, "svg")
			if err != nil {
				t.Fatal(err)
			}
			var svg bytes.Buffer
			if _, err := wt.WriteTo(&svg); err != nil {
				t.Fatal(err)
			}
			lb, all := lay.legend.box, lay.legend.all
			m := vg.Points(6)
			if lb.Min.X < all.Min.X+m || lb.Max.X > all.Max.X-m || lb.Min.Y < all.Min.Y+m || lb.Max.Y > all.Max.Y-m {
				t.Errorf("%s: legend box %v is within 6 pt of the edge of %v", name, lb, all)
			}
			_, trY := pl.Transforms(&draw.Canvas{Rectangle: all})
			if lb.Max.Y > trY(-1.12-0.05) {
				t.Errorf("%s: legend box reaches up into the spoke labels", name)
			}
			if n := strings.Count(svg.String(), FormatBearing(est.BearingDeg, est.SigmaDeg)); n != 2 {
				t.Errorf("%s: %q printed %d times, want twice (title and legend)", name, FormatBearing(est.BearingDeg, est.SigmaDeg), n)
			}
		}
	}
}
