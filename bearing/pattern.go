// Package bearing turns "signal level while the antenna turned" into a bearing
// with an honest uncertainty.
//
// Conventions used throughout the package:
//
//   - Bearings and headings are degrees clockwise from true north (or from
//     whatever reference the heading source uses; the package does not know
//     where the station is on Earth).
//   - An antenna pattern is a table of relative gain in dB at 1° steps.
//     Pattern.GainDB[k] is the gain toward a transmitter that lies k degrees
//     clockwise of the antenna's boresight (its heading reference).
//   - With the antenna's boresight at heading φ and the transmitter at bearing
//     θ, the received level is c + G(θ − φ), where c is the (unknown) level the
//     antenna would give at its best direction. Fitting finds θ.
//   - Which direction of the antenna a heading names is the pattern's
//     convention (Pattern.HeadingRef): a small loop's axis (perpendicular
//     to its plane: the nulls lie along it) or its plane (the strongest
//     direction), a Yagi's boresight, the way an operator shielding a whip
//     with the body faces. A heading source that reports another direction
//     needs a mount offset, or for a loop the other convention (LoopPlane).
//   - Pattern math inside this package runs in degrees because the tables are
//     sampled at 1° steps and the slopes are reported in dB per degree, as in
//     the Cramér–Rao bound CRBDBDeg.
package bearing

import (
	"encoding/json"
	"fmt"
	"math"
	"nullseek/internal/angle"
	"nullseek/internal/atomicfile"
	"os"
	"slices"
)

// Mode says which feature of a pattern marks the bearing: a null (small loop,
// body shielding) or a peak (Yagi). The fit is the same for both; Mode only
// changes reporting (null depth, coverage and multipath warnings).
type Mode int

const (
	// Null: the bearing is marked by a minimum of the pattern.
	Null Mode = iota
	// Peak: the bearing is marked by the maximum of the pattern.
	Peak
)

// String returns "null" or "peak".
func (m Mode) String() string {
	switch m {
	case Null:
		return "null"
	case Peak:
		return "peak"
	}
	return fmt.Sprintf("mode(%d)", int(m))
}

// ParseMode reads "null" or "peak".
func ParseMode(s string) (Mode, error) {
	switch s {
	case "null":
		return Null, nil
	case "peak":
		return Peak, nil
	}
	return 0, fmt.Errorf("unknown pattern mode %q (want \"null\" or \"peak\")", s)
}

// PatternSteps is the number of entries of Pattern.GainDB (1° steps).
const PatternSteps = 360

// MinGainDB is the lowest relative gain a pattern may hold; constructors and
// Measured clamp to it so that a pattern never holds −Inf.
const MinGainDB = -80.0

// Pattern is an antenna's relative gain in the horizontal plane.
type Pattern struct {
	// Name is a free label ("small loop 25 dB", "calibrated 2025-06-01").
	Name string
	// GainDB is the relative gain in dB toward a transmitter k degrees
	// clockwise of boresight, k = 0..359. Its maximum is 0 dB.
	GainDB []float64
	// Symmetry is the number of equivalent rotations: 2 for a small loop
	// (the 180° ambiguity of its bidirectional null), 1 otherwise.
	Symmetry int
	// Mode says whether a null or a peak marks the bearing.
	Mode Mode
	// HeadingRef says which direction of the antenna a heading names, in
	// words ("the loop's axis, perpendicular to its plane"): what the
	// table's 0° is. Printed with every result.
	HeadingRef string
	// MountOffsetDeg is what to add to the heading source's readings to
	// get the heading of the table's 0°, when MountOffsetSet: a pattern
	// measured by Calibrate carries the offset it measured, so that using
	// it needs no --mount-offset. Degrees in (−180, 180].
	MountOffsetDeg float64
	MountOffsetSet bool
}

// Headings named by the built-in patterns (Pattern.HeadingRef).
const (
	RefLoopAxis  = "the loop's axis (perpendicular to its plane; the nulls point along it)"
	RefLoopPlane = "the loop's plane (its strongest direction; the nulls are 90° either side)"
	RefBoresight = "the Yagi's boresight (the direction of its main lobe)"
	RefFacing    = "the way the operator faces (the drop is with the back to the transmitter)"
)

