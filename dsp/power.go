package dsp

import (
	"math"
	"slices"
)

// DBFS converts a linear power p (mean |x|², full scale = a complex
// sinusoid of amplitude 1 = power 1) to dB relative to full scale:
// 10·log10(p). p ≤ 0 (and anything below −200 dBFS) gives −200.
func DBFS(p float64) float64 {
	if !(p > 1e-20) {
		return -200
	}
	return 10 * math.Log10(p)
}

// median returns the median of v (v is reordered).
func median(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	slices.Sort(v)
	n := len(v)
	if n%2 == 1 {
		return v[n/2]
	}
	return (v[n/2-1] + v[n/2]) / 2
}
