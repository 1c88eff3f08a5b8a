package capture

import (
	"fmt"
	"strconv"
	"strings"
	"time"
)

// SweepPlan says how the rotator turns during a capture. Azimuths are
// rotctld's (not normalised: a rotator with overlap accepts −180…450 and
// takes its own way between the two numbers).
type SweepPlan struct {
	// FromDeg and ToDeg are the start and end azimuths, degrees.
	FromDeg, ToDeg float64
	// StepDeg is 0 for a continuous sweep (heading.Rotator.ContinuousSweep);
	// otherwise the step of a stepped sweep (heading.Rotator.StepSweep),
	// signed towards ToDeg.
	StepDeg float64
	// Dwell is how long a stepped sweep waits at each step (0–MaxDwell).
	Dwell time.Duration
}

// MaxDwell is the longest wait at each step of a stepped sweep.
const MaxDwell = time.Hour

// Check reports a plan that cannot be run.
func (p SweepPlan) Check() error {
	for _, v := range []float64{p.FromDeg, p.ToDeg, p.StepDeg} {
		if !finite(v) {
			return fmt.Errorf("sweep: angles must be finite numbers of degrees")
		}
	}
	if p.FromDeg == p.ToDeg {
		return fmt.Errorf("sweep from %.1f° to %.1f° does not turn", p.FromDeg, p.ToDeg)
	}
	if p.StepDeg != 0 && (p.ToDeg-p.FromDeg)*p.StepDeg < 0 {
		return fmt.Errorf("sweep step %.2f° does not lead from %.1f° to %.1f°", p.StepDeg, p.FromDeg, p.ToDeg)
	}
	if p.Dwell < 0 || p.Dwell > MaxDwell {
		return fmt.Errorf("sweep dwell %v is outside 0–%v", p.Dwell, MaxDwell)
	}
	return nil
}

// String describes the plan for messages.
func (p SweepPlan) String() string {
	if p.StepDeg == 0 {
		return fmt.Sprintf("%.1f° → %.1f°", p.FromDeg, p.ToDeg)
	}
	return fmt.Sprintf("%.1f° → %.1f° in %.1f° steps, %v each", p.FromDeg, p.ToDeg, p.StepDeg, p.Dwell)
}

// ParseSweep reads --sweep FROM:TO (a continuous sweep) or --step
// FROM:STEP:TO:DWELL (degrees; the dwell in seconds, 0–3600). With both
// empty there is no plan (nil, nil); with both given, an error.
func ParseSweep(sweep, step string) (*SweepPlan, error) {
	nums := func(flag, s string, n int) ([]float64, error) {
		parts := strings.Split(s, ":")
		if len(parts) != n {
			return nil, fmt.Errorf("%s %q: want %d numbers separated by ':'", flag, s, n)
		}
		v := make([]float64, n)
		for i, q := range parts {
			x, err := strconv.ParseFloat(strings.TrimSpace(q), 64)
			if err != nil || !finite(x) {
				return nil, fmt.Errorf("%s %q: %q is not a number", flag, s, q)
			}
			v[i] = x
		}
		return v, nil
	}
	var p SweepPlan
	switch {
	case sweep != "" && step != "":
		return nil, fmt.Errorf("give --sweep FROM:TO or --step FROM:STEP:TO:DWELL, not both")
	case sweep != "":
		v, err := nums("--sweep", sweep, 2)
		if err != nil {
			return nil, err
		}
		p.FromDeg, p.ToDeg = v[0], v[1]
	case step != "":
		v, err := nums("--step", step, 4)
		if err != nil {
			return nil, err
		}
		if v[1] == 0 || v[3] < 0 || v[3] > MaxDwell.Seconds() {
			return nil, fmt.Errorf("--step %q: want a non-zero step and a dwell of 0–%.0f s", step, MaxDwell.Seconds())
		}
		p.FromDeg, p.StepDeg, p.ToDeg, p.Dwell = v[0], v[1], v[2], time.Duration(v[3]*float64(time.Second))
	default:
		return nil, nil
	}
	if err := p.Check(); err != nil {
		return nil, fmt.Errorf("--sweep/--step: %w", err)
	}
	return &p, nil
}
