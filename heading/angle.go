package heading

import "math"

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
