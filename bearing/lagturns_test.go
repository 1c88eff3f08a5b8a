package bearing

import (
	"errors"
	"math"
	"testing"
)

func TestCheckLagTurns(t *testing.T) {
	cases := []struct {
		turns []float64
		ok    bool
	}{
		{[]float64{180, -180}, true},
		{[]float64{45, 45, -90}, true}, // each direction summed over its sweeps
		{[]float64{360}, false},        // one way only
		{[]float64{89, -360}, false},
		{nil, false},
		{[]float64{180, math.NaN(), -180}, false},
	}
	for _, c := range cases {
		err := CheckLagTurns(c.turns...)
		if (err == nil) != c.ok || (err != nil && !errors.Is(err, ErrBadInput)) {
			t.Errorf("CheckLagTurns(%v) = %v, want ok=%v", c.turns, err, c.ok)
		}
	}
}
