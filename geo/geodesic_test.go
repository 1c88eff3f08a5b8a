package geo

import (
	"math"
	"testing"
)

// The back azimuth is the forward azimuth at the end turned by 180°, in
// [0°, 360°) (GeographicLib's convention for azi2, common practice).
func TestBackAzimuth(t *testing.T) {
	for _, c := range []struct{ in, want float64 }{{0, 180}, {180, 0}, {-180, 0}, {-90, 90}, {90, 270}, {359.5, 179.5}, {-0.0, 180}} {
		if got := BackAzimuth(c.in); math.Abs(got-c.want) > 1e-12 || got < 0 || got >= 360 {
			t.Errorf("BackAzimuth(%v) = %v want %v", c.in, got, c.want)
		}
	}
	if !math.IsNaN(BackAzimuth(math.NaN())) || !math.IsNaN(BackAzimuth(math.Inf(1))) {
		t.Error("non-finite input should give NaN")
	}
}
