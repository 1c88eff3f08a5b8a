package bearing

import (
	"math"
	"nullseek/internal/angle"
	"testing"
)

// TestShape checks the headline numbers against the patterns' defining
// formulas: the Yagi's Gaussian lobe −12(δ/θ₃)² dB is −3 dB at ±θ₃/2 and
// its back lobe is set to exactly −F/B (common practice);
// the small loop's and the body shield's nulls are set to exactly the
// depth asked for (FCC pool G9D10 figure eight with a filled null).
func TestShape(t *testing.T) {
	cases := []struct {
		name                 string
		p                    Pattern
		width, depth, fb     float64
		widthTol, depthCheck float64
	}{
		{"yagi 60/18", mustPattern(Yagi(60, 18)), 60, 0, 18, 0.5, 0},
		{"yagi 44/12", mustPattern(Yagi(44, 12)), 44, 0, 12, 0.5, 0},
		{"loop 25", mustPattern(SmallLoop(25)), -1, 25, 0, 0, 1},
		{"body 12", mustPattern(BodyShield(12)), -1, 12, 0, 0, 1},
	}
	for _, c := range cases {
		s := Shape(c.p)
		if c.width > 0 && math.Abs(s.WidthDeg-c.width) > c.widthTol {
			t.Errorf("%s: width %.2f°, want %.1f°", c.name, s.WidthDeg, c.width)
		}
		if c.fb > 0 && math.Abs(s.FrontBackDB-c.fb) > 0.01 {
			t.Errorf("%s: front-to-back %.3f dB, want %.1f dB", c.name, s.FrontBackDB, c.fb)
		}
		if c.depthCheck > 0 && math.Abs(s.NullDepthDB-c.depth) > 0.01 {
			t.Errorf("%s: null depth %.3f dB, want %.1f dB", c.name, s.NullDepthDB, c.depth)
		}
		if c.p.Mode == Null && s.FrontBackDB != 0 {
			t.Errorf("%s: a null pattern has no front-to-back, got %.2f", c.name, s.FrontBackDB)
		}
	}
}

// TestRotateAndCentre: a pattern turned by a known angle is found centred
// there, for peak and null patterns, with the shape kept.
func TestRotateAndCentre(t *testing.T) {
	pats := []Pattern{
		mustPattern(Yagi(50, 15)),
		mustPattern(SmallLoop(25)),
		mustPattern(BodyShield(12)),
	}
	for _, p := range pats {
		for _, by := range []float64{0, 7.5, -12.25, 33.3} {
			q, err := Rotate(p, by)
			if err != nil {
				t.Fatalf("%s by %g: %v", p.Name, by, err)
			}
			f0 := p.FeatureDeg()
			c, err := FeatureCentre(q, f0)
			if err != nil {
				t.Fatalf("%s by %g: %v", p.Name, by, err)
			}
			c = angle.Wrap180(c - f0)
			want := -by
			if p.Symmetry == 2 {
				want = math.Mod(want+90+360, 180) - 90
			}
			if math.Abs(c-want) > 0.05 {
				t.Errorf("%s turned by %g°: centre %.3f°, want %.3f°", p.Name, by, c, want)
			}
			if a, b := Shape(p), Shape(q); math.Abs(a.WidthDeg-b.WidthDeg) > 0.3 || math.Abs(a.FrontBackDB-b.FrontBackDB) > 0.3 {
				t.Errorf("%s turned by %g°: shape %+v became %+v", p.Name, by, a, b)
			}
		}
	}
}
