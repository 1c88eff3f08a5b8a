// Package angle wraps angles in degrees onto the circle. Every package
// that handles bearings and headings uses it, so the edge rules (what 360°
// and −180° become) are the same everywhere.
package angle

import "math"

// Wrap360 maps deg onto [0, 360). NaN and ±Inf give NaN.
func Wrap360(deg float64) float64 {
	d := math.Mod(deg, 360)
	if d < 0 {
		d += 360
	}
	if d >= 360 { // −1e-15 + 360 rounds to 360
		d = 0
	}
	return d
}

// Wrap180 maps deg onto (−180, 180].
func Wrap180(deg float64) float64 {
	d := Wrap360(deg)
	if d > 180 {
		d -= 360
	}
	return d
}

// Diff is the signed shortest turn from a to b in degrees, in (−180, 180];
// positive is clockwise.
func Diff(a, b float64) float64 { return Wrap180(b - a) }