// MinPatternRangeDB is the least spread between the highest and lowest gain
// of a pattern file (one read to take bearings with): below it the level barely changes as the antenna turns and
// no fit could tell a direction from receiver noise (a body shield, the
// weakest pattern here, drops about 12 dB).
const MinPatternRangeDB = 1.0

// Validate checks the table size, finiteness, normalisation (max 0 dB within
// 0.01 dB), the floor MinGainDB and the symmetry. A flat pattern passes (an
// omnidirectional antenna is a pattern too, for finding bursts); a pattern
// file must also have the spread MinPatternRangeDB (ParsePattern).
func (p Pattern) Validate() error {
	if len(p.GainDB) != PatternSteps {
		return fmt.Errorf("pattern %q: %d gain values, want %d (1° steps)", p.Name, len(p.GainDB), PatternSteps)
	}
	mx := math.Inf(-1)
	for k, g := range p.GainDB {
		if math.IsNaN(g) || math.IsInf(g, 0) {
			return fmt.Errorf("pattern %q: gain at %d° is not finite", p.Name, k)
		}
		if g < MinGainDB-1e-9 {
			return fmt.Errorf("pattern %q: gain at %d° is %.1f dB, below the floor %.0f dB", p.Name, k, g, MinGainDB)
		}
		mx = math.Max(mx, g)
	}
	if math.Abs(mx) > 0.01 {
		return fmt.Errorf("pattern %q: maximum gain is %.3f dB, want 0 dB (normalise the table)", p.Name, mx)
	}
	if p.Symmetry < 1 || PatternSteps%p.Symmetry != 0 {
		return fmt.Errorf("pattern %q: symmetry %d must be a positive divisor of 360", p.Name, p.Symmetry)
	}
	if p.Mode != Null && p.Mode != Peak {
		return fmt.Errorf("pattern %q: unknown mode %d", p.Name, int(p.Mode))
	}
	if p.MountOffsetSet && !(p.MountOffsetDeg > -360 && p.MountOffsetDeg < 360) {
		return fmt.Errorf("pattern %q: mount offset %v° is not an angle within ±360°", p.Name, p.MountOffsetDeg)
	}
	return nil
}

// FeatureDeg is the direction, relative to boresight (degrees clockwise,
// 0..359), of the feature that marks the bearing: the lowest table entry for a
// Null pattern, the highest for a Peak pattern (first one if tied).
func (p Pattern) FeatureDeg() float64 {
	best := 0
	for k, g := range p.GainDB {
		if (p.Mode == Null && g < p.GainDB[best]) || (p.Mode == Peak && g > p.GainDB[best]) {
			best = k
		}
	}
	return float64(best)
}

// WidthDeg is the full width of the feature: for a Peak pattern the −3 dB
// beamwidth of the main lobe; for a Null pattern the width over which the
// gain stays more than 3 dB below the null's shoulders (the half-depth width
// in dB measured from the null upward by 3 dB). Widths are found on the
// interpolated pattern, at 0.01° resolution.
func (p Pattern) WidthDeg() float64 {
	m := newModel(p)
	f := p.FeatureDeg()
	ref := m.gainDB(f)
	var lvl float64
	if p.Mode == Peak {
		lvl = ref - 3
	} else {
		lvl = ref + 3
	}
	cross := func(dir float64) float64 {
		for d := 0.01; d < 180; d += 0.01 {
			g := m.gainDB(f + dir*d)
			if (p.Mode == Peak && g <= lvl) || (p.Mode == Null && g >= lvl) {
				return d
			}
		}
		return 180
	}
	return cross(1) + cross(-1)
}

