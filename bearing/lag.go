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

// Lag sign convention used by EstimateLag and ShiftLag: lagS > 0 means the
// level readings are late with respect to the headings — the level stamped
// T was produced while the antenna pointed at heading(T − lagS). (A heading
// sensor that reports late gives a negative lag. heading.Track.LagS has the
// opposite sign — positive means the compass is late — so a lag found here is
// removed with track.WithLag(−lagS), or with ShiftLag.)
//
// Derivation: with the antenna turning at ω deg/s, heading(T − lag) ≈
// heading(T) − ω·lag, so the level at T is c + G(θ − heading(T) + ω·lag) and a
// fit against the stamped headings finds θ_fit = θ + ω·lag. A clockwise sweep
// (ω_cw > 0) and a counter-clockwise one (ω_ccw < 0) shift in opposite
// directions, so
//
//	lag = (θ_cw − θ_ccw)/(ω_cw − ω_ccw)  (= (θ_cw − θ_ccw)/(2·rate) at equal rates),
//	σ_lag = √(σ_cw² + σ_ccw²)/(ω_cw − ω_ccw).

// EstimateLag fits the clockwise and counter-clockwise parts of points
// separately and returns the lag between level and heading, with its
// 1-sigma, in seconds (see the sign convention above). Each direction must
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
	d := math.Mod(angle.Wrap180(ecw.BearingDeg-eccw.BearingDeg)+period/2+4*360, period) - period/2
	den := wcw - wccw
	lagS = d / den
	sigmaS = math.Hypot(ecw.SigmaDeg, eccw.SigmaDeg) / den
	return lagS, sigmaS, nil
}

// ShiftLag returns a copy of points with each heading replaced by the
// heading the points themselves give at T − lagS (linear interpolation on
// the unwrapped heading sequence in time order, clamped at the ends), i.e.
// it removes a lag measured by EstimateLag. The order of points is kept.
func ShiftLag(points []Point, lagS float64) []Point {
	n := len(points)
	out := append([]Point(nil), points...)
	if n < 2 || lagS == 0 {
		return out
	}
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return points[idx[a]].T < points[idx[b]].T })
	ts := make([]float64, n)
	hs := make([]float64, n)
	for k, i := range idx {
		ts[k] = points[i].T
		hs[k] = points[i].HeadingDeg
		if k > 0 {
			hs[k] = hs[k-1] + angle.Wrap180(points[i].HeadingDeg-hs[k-1])
		}
	}
	for i := range out {
		t := points[i].T - lagS
		j := sort.SearchFloat64s(ts, t)
		var h float64
		switch {
		case j <= 0:
			h = hs[0]
		case j >= n:
			h = hs[n-1]
		default:
			f := 0.0
			if ts[j] > ts[j-1] {
				f = (t - ts[j-1]) / (ts[j] - ts[j-1])
			}
			h = hs[j-1] + f*(hs[j]-hs[j-1])
		}
		out[i].HeadingDeg = angle.Wrap360(h)
	}
	return out
}
