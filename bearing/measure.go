package bearing

import (
	"fmt"
	"math"
	"nullseek/internal/angle"
)

// PatternShape is a pattern's headline numbers.
type PatternShape struct {
	// WidthDeg is the −3 dB beamwidth of a Peak pattern, or the +3 dB
	// width of a Null pattern's null (Pattern.WidthDeg).
	WidthDeg float64
	// NullDepthDB is 0 dB minus the lowest gain of the table (≥ 0): the
	// depth of the deepest null, for either mode.
	NullDepthDB float64
	// FrontBackDB is the gain at the feature minus the gain 180° from it,
	// for a Peak pattern (front-to-back ratio); 0 for a Null pattern.
	FrontBackDB float64
}

// Shape measures p's width, null depth and front-to-back ratio.
func Shape(p Pattern) PatternShape {
	s := PatternShape{WidthDeg: p.WidthDeg()}
	lo := math.Inf(1)
	for _, g := range p.GainDB {
		lo = math.Min(lo, g)
	}
	s.NullDepthDB = -lo
	if p.Mode == Peak {
		f := int(p.FeatureDeg())
		s.FrontBackDB = p.GainDB[f] - p.GainDB[(f+180)%len(p.GainDB)]
	}
	return s
}

// FeatureCentre is the pattern's axis of mirror symmetry nearest nearDeg
// (within 45°), degrees clockwise of boresight: the angle c that best
// matches the gain at c + x with the gain at c − x, in linear power over
// the whole pattern, at 0.01° resolution. It uses every entry, so it is
// far steadier on a measured table than the midpoint of the −3 dB
// crossings. An asymmetric pattern gets the axis that balances it best.
func FeatureCentre(p Pattern, nearDeg float64) (float64, error) {
	n := len(p.GainDB)
	pw := make([]float64, n)
	for k, g := range p.GainDB {
		pw[k] = math.Pow(10, g/10)
	}
	at := func(x float64) float64 {
		x = angle.Wrap360(x)
		i := int(x)
		f := x - float64(i)
		return pw[i%n]*(1-f) + pw[(i+1)%n]*f
	}
	half := 180 / p.Symmetry
	cost := func(c float64) float64 {
		var j float64
		for k := 1; k < half; k++ {
			d := at(c+float64(k)) - at(c-float64(k))
			j += d * d
		}
		return j
	}
	best, bestJ := nearDeg, math.Inf(1)
	for c := nearDeg - 45; c <= nearDeg+45; c += 0.25 {
		if j := cost(c); j < bestJ {
			best, bestJ = c, j
		}
	}
	lo := best
	for c := lo - 0.25; c <= lo+0.25; c += 0.01 {
		if j := cost(c); j < bestJ {
			best, bestJ = c, j
		}
	}
	if math.IsNaN(bestJ) || math.Abs(best-nearDeg) >= 45 {
		return 0, fmt.Errorf("the measured pattern has no axis of symmetry within 45° of its nominal %s", p.Mode)
	}
	return best, nil
}

// splitHalfCentreSigma estimates the noise of the measured pattern's
// centre: the patterns of the even and of the odd readings are measured
// apart and their centres c₁, c₂ compared. Each half has twice the full
// set's variance, so var(c₁ − c₂) = 4σ² and σ ≈ |c₁ − c₂|/2 (one draw: a
// rough, order-of-magnitude figure). 0 when a half cannot be measured.
func splitHalfCentreSigma(pts []Point, known, off, f0 float64, nominal Pattern, floorDB *float64) float64 {
	var c [2]float64
	for h := 0; h < 2; h++ {
		var rel, lvl []float64
		for i := h; i < len(pts); i += 2 {
			if pts[i].Clipped {
				continue
			}
			rel = append(rel, known-off-pts[i].HeadingDeg)
			lvl = append(lvl, pts[i].LevelDB)
		}
		p, err := Measured("half", rel, lvl, MeasureOptions{Symmetry: nominal.Symmetry, Mode: nominal.Mode, SmoothDeg: 3, NoiseFloorDB: floorDB})
		if err != nil {
			return 0
		}
		if c[h], err = FeatureCentre(p, f0); err != nil {
			return 0
		}
	}
	return math.Abs(angle.Wrap180(c[0]-c[1])) / 2
}

// Rotate returns p turned so that what was at byDeg clockwise of
// boresight is at boresight: gain'(x) = gain(x + byDeg), interpolated with
// a periodic Catmull–Rom spline in linear power and renormalised to 0 dB.
func Rotate(p Pattern, byDeg float64) (Pattern, error) {
	n := len(p.GainDB)
	pw := make([]float64, n)
	for k, g := range p.GainDB {
		pw[k] = math.Pow(10, g/10)
	}
	out := make([]float64, n)
	mx := 0.0
	for k := range out {
		x := angle.Wrap360(float64(k) + byDeg)
		i := int(x)
		t := x - float64(i)
		p0, p1, p2, p3 := pw[(i+n-1)%n], pw[i%n], pw[(i+1)%n], pw[(i+2)%n]
		v := p1 + 0.5*t*(p2-p0+t*(2*p0-5*p1+4*p2-p3+t*(3*(p1-p2)+p3-p0)))
		v = math.Max(v, math.Min(p1, p2)*0.5) // no overshoot below zero near a deep null
		out[k] = v
		mx = math.Max(mx, v)
	}
	q := p
	q.GainDB = make([]float64, n)
	for k, v := range out {
		q.GainDB[k] = math.Max(10*math.Log10(v/mx), MinGainDB)
	}
	if err := q.Validate(); err != nil {
		return Pattern{}, fmt.Errorf("rotate pattern: %w", err)
	}
	return q, nil
}

