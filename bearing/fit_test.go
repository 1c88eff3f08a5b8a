package bearing

import (
	"errors"
	"math"
	"math/rand/v2"
	"nullseek/internal/angle"
	"strings"
	"testing"
)

// mustPattern unwraps a constructor in test set-up; constructor errors with
// the constant arguments used here are programming errors.
func mustPattern(p Pattern, err error) Pattern {
	if err != nil {
		panic(err)
	}
	return p
}

// thermalSweep renders one sweep under the thermal model (noise floor 0 dB).
func thermalSweep(seed uint64, p Pattern, truth, snrDB, startDeg, stepDeg float64, n int) []Point {
	rng := rand.New(rand.NewPCG(seed, 1))
	h, tt := sweep(startDeg, stepDeg, n, 30)
	return simThermal(rng, p, truth, snrDB, 32, h, tt)
}

func TestFitRefuses(t *testing.T) {
	loop := mustPattern(SmallLoop(30))
	yagi := mustPattern(Yagi(40, 20))
	floor := 0.0
	noise := func(n int) []Point {
		rng := rand.New(rand.NewPCG(5, 5))
		pts := make([]Point, n)
		for i := range pts {
			pts[i] = Point{T: float64(i), HeadingDeg: float64(i), LevelDB: -50 + rng.NormFloat64()}
		}
		return pts
	}
	nan := thermalSweep(1, loop, 100, 20, 0, 2, 180)
	nan[7].LevelDB = math.NaN()
	cases := []struct {
		name string
		pts  []Point
		p    Pattern
		opts FitOptions
		want error
	}{
		{"few", thermalSweep(1, loop, 100, 20, 0, 30, 12), loop, FitOptions{NoiseFloorDB: &floor}, ErrTooFewPoints},
		{"coverage60", thermalSweep(1, loop, 100, 20, 70, 0.5, 120), loop, FitOptions{NoiseFloorDB: &floor}, ErrCoverage},
		{"noiseonly", noise(360), loop, FitOptions{}, ErrNoVariation},
		{"signal-at-noise", thermalSweep(2, yagi, 100, -25, 0, 1, 360), yagi, FitOptions{NoiseFloorDB: &floor}, ErrNoVariation},
		// Yagi pointed at 0°, sweep only round the back (120°..240°).
		{"nooverlap", thermalSweep(3, yagi, 0, 30, 120, 0.5, 241), yagi, FitOptions{NoiseFloorDB: &floor}, ErrNoOverlap},
		{"nan", nan, loop, FitOptions{NoiseFloorDB: &floor}, ErrBadInput},
		{"thermal-no-floor", nan, loop, FitOptions{Noise: NoiseThermal}, ErrBadInput},
		{"badpattern", noise(360), Pattern{Name: "x"}, FitOptions{}, ErrBadInput},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			c.opts.Bootstrap = -1
			est, err := Fit(c.pts, c.p, c.opts)
			if !errors.Is(err, c.want) {
				t.Fatalf("got %v (estimate %.1f°), want %v", err, est.BearingDeg, c.want)
			}
		})
	}
}

func TestFitWarnings(t *testing.T) {
	loop := mustPattern(SmallLoop(30))
	yagi := mustPattern(Yagi(40, 20))
	body := mustPattern(BodyShield(12))
	floor := 0.0
	clip := thermalSweep(4, yagi, 200, 25, 0, 1, 360)
	for i := range clip {
		if clip[i].LevelDB > 24.5 {
			clip[i].Clipped = true
		}
	}
	trend := thermalSweep(5, body, 50, 25, 0, 1, 360)
	for i := range trend {
		trend[i].LevelDB += 0.3 * trend[i].T // 3.6 dB over the 12 s turn
	}
	// A second, unexplained null 90° away from the true one (reflection).
	multi := thermalSweep(6, body, 50, 25, 0, 1, 360)
	for i := range multi {
		// body null is at heading θ−180 = 230°; put a notch at 320°
		d := angle.Wrap180(multi[i].HeadingDeg - 320)
		multi[i].LevelDB -= 10 * math.Exp(-d*d/(2*6*6))
	}
	cases := []struct {
		name string
		pts  []Point
		p    Pattern
		want string // substring of a warning; "" = no warnings at all
	}{
		{"clean", thermalSweep(7, loop, 123, 25, 0, 1, 360), loop, ""},
		{"partial", thermalSweep(8, loop, 123, 25, 40, 1, 200), loop, "partial sweep"},
		{"mainlobe", thermalSweep(9, yagi, 10, 25, 0, 1, 340), yagi, "main lobe"},
		{"clipping", clip, yagi, "clipping"},
		{"trend", trend, body, "level trend"},
		{"multipath", multi, body, "multipath"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			est, err := Fit(c.pts, c.p, FitOptions{NoiseFloorDB: &floor})
			if err != nil {
				t.Fatal(err)
			}
			all := strings.Join(est.Warnings, "; ")
			if c.want == "" && len(est.Warnings) > 0 {
				t.Errorf("unexpected warnings: %s", all)
			}
			if c.want != "" && !strings.Contains(all, c.want) {
				t.Errorf("warnings %q lack %q", all, c.want)
			}
		})
	}
}