// SmallLoop is an electrically small loop turned about its vertical axis:
// field ∝ |cos(angle from the loop plane)| = |sin δ| with δ measured from the
// loop's axis (its boresight, perpendicular to the loop plane), a figure eight
// with nulls broadside to the loop plane (FCC question pool G9D10) and a
// bidirectional null (E9H05), so Symmetry is 2. The null is filled by an
// in-quadrature omnidirectional pickup ("antenna effect") of power a² chosen so
// that the null is exactly nullDepthDB below the lobes:
//
//	G(δ) = 10·log10((sin²δ + a²)/(1 + a²)),  a² = 1/(10^(depth/10) − 1).
//
// nullDepthDB must lie in (0, −MinGainDB].
func SmallLoop(nullDepthDB float64) (Pattern, error) {
	if !(nullDepthDB > 0 && nullDepthDB <= -MinGainDB) {
		return Pattern{}, fmt.Errorf("small loop: null depth %.3g dB out of range (0, %.0f]", nullDepthDB, -MinGainDB)
	}
	a2 := 1 / (math.Pow(10, nullDepthDB/10) - 1)
	g := make([]float64, PatternSteps)
	for k := range g {
		s := math.Sin(float64(k) * math.Pi / 180)
		g[k] = 10 * math.Log10((s*s+a2)/(1+a2))
	}
	return finish(Pattern{Name: fmt.Sprintf("small loop, %.0f dB null", nullDepthDB), GainDB: g, Symmetry: 2, Mode: Null, HeadingRef: RefLoopAxis})
}

// LoopPlane is SmallLoop for a heading source that reports the loop's
// plane (its strongest direction) instead of its axis: the same pattern
// turned by 90°, G(δ) = SmallLoop's G(δ − 90°), so that no mount offset
// is needed (a rotator or compass fixed along the loop's plane is common).
func LoopPlane(nullDepthDB float64) (Pattern, error) {
	p, err := SmallLoop(nullDepthDB)
	if err != nil {
		return Pattern{}, err
	}
	g := make([]float64, PatternSteps)
	for k := range g {
		g[k] = p.GainDB[(k+270)%PatternSteps]
	}
	p.GainDB = g
	p.Name = fmt.Sprintf("small loop (heading = its plane), %.0f dB null", nullDepthDB)
	p.HeadingRef = RefLoopPlane
	return finish(p)
}

// Yagi is a directional beam with a Gaussian main lobe of −3 dB full width
// beamwidthDeg (G = −12(δ/θ₃)² dB, common practice), a back
// lobe frontToBackDB below the peak at 180° shaped as ((1−cos δ)/2)⁴, and a
// floor 15 dB under the back lobe between them (in power):
//
//	P(δ) = exp-lobe(δ) + b'·((1−cos δ)/2)⁴ + f, normalised to 0 dB at δ = 0,
//
// where b' is chosen so that the gain at 180° is exactly −frontToBackDB.
// beamwidthDeg must lie in [5, 180]; frontToBackDB in [1, 60].
func Yagi(beamwidthDeg, frontToBackDB float64) (Pattern, error) {
	if !(beamwidthDeg >= 5 && beamwidthDeg <= 180) {
		return Pattern{}, fmt.Errorf("yagi: beamwidth %.3g° out of range [5, 180]", beamwidthDeg)
	}
	if !(frontToBackDB >= 1 && frontToBackDB <= 60) {
		return Pattern{}, fmt.Errorf("yagi: front-to-back %.3g dB out of range [1, 60]", frontToBackDB)
	}
	lobe := func(d float64) float64 { return math.Pow(10, -1.2*(d/beamwidthDeg)*(d/beamwidthDeg)) }
	f := math.Pow(10, -(frontToBackDB+15)/10)
	p0 := lobe(0) + f // back term is 0 at δ = 0
	// want (lobe(180) + b' + f)/p0 = 10^(-fb/10)
	b := math.Pow(10, -frontToBackDB/10)*p0 - lobe(180) - f
	if b < 0 {
		b = 0 // very wide beam: the main lobe alone sets the back level
	}
	g := make([]float64, PatternSteps)
	for k := range g {
		d := angle.Wrap180(float64(k))
		c := (1 - math.Cos(d*math.Pi/180)) / 2
		g[k] = 10 * math.Log10((lobe(d)+b*c*c*c*c+f)/p0)
	}
	return finish(Pattern{Name: fmt.Sprintf("yagi, %.0f° beam, %.0f dB F/B", beamwidthDeg, frontToBackDB), GainDB: g, Symmetry: 1, Mode: Peak, HeadingRef: RefBoresight})
}

