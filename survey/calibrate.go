package survey

import (
	"fmt"
	"math"
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
	// mount offset the track already carries) so that the nominal pattern's
	// boresight points where the transmitter was seen: true heading of the
	// boresight = track heading + NorthOffsetDeg, in (−180, 180].
	NorthOffsetDeg float64
	// SigmaDeg is the 1-sigma of NorthOffsetDeg: the alignment fit's sigma
	// (it carries the mismatch between the nominal and real patterns in
	// its residuals). Site errors of the calibration spot are not in it.
	SigmaDeg float64
	// Pattern is the measured pattern, relative to the corrected boresight,
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
// bearing.Calibrate with the nominal pattern, which fixes the boresight.
// The pooled sweep must cover at least 340° of the circle (the whole
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
	known := math.Mod(math.Mod(knownBearingDeg, 360)+360, 360)
	align, err := bearing.Fit(pts, nominal, fo)
	if err != nil {
		return nil, fmt.Errorf("calibrate on %s (%d bursts, %d readings): %w", key, bursts, len(pts), err)
	}
	pat, off, err := bearing.Calibrate(pts, known, nominal, bearing.CalibrateOptions{Fit: fo, Name: name})
	if err != nil {
		return nil, fmt.Errorf("calibrate on %s: %w", key, err)
	}
	return &Calibration{
		Ident: key, KnownBearingDeg: known, NorthOffsetDeg: off, SigmaDeg: align.SigmaDeg,
		Pattern: pat, Alignment: align, Bursts: bursts, Points: len(pts), Shape: Shape(pat),
	}, nil
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