func TestFitAmbiguityAndModes(t *testing.T) {
	floor := 0.0
	cases := []struct {
		name  string
		p     Pattern
		truth float64
		alt   bool
	}{
		{"loop", mustPattern(SmallLoop(30)), 237, true},
		{"yagi", mustPattern(Yagi(60, 18)), 237, false},
		{"body", mustPattern(BodyShield(12)), 237, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			est, err := Fit(thermalSweep(11, c.p, c.truth, 25, 17, 1, 360), c.p, FitOptions{NoiseFloorDB: &floor})
			if err != nil {
				t.Fatal(err)
			}
			e := circErr(est.BearingDeg, c.truth, c.p.Symmetry)
			if math.Abs(e) > 4*est.SigmaDeg {
				t.Errorf("bearing %.2f ± %.2f, truth %.0f", est.BearingDeg, est.SigmaDeg, c.truth)
			}
			if (est.AltBearingDeg != nil) != c.alt {
				t.Errorf("alt %v, want ambiguous=%v", est.AltBearingDeg, c.alt)
			}
			if c.alt && math.Abs(angle.Wrap180(*est.AltBearingDeg-est.BearingDeg)) != 180 {
				t.Errorf("alt %.2f not 180° from %.2f", *est.AltBearingDeg, est.BearingDeg)
			}
			if est.Mode != c.p.Mode || est.Noise != NoiseThermal || est.Points != 360 {
				t.Errorf("mode %v noise %v points %d", est.Mode, est.Noise, est.Points)
			}
			if math.Abs(est.CoverageDeg-360) > 1e-9 {
				t.Errorf("coverage %.1f", est.CoverageDeg)
			}
		})
	}
}

// TestBootstrapMatchesSpread: the residual bootstrap's sigma agrees with the
// Monte-Carlo spread of the estimates (within 0.7–1.4×), at one grid point.
func TestBootstrapMatchesSpread(t *testing.T) {
	p := mustPattern(Yagi(60, 18))
	floor := 0.0
	trials := 60
	if testing.Short() {
		trials = 25
	}
	var se, sb, sf float64
	for j := 0; j < trials; j++ {
		truth := float64(j) * 6.1
		est, err := Fit(thermalSweep(uint64(100+j), p, truth, 10, 3, 2, 180), p, FitOptions{NoiseFloorDB: &floor, Bootstrap: 100, Seed: uint64(j)})
		if err != nil {
			t.Fatal(err)
		}
		e := circErr(est.BearingDeg, truth, 1)
		se += e * e
		sb += est.BootstrapSigmaDeg * est.BootstrapSigmaDeg
		sf += est.FisherSigmaDeg * est.FisherSigmaDeg
	}
	rms, boot, fish := math.Sqrt(se/float64(trials)), math.Sqrt(sb/float64(trials)), math.Sqrt(sf/float64(trials))
	t.Logf("RMS %.3f° bootstrap %.3f° Fisher %.3f°", rms, boot, fish)
	if boot/rms < 0.7 || boot/rms > 1.4 || boot/fish < 0.8 || boot/fish > 1.25 {
		t.Errorf("bootstrap %.3f°, Fisher %.3f°, Monte-Carlo RMS %.3f° disagree", boot, fish, rms)
	}
}

// TestFitBinWidths: the bearing stays within 4σ of the truth for bin widths
// from 0.5° to 5°, and an out-of-range width is refused.
func TestFitBinWidths(t *testing.T) {
	p := mustPattern(SmallLoop(30))
	floor := 0.0
	pts := thermalSweep(21, p, 61.3, 20, 0, 0.5, 720)
	for _, bw := range []float64{0.5, 1, 2, 5} {
		est, err := Fit(pts, p, FitOptions{NoiseFloorDB: &floor, BinDeg: bw, Bootstrap: -1})
		if err != nil {
			t.Fatal(err)
		}
		if e := circErr(est.BearingDeg, 61.3, 2); math.Abs(e) > 4*est.SigmaDeg {
			t.Errorf("bin %.1f°: bearing %.3f ± %.3f, truth 61.3", bw, est.BearingDeg, est.SigmaDeg)
		}
	}
	if _, err := Fit(pts, p, FitOptions{BinDeg: 30}); !errors.Is(err, ErrBadInput) {
		t.Errorf("bin 30°: %v", err)
	}
}

func FuzzFit(f *testing.F) {
	f.Add(10.0, 2.0, 300.0, 5.0, uint64(1))
	f.Add(0.0, 0.0, 0.0, 0.0, uint64(2))
	f.Add(math.Inf(1), -1.0, 1e9, 1e-9, uint64(3))
	p, _ := SmallLoop(30)
	f.Fuzz(func(t *testing.T, level, noise, span, step float64, seed uint64) {
		rng := rand.New(rand.NewPCG(seed, 3))
		n := 40 + int(seed%200)
		pts := make([]Point, n)
		for i := range pts {
			pts[i] = Point{T: float64(i), HeadingDeg: float64(i) * step * span / 360, LevelDB: level + noise*rng.NormFloat64()}
		}
		est, err := Fit(pts, p, FitOptions{Bootstrap: 5})
		if err == nil && (math.IsNaN(est.BearingDeg) || est.BearingDeg < 0 || est.BearingDeg >= 360 || !(est.SigmaDeg >= 0)) {
			t.Fatalf("bad estimate %+v", est)
		}
	})
}
