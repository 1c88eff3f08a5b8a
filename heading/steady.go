package heading

import (
	"fmt"
	"math"
	"nullseek/internal/angle"
)

// SteadyTurn models an antenna turning at a constant rate, for a turntable
// or a hand turn timed with a metronome when no sensor is available.
type SteadyTurn struct {
	// StartDeg is the heading, in degrees, at time StartS.
	StartDeg float64
	// RateDegPerS is the turning rate in degrees per second; positive is
	// clockwise, negative counter-clockwise.
	RateDegPerS float64
	// StartS is the capture time, in seconds, at which the heading is
	// StartDeg.
	StartS float64
	// Ref is the north StartDeg is measured from (True when zero).
	Ref Ref
}

// maxSteadySamples bounds the size of a generated track.
const maxSteadySamples = 10_000_000

// HeadingAt returns the model heading in [0, 360) at capture time tS
// seconds (defined for all times, before StartS too).
func (s SteadyTurn) HeadingAt(tS float64) float64 {
	return angle.Wrap360(s.StartDeg + s.RateDegPerS*(tS-s.StartS))
}

// Track samples the turn at sampleHz from fromS to toS seconds inclusive
// (the last sample is at toS even when the span is not a whole number of
// sample periods). It fails for a non-finite parameter, toS <= fromS, a
// non-positive sample rate, a turn of 180° or more between samples (the
// direction would be ambiguous), or more than 10 million samples.
func (s SteadyTurn) Track(fromS, toS, sampleHz float64) (*Track, error) {
	for _, v := range []float64{s.StartDeg, s.RateDegPerS, s.StartS, fromS, toS, sampleHz} {
		if !finite(v) {
			return nil, fmt.Errorf("steady turn: parameter %v is not finite", v)
		}
	}
	if s.Ref != True && s.Ref != Magnetic {
		return nil, fmt.Errorf("steady turn: unknown reference %d", int(s.Ref))
	}
	if !(toS > fromS) {
		return nil, fmt.Errorf("steady turn: span %.3f..%.3f s is empty", fromS, toS)
	}
	if !(sampleHz > 0) {
		return nil, fmt.Errorf("steady turn: sample rate %v Hz must be positive", sampleHz)
	}
	if math.Abs(s.RateDegPerS)/sampleHz >= 180 {
		return nil, fmt.Errorf("steady turn: %.1f °/s at %.3f Hz turns 180° or more between samples; raise the sample rate", s.RateDegPerS, sampleHz)
	}
	nf := math.Floor((toS-fromS)*sampleHz + 1e-9)
	if nf+2 > maxSteadySamples {
		return nil, fmt.Errorf("steady turn: %.0f samples is too many (limit %d)", nf+2, maxSteadySamples)
	}
	n := int(nf)
	samples := make([]Sample, 0, n+2)
	for k := 0; k <= n; k++ {
		ts := fromS + float64(k)/sampleHz
		samples = append(samples, Sample{T: ts, Deg: s.HeadingAt(ts)})
	}
	if last := samples[len(samples)-1].T; toS-last > 1e-9/sampleHz {
		samples = append(samples, Sample{T: toS, Deg: s.HeadingAt(toS)})
	}
	return &Track{Ref: s.Ref, Samples: samples}, nil
}
