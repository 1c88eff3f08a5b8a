package bearing

import (
	"errors"
	"math"
	"math/rand/v2"
	"nullseek/internal/angle"
	"testing"
)

func ptr(v float64) *float64 { return &v }

func TestCombine(t *testing.T) {
	cases := []struct {
		name      string
		ests      []Estimate
		wantDeg   float64
		wantSigma float64 // 0 = skip
		used      int
		excluded  []int
		alt       bool
	}{
		// Inverse-variance weighting (common practice): 10±1 and 11.25±2 →
		// (10·1 + 11.25·¼)/(1 + ¼) = 10.25, σ = 1/√1.25 = 0.894 (χ² = 0.3125 < 1 dof: not widened).
		{"weighted", []Estimate{{BearingDeg: 10, SigmaDeg: 1}, {BearingDeg: 11.25, SigmaDeg: 2}}, 10.25, 1 / math.Sqrt(1.25), 2, nil, false},
		// Same but 10±1 and 12.5±2: χ² = 1.25 > 1 → σ widened by √1.25 to exactly 1 (Birge ratio).
		{"widened", []Estimate{{BearingDeg: 10, SigmaDeg: 1}, {BearingDeg: 12.5, SigmaDeg: 2}}, 10.5, 1, 2, nil, false},
		// Across north: 355 and 5 at equal sigma → 0.
		{"wrap", []Estimate{{BearingDeg: 355, SigmaDeg: 3}, {BearingDeg: 5, SigmaDeg: 3}}, 0, 0, 2, nil, false},
		// One burst 20σ off is excluded.
		{"outlier", []Estimate{{BearingDeg: 100, SigmaDeg: 1}, {BearingDeg: 101, SigmaDeg: 1}, {BearingDeg: 99.5, SigmaDeg: 1}, {BearingDeg: 130, SigmaDeg: 1.5}}, 100.1667, 1 / math.Sqrt(3), 3, []int{3}, false},
		// A loop's ambiguous bearing is resolved by an unambiguous one.
		{"resolve", []Estimate{{BearingDeg: 200, SigmaDeg: 2}, {BearingDeg: 21, SigmaDeg: 2, AltBearingDeg: ptr(201)}}, 200.5, 0, 2, nil, false},
		// All ambiguous: doubled-angle mean stays ambiguous.
		{"allamb", []Estimate{{BearingDeg: 10, SigmaDeg: 2, AltBearingDeg: ptr(190)}, {BearingDeg: 192, SigmaDeg: 2, AltBearingDeg: ptr(12)}}, 11, 0, 2, nil, true},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, err := Combine(c.ests, CombineOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(angle.Wrap180(got.BearingDeg-c.wantDeg)) > 1e-3 {
				t.Errorf("bearing %.4f, want %.4f", got.BearingDeg, c.wantDeg)
			}
			if c.wantSigma > 0 && math.Abs(got.SigmaDeg-c.wantSigma) > 1e-3 {
				t.Errorf("sigma %.4f, want %.4f", got.SigmaDeg, c.wantSigma)
			}
			if got.BurstsUsed != c.used || len(got.Excluded) != len(c.excluded) {
				t.Fatalf("used %d excluded %+v", got.BurstsUsed, got.Excluded)
			}
			for i, e := range got.Excluded {
				if e.Index != c.excluded[i] || e.Reason == "" {
					t.Errorf("excluded %+v, want index %d with a reason", e, c.excluded[i])
				}
			}
			if (got.AltBearingDeg != nil) != c.alt {
				t.Errorf("alt %v", got.AltBearingDeg)
			}
		})
	}
	if _, err := Combine(nil, CombineOptions{}); !errors.Is(err, ErrBadInput) {
		t.Errorf("empty: %v", err)
	}
	if _, err := Combine([]Estimate{{BearingDeg: 1, SigmaDeg: 0}}, CombineOptions{}); !errors.Is(err, ErrBadInput) {
		t.Errorf("zero sigma: %v", err)
	}
}

// TestCombineChiSquareSize: with consistent Gaussian bursts the consistency
// test excludes something in about alpha of the sets (chi-square test size,
// common practice) and the combined 95% interval holds the truth ~95%.
func TestCombineChiSquareSize(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	const sets = 2000
	var excl, in95 int
	for s := 0; s < sets; s++ {
		truth := rng.Float64() * 360
		ests := make([]Estimate, 5)
		for i := range ests {
			sg := 1 + 3*rng.Float64()
			ests[i] = Estimate{BearingDeg: angle.Wrap360(truth + sg*rng.NormFloat64()), SigmaDeg: sg}
		}
		c, err := Combine(ests, CombineOptions{Alpha: 0.05})
		if err != nil {
			t.Fatal(err)
		}
		if len(c.Excluded) > 0 {
			excl++
		}
		if math.Abs(angle.Wrap180(c.BearingDeg-truth)) <= 1.96*c.SigmaDeg {
			in95++
		}
	}
	fe, fc := float64(excl)/sets, float64(in95)/sets
	t.Logf("excluded in %.1f%% of sets, 95%% interval held %.1f%%", 100*fe, 100*fc)
	if fe < 0.03 || fe > 0.07 {
		t.Errorf("exclusion rate %.3f, want ≈0.05", fe)
	}
	if fc < 0.93 || fc > 0.98 {
		t.Errorf("coverage %.3f, want ≈0.95", fc)
	}
}
