package bearing

import (
	"fmt"
	"math"
	"nullseek/internal/angle"
	"sort"
)

// LagOptions tunes EstimateLag.
type LagOptions struct {
	// Fit is passed to the per-direction fits.
	Fit FitOptions
	// MinRateDegS: readings turning slower than this (deg/s) are left out
	// (default 1 deg/s).
	MinRateDegS float64
}

// Lag sign convention (package heading's, the one the module uses): lagS
// is how late the heading log is. lagS > 0 means the log is late: the
// heading at capture time T is the log's value at T + lagS, so the level
// stamped T was produced while the antenna pointed at the logged
// heading(T + lagS). A lag found here is applied as it is, with
// heading.Track.WithLag(track.LagS + lagS) (Track.At then reads the log at
// T + LagS).
//
// Derivation: with the antenna turning at ω deg/s, heading(T + lag) ≈
// heading(T) + ω·lag, so the level at T is c + G(θ − heading(T) − ω·lag) and
// a fit against the logged headings finds θ_fit = θ − ω·lag. A clockwise
// sweep (ω_cw > 0) and a counter-clockwise one (ω_ccw < 0) shift in
// opposite directions, so
//
//	lag = (θ_ccw − θ_cw)/(ω_cw − ω_ccw)  (= (θ_ccw − θ_cw)/(2·rate) at equal rates),
//	σ_lag = √(σ_cw² + σ_ccw²)/(ω_cw − ω_ccw).

// EstimateLag fits the clockwise and counter-clockwise parts of points
// separately and returns the heading log's lag, with its 1-sigma, in
// seconds (positive: the log is late; the convention above). Each direction must
// pass Fit on its own.
func EstimateLag(points []Point, p Pattern, opts LagOptions) (lagS, sigmaS float64, err error) {
	minRate := opts.MinRateDegS
	if minRate == 0 {
		minRate = 1
	}
	if len(points) < 3 {
		return 0, 0, fmt.Errorf("estimate lag: %w: %d points", ErrTooFewPoints, len(points))
	}
	pts := append([]Point(nil), points...)
	sort.SliceStable(pts, func(i, j int) bool { return pts[i].T < pts[j].T })
	var cw, ccw []Point
	var rcw, rccw float64
	for i := range pts {
		a, b := max(i-1, 0), min(i+1, len(pts)-1)
		dt := pts[b].T - pts[a].T
		if !(dt > 0) {
			continue
		}
		rate := angle.Wrap180(pts[b].HeadingDeg-pts[a].HeadingDeg) / dt
		switch {
		case rate >= minRate:
			cw = append(cw, pts[i])
			rcw += rate
		case rate <= -minRate:
			ccw = append(ccw, pts[i])
			rccw += rate
		}
	}
	if len(cw) == 0 || len(ccw) == 0 {
		return 0, 0, fmt.Errorf("estimate lag: %w: need sweeps in both directions (%d clockwise, %d counter-clockwise readings)", ErrBadInput, len(cw), len(ccw))
	}
	ecw, err := Fit(cw, p, opts.Fit)
	if err != nil {
		return 0, 0, fmt.Errorf("estimate lag: clockwise sweeps: %w", err)
	}
	eccw, err := Fit(ccw, p, opts.Fit)
	if err != nil {
		return 0, 0, fmt.Errorf("estimate lag: counter-clockwise sweeps: %w", err)
	}
	wcw, wccw := rcw/float64(len(cw)), rccw/float64(len(ccw))
	period := 360 / float64(p.Symmetry)
	d := math.Mod(angle.Wrap180(eccw.BearingDeg-ecw.BearingDeg)+period/2+4*360, period) - period/2
	den := wcw - wccw
	lagS = d / den
	sigmaS = math.Hypot(ecw.SigmaDeg, eccw.SigmaDeg) / den
	return lagS, sigmaS, nil
}
