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
// its heading source (bearing.Calibration), with the transmitter and
// bursts it was measured on.
type Calibration struct {
	bearing.Calibration
	// Ident is the transmitter whose bursts were used; Bursts how many.
	Ident  string
	Bursts int
}

// Calibrate measures the antenna's pattern and the heading source's north
// offset from the bursts of one transmitter at a known bearing
// (knownBearingDeg, degrees true): the level readings of all its bursts are
// joined with track (Points), pooled, and handed to bearing.MeasureAntenna
// with the nominal pattern; the noise floor is the bursts' median when
// opts.Fit has none. The pooled sweep must cover at least 340° of the
// circle (the whole pattern is measured). Errors say which transmitter and
// why.
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
		p := Points(r.Level, track)
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
	name := opts.Name
	if name == "" {
		name = "calibrated"
	}
	cal, err := bearing.MeasureAntenna(pts, angle.Wrap360(knownBearingDeg), nominal, bearing.CalibrateOptions{Fit: fo, Name: name})
	if err != nil {
		return nil, fmt.Errorf("calibrate on %s (%d bursts, %d readings): %w", key, bursts, len(pts), err)
	}
	return &Calibration{Calibration: *cal, Ident: key, Bursts: bursts}, nil
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

// CalibrationLine is the `"type":"calibration"` JSON line of calibrate. A
// value that is not finite is written as null and named in a warning.
type CalibrationLine struct {
	Type                string   `json:"type"`
	Ident               string   `json:"ident"`
	KnownBearingDeg     *float64 `json:"known_bearing_deg"`
	KnownBearingSource  string   `json:"known_bearing_source"`
	SeenBearingDeg      *float64 `json:"seen_bearing_deg"`
	SeenSigmaDeg        *float64 `json:"seen_sigma_deg"`
	NorthOffsetDeg      *float64 `json:"north_offset_deg"`
	NorthOffsetSigmaDeg *float64 `json:"north_offset_sigma_deg"`
	GivenMountOffsetDeg *float64 `json:"given_mount_offset_deg"`
	MountOffsetDeg      *float64 `json:"mount_offset_deg"`
	HeadingRef          string   `json:"heading_ref"`
	BurstsUsed          int      `json:"bursts_used"`
	PointsUsed          int      `json:"points_used"`
	CoverageDeg         *float64 `json:"coverage_deg"`
	Mode                string   `json:"mode"`
	WidthDeg            *float64 `json:"width_deg"`
	NullDepthDB         *float64 `json:"null_depth_db"`
	FrontBackDB         *float64 `json:"front_back_db,omitempty"`
	PatternFile         string   `json:"pattern_file"`
	NominalFitWarnings  []string `json:"nominal_fit_warnings,omitempty"`
	Warnings            []string `json:"warnings,omitempty"`
}

// Line is the calibration's JSON line: total is the mount offset saved
// with the pattern (given plus the north offset), how says where the known
// bearing came from, path where the pattern was saved.
func (c *Calibration) Line(total, given float64, how, path string) CalibrationLine {
	var j jsonNums
	l := CalibrationLine{Type: "calibration", Ident: c.Ident, KnownBearingDeg: j.num("known_bearing_deg", c.KnownBearingDeg, 4),
		KnownBearingSource: how, SeenBearingDeg: j.num("seen_bearing_deg", c.Alignment.BearingDeg, 3),
		SeenSigmaDeg: j.num("seen_sigma_deg", c.Alignment.SigmaDeg, 3), NorthOffsetDeg: j.num("north_offset_deg", c.NorthOffsetDeg, 3),
		NorthOffsetSigmaDeg: j.num("north_offset_sigma_deg", c.SigmaDeg, 3), GivenMountOffsetDeg: j.num("given_mount_offset_deg", given, 3),
		MountOffsetDeg: j.num("mount_offset_deg", total, 3), HeadingRef: c.Pattern.HeadingRef, BurstsUsed: c.Bursts, PointsUsed: c.Points,
		CoverageDeg: j.num("coverage_deg", c.Alignment.CoverageDeg, 1), Mode: c.Pattern.Mode.String(),
		WidthDeg: j.num("width_deg", c.Shape.WidthDeg, 2), NullDepthDB: j.num("null_depth_db", c.Shape.NullDepthDB, 2),
		PatternFile: path, NominalFitWarnings: c.Alignment.Warnings}
	if c.Pattern.Mode == bearing.Peak {
		l.FrontBackDB = j.num("front_back_db", c.Shape.FrontBackDB, 2)
	}
	if w := j.warning(); w != "" {
		l.Warnings = append(l.Warnings, w)
	}
	return l
}
