package survey

import (
	"fmt"
	"math"
	"nullseek/internal/angle"
	"sort"
	"strings"

	"nullseek/bearing"
	"nullseek/heading"
)

// CalibrationOptions tune Calibrate.
type CalibrationOptions struct {
	// Ident chooses the calibration transmitter when several were heard:
	// its identifier or its fingerprint label (case-insensitive). Empty
	// means the only transmitter heard; several are then an error.
	Ident string
	// Fit is passed to the alignment fit (bearing.Calibrate); its
	// NoiseFloorDB is filled from the bursts when nil.
	Fit bearing.FitOptions
	// Name labels the measured pattern (default "calibrated").
	Name string
}

// Calibration is an antenna's measured pattern and the north offset of
// its heading source, from a sweep with a transmitter at a known bearing.
type Calibration struct {
	// Ident is the transmitter whose bursts were used.
	Ident string
	// KnownBearingDeg is the bearing of the transmitter, degrees true in
	// [0, 360), as given.
	KnownBearingDeg float64
	// NorthOffsetDeg is what to add to the track's headings (after any
	// mount offset the track already carries) to get the heading of the
	// measured pattern's boresight, the middle of its main lobe (peak) or
	// null: true boresight = track heading + NorthOffsetDeg, in
	// (−180, 180] (for an ambiguous pattern, the smallest equivalent).
	NorthOffsetDeg float64
	// SigmaDeg is the 1-sigma of NorthOffsetDeg from the level noise: the
	// sigma of a refit of the sweep with the measured pattern and a
	// split-half estimate of the noise in the pattern's centre, in
	// quadrature. Errors of the calibration site (multipath) repeat on
	// every turn and are not in it; Alignment.SigmaDeg shows how far the
	// nominal pattern was off.
	SigmaDeg float64
	// Pattern is the measured pattern, centred on the corrected boresight,
	// with the nominal pattern's Mode and Symmetry.
	Pattern bearing.Pattern
	// Alignment is the fit of the nominal pattern that fixed the offset.
	Alignment bearing.Estimate
	// Bursts and Points count the bursts and level readings used.
	Bursts, Points int
	// Shape summarises the measured pattern.
	Shape PatternShape
}

// PatternShape is a pattern's headline numbers.
type PatternShape struct {
	// WidthDeg is the −3 dB beamwidth of a Peak pattern, or the +3 dB
	// width of a Null pattern's null (bearing.Pattern.WidthDeg).
	WidthDeg float64
	// NullDepthDB is 0 dB minus the lowest gain of the table (≥ 0): the
	// depth of the deepest null, for either mode.
	NullDepthDB float64
	// FrontBackDB is the gain at the feature minus the gain 180° from it,
	// for a Peak pattern (front-to-back ratio); 0 for a Null pattern.
	FrontBackDB float64
}

// Shape measures p's width, null depth and front-to-back ratio.
func Shape(p bearing.Pattern) PatternShape {
	s := PatternShape{WidthDeg: p.WidthDeg()}
	lo := math.Inf(1)
	for _, g := range p.GainDB {
		lo = math.Min(lo, g)
	}
	s.NullDepthDB = -lo
	if p.Mode == bearing.Peak {
		f := int(p.FeatureDeg())
		s.FrontBackDB = p.GainDB[f] - p.GainDB[(f+180)%len(p.GainDB)]
	}
	return s
}

