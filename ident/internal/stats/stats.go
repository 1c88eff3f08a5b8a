// Package stats holds the small order statistics the ident packages share.
package stats

import (
	"math"
	"slices"
)

// Median returns the median of x: the middle value, or the mean of the two
// middle values for an even count; NaN for an empty slice. x is not
// modified.
func Median(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	s := slices.Clone(x)
	slices.Sort(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}
