package heading

import "math"

// wrap360 maps deg onto [0, 360). NaN and ±Inf stay NaN.
func wrap360(deg float64) float64 {
	d := math.Mod(deg, 360)
	if d < 0 {
		d += 360
	}
	if d >= 360 { // -1e-15 + 360 rounds to 360
		d = 0
	}
	return d
}

// wrap180 maps deg onto (-180, 180].
func wrap180(deg float64) float64 {
	d := wrap360(deg)
	if d > 180 {
		d -= 360
	}
	return d
}

// angleDiff returns the signed shortest turn from a to b in degrees,
// in (-180, 180]; positive is clockwise.
func angleDiff(a, b float64) float64 { return wrap180(b - a) }

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
