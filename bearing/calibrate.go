package bearing

import (
	"fmt"
	"math"
	"nullseek/internal/angle"
)

// MeasureOptions tunes Measured.
type MeasureOptions struct {
	// Symmetry and Mode are copied into the pattern (Symmetry 0 → 1).
	// With Symmetry > 1 the table is averaged over the equivalent rotations.
	Symmetry int
	Mode     Mode
	// SmoothDeg is the width of the binomial smoothing kernel in degrees
	// (odd number of 1° taps; 0 or 1 → no smoothing; default via Calibrate 3).
	SmoothDeg int
	// NoiseFloorDB, when set, is subtracted (in power) before normalising so
	// that a noise-filled null is not taken for the antenna's null.
	NoiseFloorDB *float64
	// MaxGapDeg is the widest gap in relative angle that is interpolated
	// over (default 10°); wider gaps are an error.
	MaxGapDeg float64
}

// Measured builds a pattern from levels seen at known angles relative to
// boresight (relDeg[k]: the transmitter's direction clockwise of boresight):
// 1° bins of mean linear power, gaps up to MaxGapDeg filled by circular linear
// interpolation, optional symmetrisation and smoothing, normalised to 0 dB and
// clamped at MinGainDB.
func Measured(name string, relDeg, levelDB []float64, opts MeasureOptions) (Pattern, error) {
	if len(relDeg) != len(levelDB) {
		return Pattern{}, fmt.Errorf("measured pattern: %w: %d angles but %d levels", ErrBadInput, len(relDeg), len(levelDB))
	}
	sym := opts.Symmetry
	if sym == 0 {
		sym = 1
	}
	if sym < 1 || PatternSteps%sym != 0 {
		return Pattern{}, fmt.Errorf("measured pattern: %w: symmetry %d", ErrBadInput, sym)
	}
	maxGap := opts.MaxGapDeg
	if maxGap == 0 {
		maxGap = 10
	}
	floor := 0.0
	if opts.NoiseFloorDB != nil {
		floor = math.Pow(10, *opts.NoiseFloorDB/10)
	}
	// Local linear regression of power on angle at each whole degree, with a
	// triangular kernel of half-width 1.5°: unlike plain rounding into bins it
	// does not shift the pattern when the readings sit at a fractional offset.
	const n = PatternSteps
	const hw = 1.5
	var sw, swd, swdd, swy, swdy [n]float64
	for i := range relDeg {
		if math.IsNaN(relDeg[i]) || math.IsInf(relDeg[i], 0) || math.IsNaN(levelDB[i]) || math.IsInf(levelDB[i], 0) {
			return Pattern{}, fmt.Errorf("measured pattern: %w: reading %d is not finite", ErrBadInput, i)
		}
		y := math.Pow(10, levelDB[i]/10)
		for s := 0; s < sym; s++ {
			x := angle.Wrap360(relDeg[i] + float64(s)*360/float64(sym))
			for k := int(math.Ceil(x - hw)); float64(k) <= x+hw; k++ {
				d := x - float64(k)
				w := 1 - math.Abs(d)/hw
				if w <= 0 {
					continue
				}
				j := ((k % n) + n) % n
				sw[j] += w
				swd[j] += w * d
				swdd[j] += w * d * d
				swy[j] += w * y
				swdy[j] += w * d * y
			}
		}
	}
	pw := make([]float64, n)
	var have []int
	for k := range pw {
		if sw[k] == 0 {
			continue
		}
		den := sw[k]*swdd[k] - swd[k]*swd[k]
		if den > 1e-6*sw[k]*sw[k] {
			pw[k] = (swy[k]*swdd[k] - swd[k]*swdy[k]) / den
		} else {
			pw[k] = swy[k] / sw[k]
		}
		if pw[k] <= 0 { // extrapolation below zero power near a deep null
			pw[k] = swy[k] / sw[k]
		}
		have = append(have, k)
	}
	if len(have) < 2 {
		return Pattern{}, fmt.Errorf("measured pattern: %w: readings cover %d degree(s)", ErrTooFewPoints, len(have))
	}
	for j, k := range have {
		next := have[(j+1)%len(have)]
		gap := (next - k + n) % n
		if gap == 0 {
			gap = n
		}
		if gap > int(maxGap) {
			return Pattern{}, fmt.Errorf("measured pattern: %w: no readings from %d° to %d° relative to boresight", ErrCoverage, k, next)
		}
		for d := 1; d < gap; d++ {
			f := float64(d) / float64(gap)
			pw[(k+d)%n] = (1-f)*pw[k] + f*pw[next]
		}
	}
	// binomial smoothing
	taps := opts.SmoothDeg
	if taps > 1 {
		if taps%2 == 0 {
			taps++
		}
		w := []float64{1}
		for len(w) < taps {
			nw := make([]float64, len(w)+1)
			for i := range w {
				nw[i] += w[i] / 2
				nw[i+1] += w[i] / 2
			}
			w = nw
		}
		h := taps / 2
		sm := make([]float64, n)
		for k := range sm {
			for i, wi := range w {
				sm[k] += wi * pw[(k+i-h+n)%n]
			}
		}
		pw = sm
	}
	mx := 0.0
	for k := range pw {
		pw[k] -= floor
		mx = math.Max(mx, pw[k])
	}
	if !(mx > 0) {
		return Pattern{}, fmt.Errorf("measured pattern: %w: no level above the noise floor", ErrNoVariation)
	}
	g := make([]float64, n)
	for k := range g {
		g[k] = math.Max(10*math.Log10(math.Max(pw[k], 1e-30)/mx), MinGainDB)
	}
	return finish(Pattern{Name: name, GainDB: g, Symmetry: sym, Mode: opts.Mode})
}

