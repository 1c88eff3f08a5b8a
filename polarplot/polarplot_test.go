package polarplot

import (
	"bytes"
	"image/png"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"nullseek/bearing"
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
