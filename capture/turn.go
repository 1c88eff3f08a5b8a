package capture

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"nullseek/heading"
)

// TurnSampleHz is how densely a steady turn is sampled into a heading
// track (and its heading log): at 20 Hz a 60 °/s hand turn moves 3°
// between samples, which the track interpolates exactly (the model is
// linear).
const TurnSampleHz = 20.0

// maxTurnRateDegS is the fastest steady turn TurnSampleHz can represent:
// a track must turn less than 180° between samples (heading.Track).
const maxTurnRateDegS = 180 * TurnSampleHz

// ParseTurn reads --turn START:RATE[:T0]: the heading START degrees at T0
// seconds from the capture start (default 0), turning at RATE °/s
// (positive clockwise, negative anticlockwise; non-zero, below 3600 °/s in
// magnitude). ref is the north START is measured from. This is the one
// parser of the grammar, for live captures and recordings alike.
func ParseTurn(s string, ref heading.Ref) (heading.SteadyTurn, error) {
	var st heading.SteadyTurn
	parts := strings.Split(s, ":")
	vals := make([]float64, len(parts))
	for i, p := range parts {
		v, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
		if err != nil || !finite(v) {
			return st, fmt.Errorf("--turn %q: want START:RATE[:T0] in degrees, °/s and seconds", s)
		}
		vals[i] = v
	}
	if len(vals) < 2 || len(vals) > 3 || vals[1] == 0 {
		return st, fmt.Errorf("--turn %q: want START:RATE[:T0] with a non-zero rate", s)
	}
	st.StartDeg, st.RateDegPerS, st.Ref = vals[0], vals[1], ref
	if len(vals) == 3 {
		st.StartS = vals[2]
	}
	return st, checkTurn(st)
}

// checkTurn bounds a steady turn's numbers.
func checkTurn(st heading.SteadyTurn) error {
	switch {
	case !finite(st.StartDeg) || !finite(st.StartS) || !finite(st.RateDegPerS):
		return fmt.Errorf("--turn: the start, rate and time must be finite numbers")
	case st.RateDegPerS == 0 || math.Abs(st.RateDegPerS) >= maxTurnRateDegS:
		return fmt.Errorf("--turn: rate %v °/s: want a non-zero rate below %.0f °/s", st.RateDegPerS, maxTurnRateDegS)
	case math.Abs(st.StartS) > MaxDurationS:
		return fmt.Errorf("--turn: time %v s: want within ±%.0f s of the capture start", st.StartS, MaxDurationS)
	case st.Ref != heading.True && st.Ref != heading.Magnetic:
		return fmt.Errorf("--turn: unknown reference %d", int(st.Ref))
	}
	return nil
}

// TurnTrack samples st at TurnSampleHz over a capture of durS seconds
// (from 0 to durS inclusive).
func TurnTrack(st heading.SteadyTurn, durS float64) (*heading.Track, error) {
	tr, err := st.Track(0, durS, TurnSampleHz)
	if err != nil {
		return nil, fmt.Errorf("--turn: %w", err)
	}
	return tr, nil
}