// BodyShield is a whip held against the operator's chest: the body shadows
// the receiver when the transmitter is behind the operator. Boresight is the
// way the operator faces; the pattern is a shallow cardioid in field,
//
//	E(δ) = (1+r)/2 + (1−r)/2·cos δ,  r = 10^(−depth/20),
//
// so the gain is 0 dB facing the transmitter and −depthDB with the back to it
// (common practice, from memory: roughly 10+ dB at 2 m). The fit returns the
// transmitter's bearing either way; Mode is Null because the drop is the
// sharpest feature. depthDB must lie in (0, 40].
func BodyShield(depthDB float64) (Pattern, error) {
	if !(depthDB > 0 && depthDB <= 40) {
		return Pattern{}, fmt.Errorf("body shield: depth %.3g dB out of range (0, 40]", depthDB)
	}
	r := math.Pow(10, -depthDB/20)
	g := make([]float64, PatternSteps)
	for k := range g {
		e := (1+r)/2 + (1-r)/2*math.Cos(float64(k)*math.Pi/180)
		g[k] = 20 * math.Log10(e)
	}
	return finish(Pattern{Name: fmt.Sprintf("body shield, %.0f dB", depthDB), GainDB: g, Symmetry: 1, Mode: Null, HeadingRef: RefFacing})
}

// finish clamps to MinGainDB, renormalises to 0 dB and validates.
func finish(p Pattern) (Pattern, error) {
	mx := math.Inf(-1)
	for _, g := range p.GainDB {
		mx = math.Max(mx, g)
	}
	for k := range p.GainDB {
		p.GainDB[k] = math.Max(p.GainDB[k]-mx, MinGainDB)
	}
	if err := p.Validate(); err != nil {
		return Pattern{}, err
	}
	return p, nil
}

// patternFile is the on-disk JSON form (our own format).
// Version 2 adds heading_ref and mount_offset_deg (both optional);
// version 1 files are still read.
type patternFile struct {
	Format         string    `json:"format"`
	Version        int       `json:"version"`
	Name           string    `json:"name"`
	Mode           string    `json:"mode"`
	Symmetry       int       `json:"symmetry"`
	StepDeg        float64   `json:"step_deg"`
	HeadingRef     string    `json:"heading_ref,omitempty"`
	MountOffsetDeg *float64  `json:"mount_offset_deg,omitempty"`
	GainDB         []float64 `json:"gain_db"`
}

const (
	patternFormat  = "nullseek-antenna-pattern"
	patternVersion = 2
)

// MarshalPattern encodes p as our JSON pattern format (version 2).
func MarshalPattern(p Pattern) ([]byte, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	f := patternFile{Format: patternFormat, Version: patternVersion, Name: p.Name,
		Mode: p.Mode.String(), Symmetry: p.Symmetry, StepDeg: 1, HeadingRef: p.HeadingRef, GainDB: p.GainDB}
	if p.MountOffsetSet {
		off := p.MountOffsetDeg
		f.MountOffsetDeg = &off
	}
	return json.MarshalIndent(f, "", " ")
}

