package bearing

import (
	"fmt"
	"math"
)

// MinLagTurnDeg is how far the antenna must turn each way, in degrees
// summed over the sweeps of that direction, before EstimateLag is tried: a
// lag shifts clockwise and anticlockwise sweeps apart, so each direction
// must sweep the pattern's feature on its own, and one way only the lag
// cannot be told from the bearing itself (see the derivation above
// EstimateLag).
const MinLagTurnDeg = 90.0

// CheckLagTurns reports whether sweeps that turned turnsDeg (signed,
// positive clockwise, as heading.Sweep.TurnDeg) can support EstimateLag:
// at least MinLagTurnDeg each way. It wraps ErrBadInput.
func CheckLagTurns(turnsDeg ...float64) error {
	var cw, ccw float64
	for _, d := range turnsDeg {
		switch {
		case math.IsNaN(d) || math.IsInf(d, 0):
			return fmt.Errorf("%w: sweep turn %v° is not a finite angle", ErrBadInput, d)
		case d > 0:
			cw += d
		default:
			ccw -= d
		}
	}
	if cw < MinLagTurnDeg || ccw < MinLagTurnDeg {
		return fmt.Errorf("%w: the lag needs sweeps of at least %.0f° each way; the heading source turned %.0f° clockwise and %.0f° anticlockwise", ErrBadInput, MinLagTurnDeg, cw, ccw)
	}
	return nil
}
