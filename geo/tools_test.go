package geo

import (
	"math"
	"nullseek/internal/angle"
)

// angErr is |a − b| in degrees round the circle (internal/angle).
func angErr(a, b float64) float64 { return math.Abs(angle.Diff(a, b)) }