// Calibrate measures the antenna's pattern and the heading source's north
// offset from the bursts of one transmitter at a known bearing
// (knownBearingDeg, degrees true): the level readings of all its bursts are
// joined with track (survey.Points), pooled, and handed to
// bearing.Calibrate with the nominal pattern, which fixes the boresight
// roughly; the boresight is then moved to the measured pattern's axis of
// symmetry (the middle of its main lobe or null), and a refit of the sweep with the measured pattern
// sets the offset and its sigma. The pooled sweep must cover at least 340° of the circle (the whole
// pattern is measured). Errors say which transmitter and why.
func Calibrate(res *Result, track *heading.Track, nominal bearing.Pattern, knownBearingDeg float64, opts CalibrationOptions) (*Calibration, error) {
	if math.IsNaN(knownBearingDeg) || math.IsInf(knownBearingDeg, 0) {
		return nil, fmt.Errorf("calibrate: known bearing %v is not a number of degrees", knownBearingDeg)
	}
	if len(res.Records) == 0 {
		return nil, fmt.Errorf("calibrate: no bursts found in the recording")
	}
	key, err := chooseTransmitter(res, opts.Ident)
	if err != nil {
		return nil, err
	}
	var pts []bearing.Point
	var noise []float64
	bursts := 0
	for _, r := range res.Records {
		if txKey(r) != key {
			continue
		}
		p := Points(r, track)
		if len(p) == 0 {
			continue
		}
		bursts++
		pts = append(pts, p...)
		noise = append(noise, r.NoiseDB)
	}
	if bursts == 0 {
		return nil, fmt.Errorf("calibrate: no burst of %s overlaps the heading track", key)
	}
	fo := opts.Fit
	if fo.NoiseFloorDB == nil {
		sort.Float64s(noise)
		nf := noise[len(noise)/2]
		fo.NoiseFloorDB = &nf
	}
	if fo.MinCoverageDeg == 0 {
		fo.MinCoverageDeg = 340
	}
	name := opts.Name
	if name == "" {
		name = "calibrated"
	}
	known := angle.Wrap360(knownBearingDeg)
	align, err := bearing.Fit(pts, nominal, fo)
	if err != nil {
		return nil, fmt.Errorf("calibrate on %s (%d bursts, %d readings): %w", key, bursts, len(pts), err)
	}
	pat, off, err := bearing.Calibrate(pts, known, nominal, bearing.CalibrateOptions{Fit: fo, Name: name})
	if err != nil {
		return nil, fmt.Errorf("calibrate on %s: %w", key, err)
	}
	// The nominal pattern fixed the boresight only roughly: when the real
	// pattern differs, the alignment leans by a degree or so. Move the
	// boresight to the measured pattern's axis of symmetry (the middle of
	// its main lobe or null) so that the offset is the heading source's
	// real error and the pattern is centred on its feature.
	f0 := nominal.FeatureDeg()
	centre, err := featureCentre(pat, f0)
	if err != nil {
		return nil, fmt.Errorf("calibrate on %s: %w", key, err)
	}
	centreSigma := splitHalfCentreSigma(pts, known, off, f0, nominal, fo.NoiseFloorDB)
	centre = angle.Wrap180(centre - f0)
	pat, err = rotatePattern(pat, centre)
	if err != nil {
		return nil, fmt.Errorf("calibrate on %s: %w", key, err)
	}
	off += centre
	// Refit the sweep with the measured pattern: what is left between its
	// bearing and the known one goes into the offset, and its sigma is the
	// offset's (noise only; the site's errors are not in one sweep).
	shifted := make([]bearing.Point, len(pts))
	for i, q := range pts {
		q.HeadingDeg = angle.Wrap360(q.HeadingDeg + off)
		shifted[i] = q
	}
	check, err := bearing.Fit(shifted, pat, fo)
	if err != nil {
		return nil, fmt.Errorf("calibrate on %s: refit with the measured pattern: %w", key, err)
	}
	off += angle.Wrap180(known - check.BearingDeg)
	period := 360 / float64(pat.Symmetry)
	off = math.Mod(off+period/2+4*360, period) - period/2
	if off <= -180 {
		off += 360
	}
	return &Calibration{
		Ident: key, KnownBearingDeg: known, NorthOffsetDeg: off, SigmaDeg: math.Hypot(check.SigmaDeg, centreSigma),
		Pattern: pat, Alignment: align, Bursts: bursts, Points: len(pts), Shape: Shape(pat),
	}, nil
}

// featureCentre is the pattern's axis of mirror symmetry nearest nearDeg
// (within 45°), degrees clockwise of boresight: the angle c that best
// matches the gain at c + x with the gain at c − x, in linear power over
// the whole pattern, at 0.01° resolution. It uses every entry, so it is
// far steadier on a measured table than the midpoint of the −3 dB
// crossings. An asymmetric pattern gets the axis that balances it best.
func featureCentre(p bearing.Pattern, nearDeg float64) (float64, error) {
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
func splitHalfCentreSigma(pts []bearing.Point, known, off, f0 float64, nominal bearing.Pattern, floorDB *float64) float64 {
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
		p, err := bearing.Measured("half", rel, lvl, bearing.MeasureOptions{Symmetry: nominal.Symmetry, Mode: nominal.Mode, SmoothDeg: 3, NoiseFloorDB: floorDB})
		if err != nil {
			return 0
		}
		if c[h], err = featureCentre(p, f0); err != nil {
			return 0
		}
	}
	return math.Abs(angle.Wrap180(c[0]-c[1])) / 2
}

// rotatePattern returns p turned so that what was at byDeg clockwise of
// boresight is at boresight: gain'(x) = gain(x + byDeg), interpolated with
// a periodic Catmull–Rom spline in linear power and renormalised to 0 dB.
func rotatePattern(p bearing.Pattern, byDeg float64) (bearing.Pattern, error) {
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
		q.GainDB[k] = math.Max(10*math.Log10(v/mx), bearing.MinGainDB)
	}
	if err := q.Validate(); err != nil {
		return bearing.Pattern{}, fmt.Errorf("rotate pattern: %w", err)
	}
	return q, nil
}

// chooseTransmitter picks the transmitter key named by want, or the only
// one heard.
func chooseTransmitter(res *Result, want string) (string, error) {
	count := map[string]int{}
	var keys []string
	for _, r := range res.Records {
		k := txKey(r)
		if count[k] == 0 {
			keys = append(keys, k)
		}
		count[k]++
	}
	sort.Strings(keys)
	list := func() string {
		var s []string
		for _, k := range keys {
			s = append(s, fmt.Sprintf("%s (%d bursts)", k, count[k]))
		}
		return strings.Join(s, ", ")
	}
	if want == "" {
		if len(keys) == 1 {
			return keys[0], nil
		}
		return "", fmt.Errorf("calibrate: several transmitters heard: %s; choose the calibration transmitter with --ident", list())
	}
	for _, r := range res.Records {
		if strings.EqualFold(r.Ident, want) || strings.EqualFold(r.Transmitter, want) || strings.EqualFold(txKey(r), want) {
			return txKey(r), nil
		}
	}
	return "", fmt.Errorf("calibrate: transmitter %q not heard; heard: %s", want, list())
}
