package angle

import (
	"math"
	"testing"
)

// Circular differences ("355° vs 10° is 15°", common practice).
func TestWrap(t *testing.T) {
	for _, c := range []struct{ in, w360, w180 float64 }{
		{0, 0, 0}, {360, 0, 0}, {-1e-15, 0, 0}, {720.5, 0.5, 0.5}, {-90, 270, -90},
		{180, 180, 180}, {-180, 180, 180}, {540, 180, 180}, {181, 181, -179},
	} {
		if g := Wrap360(c.in); g != c.w360 {
			t.Errorf("Wrap360(%v) = %v, want %v", c.in, g, c.w360)
		}
		if g := Wrap180(c.in); g != c.w180 {
			t.Errorf("Wrap180(%v) = %v, want %v", c.in, g, c.w180)
		}
	}
	if d := Diff(355, 10); d != 15 {
		t.Errorf("Diff(355, 10) = %v, want 15", d)
	}
	if d := Diff(10, 355); d != -15 {
		t.Errorf("Diff(10, 355) = %v, want -15", d)
	}
	if !math.IsNaN(Wrap360(math.Inf(1))) {
		t.Error("Wrap360(+Inf) is not NaN")
	}
}