// ParsePattern decodes our JSON pattern format and validates the result.
// A null among the gains is an error (encoding/json would read it as 0 dB).
func ParsePattern(data []byte) (Pattern, error) {
	var f patternFile
	var gains struct {
		GainDB []*float64 `json:"gain_db"`
	}
	if err := json.Unmarshal(data, &f); err != nil {
		return Pattern{}, fmt.Errorf("pattern JSON: %w", err)
	}
	if err := json.Unmarshal(data, &gains); err != nil {
		return Pattern{}, fmt.Errorf("pattern JSON: %w", err)
	}
	for k, g := range gains.GainDB {
		if g == nil {
			return Pattern{}, fmt.Errorf("pattern JSON: gain_db[%d] is null, want a number of dB", k)
		}
	}
	if f.Format != patternFormat {
		return Pattern{}, fmt.Errorf("pattern JSON: format %q, want %q", f.Format, patternFormat)
	}
	if f.Version != 1 && f.Version != patternVersion {
		return Pattern{}, fmt.Errorf("pattern JSON: version %d not supported (want 1 or %d)", f.Version, patternVersion)
	}
	if f.StepDeg != 1 {
		return Pattern{}, fmt.Errorf("pattern JSON: step_deg %g not supported (want 1)", f.StepDeg)
	}
	m, err := ParseMode(f.Mode)
	if err != nil {
		return Pattern{}, fmt.Errorf("pattern JSON: %w", err)
	}
	p := Pattern{Name: f.Name, GainDB: f.GainDB, Symmetry: f.Symmetry, Mode: m, HeadingRef: f.HeadingRef}
	if p.HeadingRef == "" {
		p.HeadingRef = "the heading the pattern was measured against (the file does not say which direction of the antenna that is)"
	}
	if f.MountOffsetDeg != nil {
		p.MountOffsetDeg, p.MountOffsetSet = *f.MountOffsetDeg, true
	}
	if err := p.Validate(); err != nil {
		return Pattern{}, fmt.Errorf("pattern JSON: %w", err)
	}
	if mn := slices.Min(p.GainDB); -mn < MinPatternRangeDB-1e-9 {
		return Pattern{}, fmt.Errorf("pattern JSON: its gains span only %.2f dB (want at least %g dB): a pattern this flat tells no direction", -mn, MinPatternRangeDB)
	}
	return p, nil
}

// SavePattern writes p to path as JSON (temporary file + rename).
func SavePattern(path string, p Pattern) error {
	b, err := MarshalPattern(p)
	if err != nil {
		return fmt.Errorf("save pattern %s: %w", path, err)
	}
	return atomicfile.Write(path, append(b, '\n'))
}

// LoadPattern reads a pattern written by SavePattern.
func LoadPattern(path string) (Pattern, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return Pattern{}, fmt.Errorf("load pattern: %w", err)
	}
	p, err := ParsePattern(b)
	if err != nil {
		return Pattern{}, fmt.Errorf("load pattern %s: %w", path, err)
	}
	return p, nil
}

// model is a pattern prepared for evaluation at any angle: linear power at
// 1° steps with periodic Catmull–Rom interpolation (C¹, exact for quadratics,
// which the loop's sin² null is locally).
type model struct {
	pw [PatternSteps]float64
}

func newModel(p Pattern) *model {
	m := &model{}
	for k := range m.pw {
		m.pw[k] = math.Pow(10, p.GainDB[k]/10)
	}
	return m
}

// power returns the linear relative power and its derivative per degree at
// angle x degrees clockwise of boresight.
func (m *model) power(x float64) (pw, dpw float64) {
	x = angle.Wrap360(x)
	i := int(math.Floor(x))
	t := x - float64(i)
	p0 := m.pw[(i+PatternSteps-1)%PatternSteps]
	p1 := m.pw[i%PatternSteps]
	p2 := m.pw[(i+1)%PatternSteps]
	p3 := m.pw[(i+2)%PatternSteps]
	m1 := (p2 - p0) / 2
	m2 := (p3 - p1) / 2
	t2, t3 := t*t, t*t*t
	h00 := 2*t3 - 3*t2 + 1
	h10 := t3 - 2*t2 + t
	h01 := -2*t3 + 3*t2
	h11 := t3 - t2
	pw = h00*p1 + h10*m1 + h01*p2 + h11*m2
	dpw = (6*t2-6*t)*p1 + (3*t2-4*t+1)*m1 + (-6*t2+6*t)*p2 + (3*t2-2*t)*m2
	floor := math.Pow(10, MinGainDB/10)
	if pw < floor {
		pw = floor
	}
	return pw, dpw
}

// gainDB returns the interpolated gain in dB at x degrees.
func (m *model) gainDB(x float64) float64 {
	pw, _ := m.power(x)
	return 10 * math.Log10(pw)
}

// gainSlopeDB returns gain (dB) and slope (dB per degree) at x.
func (m *model) gainSlopeDB(x float64) (g, s float64) {
	pw, d := m.power(x)
	return 10 * math.Log10(pw), 10 / math.Ln10 * d / pw
}