// CalibrateOptions tunes Calibrate.
type CalibrateOptions struct {
	// Fit is passed to the alignment fit (its NoiseFloorDB is also used
	// to subtract the noise from the measured pattern).
	Fit FitOptions
	// Name labels the measured pattern (default "calibrated").
	Name string
	// SmoothDeg: see MeasureOptions (default 3).
	SmoothDeg int
	// MinCoverageDeg is the least sweep coverage accepted (default 340°):
	// the whole pattern has to be measured.
	MinCoverageDeg float64
}

// Calibrate measures an antenna's real pattern and the north offset of the
// heading sensor from a sweep with a transmitter at a known bearing
// (computed by the caller from known positions).
//
// The offset and the pattern's boresight cannot be told apart from one
// sweep, so nominal fixes the boresight: the offset is the rotation that best
// aligns the sweep with the nominal pattern (a Fit), and the measured
// pattern shares its Mode and Symmetry.
//
// northOffsetDeg is what to add to the sensor's headings to get true
// headings: true = sensor + northOffsetDeg, in (−180, 180] (for an ambiguous
// nominal pattern, the smallest of the equivalent offsets).
func Calibrate(points []Point, knownBearingDeg float64, nominal Pattern, opts CalibrateOptions) (Pattern, float64, error) {
	if math.IsNaN(knownBearingDeg) || math.IsInf(knownBearingDeg, 0) {
		return Pattern{}, 0, fmt.Errorf("calibrate: %w: known bearing is not finite", ErrBadInput)
	}
	fo := opts.Fit
	if fo.MinCoverageDeg == 0 {
		fo.MinCoverageDeg = opts.MinCoverageDeg
		if fo.MinCoverageDeg == 0 {
			fo.MinCoverageDeg = 340
		}
	}
	est, err := Fit(points, nominal, fo)
	if err != nil {
		return Pattern{}, 0, fmt.Errorf("calibrate: aligning with %q: %w", nominal.Name, err)
	}
	period := 360 / float64(nominal.Symmetry)
	off := angle.Wrap180(knownBearingDeg - est.BearingDeg)
	off = math.Mod(off+period/2+4*360, period) - period/2
	if off <= -180 {
		off += 360
	}
	fitTheta := angle.Wrap360(knownBearingDeg - off)
	rel := make([]float64, 0, len(points))
	lvl := make([]float64, 0, len(points))
	for _, q := range points {
		if q.Clipped {
			continue
		}
		rel = append(rel, fitTheta-q.HeadingDeg)
		lvl = append(lvl, q.LevelDB)
	}
	name := opts.Name
	if name == "" {
		name = "calibrated"
	}
	sm := opts.SmoothDeg
	if sm == 0 {
		sm = 3
	}
	p, err := Measured(name, rel, lvl, MeasureOptions{Symmetry: nominal.Symmetry, Mode: nominal.Mode, SmoothDeg: sm, NoiseFloorDB: fo.NoiseFloorDB})
	if err != nil {
		return Pattern{}, 0, fmt.Errorf("calibrate: %w", err)
	}
	return p, off, nil
}