// Calibration is an antenna's measured pattern and the north offset of
// its heading source, from a sweep with a transmitter at a known bearing
// (MeasureAntenna).
type Calibration struct {
	// KnownBearingDeg is the transmitter's bearing, degrees true in
	// [0, 360), as given.
	KnownBearingDeg float64
	// NorthOffsetDeg is what to add to the sweep's headings to get the
	// heading of the measured pattern's reference (the middle of its main
	// lobe or null): true reference = heading + NorthOffsetDeg, in
	// (−180, 180] (for an ambiguous pattern, the smallest equivalent).
	NorthOffsetDeg float64
	// SigmaDeg is the 1-sigma of NorthOffsetDeg from the level noise: the
	// sigma of a refit of the sweep with the measured pattern and a
	// split-half estimate of the noise in the pattern's centre, in
	// quadrature. Errors of the calibration site (multipath) repeat on
	// every turn and are not in it; Alignment.SigmaDeg shows how far the
	// nominal pattern was off.
	SigmaDeg float64
	// Pattern is the measured pattern, centred on the corrected reference,
	// with the nominal pattern's Mode, Symmetry and HeadingRef.
	Pattern Pattern
	// Alignment is the fit of the nominal pattern that fixed the offset
	// roughly.
	Alignment Estimate
	// Points is the number of readings used; Shape the measured pattern's
	// headline numbers.
	Points int
	Shape  PatternShape
}

// MeasureAntenna measures an antenna's pattern and its heading source's
// north offset from a sweep (points, headings as the source gave them)
// with a transmitter at knownBearingDeg: the nominal pattern fixes the
// reference roughly (Calibrate); the reference is then moved to the
// measured pattern's axis of symmetry (FeatureCentre: the middle of its
// main lobe or null), and a refit of the sweep with the measured pattern
// sets the offset and its sigma. The sweep must cover at least
// opts.MinCoverageDeg (default 340°: the whole pattern is measured).
func MeasureAntenna(points []Point, knownBearingDeg float64, nominal Pattern, opts CalibrateOptions) (*Calibration, error) {
	if math.IsNaN(knownBearingDeg) || math.IsInf(knownBearingDeg, 0) {
		return nil, fmt.Errorf("calibrate: %w: known bearing %v is not a number of degrees", ErrBadInput, knownBearingDeg)
	}
	fo := opts.Fit
	if fo.MinCoverageDeg == 0 {
		fo.MinCoverageDeg = opts.MinCoverageDeg
		if fo.MinCoverageDeg == 0 {
			fo.MinCoverageDeg = 340
		}
	}
	known := angle.Wrap360(knownBearingDeg)
	align, err := Fit(points, nominal, fo)
	if err != nil {
		return nil, fmt.Errorf("calibrate: aligning with %q: %w", nominal.Name, err)
	}
	o := opts
	o.Fit = fo
	pat, off, err := Calibrate(points, known, nominal, o)
	if err != nil {
		return nil, err
	}
	// The nominal pattern fixed the reference only roughly: when the real
	// pattern differs, the alignment leans by a degree or so. Move the
	// reference to the measured pattern's axis of symmetry so that the
	// offset is the heading source's real error and the pattern is centred
	// on its feature.
	f0 := nominal.FeatureDeg()
	centre, err := FeatureCentre(pat, f0)
	if err != nil {
		return nil, fmt.Errorf("calibrate: %w", err)
	}
	centreSigma := splitHalfCentreSigma(points, known, off, f0, nominal, fo.NoiseFloorDB)
	centre = angle.Wrap180(centre - f0)
	if pat, err = Rotate(pat, centre); err != nil {
		return nil, fmt.Errorf("calibrate: %w", err)
	}
	off += centre
	// Refit the sweep with the measured pattern: what is left between its
	// bearing and the known one goes into the offset, and its sigma is the
	// offset's (noise only; the site's errors are not in one sweep).
	shifted := make([]Point, len(points))
	for i, q := range points {
		q.HeadingDeg = angle.Wrap360(q.HeadingDeg + off)
		shifted[i] = q
	}
	check, err := Fit(shifted, pat, fo)
	if err != nil {
		return nil, fmt.Errorf("calibrate: refit with the measured pattern: %w", err)
	}
	off += angle.Wrap180(known - check.BearingDeg)
	period := 360 / float64(pat.Symmetry)
	off = math.Mod(off+period/2+4*360, period) - period/2
	if off <= -180 {
		off += 360
	}
	pat.HeadingRef = nominal.HeadingRef
	return &Calibration{KnownBearingDeg: known, NorthOffsetDeg: off, SigmaDeg: math.Hypot(check.SigmaDeg, centreSigma),
		Pattern: pat, Alignment: align, Points: check.Points, Shape: Shape(pat)}, nil
}
