package survey

import (
	"fmt"
	"io"
	"math"
	"nullseek/internal/angle"
	"sort"
	"strconv"
	"strings"

	"nullseek/bearing"
	"nullseek/geo"
	"nullseek/heading"
	"nullseek/internal/units"
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

// WriteReport writes the calibration for a person: what was used, where
// the transmitter was seen with the nominal pattern (named nominal), the
// north offset (on top of the given mount offset), the measured pattern's
// shape, and the saved file at path carrying the total mount offset; how
// says where the known bearing came from.
func (cal *Calibration) WriteReport(w io.Writer, nominal string, total, given float64, how, path string) error {
	ew := &strings.Builder{}
	s := cal.Shape
	fmt.Fprintf(ew, "calibration transmitter  %s, known bearing %s\n", cal.Ident, how)
	fmt.Fprintf(ew, "used                     %d burst(s), %d level readings, sweep coverage %.0f°\n", cal.Bursts, cal.Points, cal.Alignment.CoverageDeg)
	fmt.Fprintf(ew, "seen at                  %.2f° ± %.2f° with the nominal pattern %q (fit residual %.2f dB)\n", cal.Alignment.BearingDeg, cal.Alignment.SigmaDeg, nominal, cal.Alignment.ResidualDB)
	fmt.Fprintf(ew, "north offset             %+.2f° ± %.2f° (1σ, level noise only) to the middle of the measured main lobe or null", cal.NorthOffsetDeg, cal.SigmaDeg)
	if given != 0 {
		fmt.Fprintf(ew, ", on top of --mount-offset %.2f", given)
	}
	fmt.Fprintln(ew)
	if cal.Pattern.Mode == bearing.Peak {
		fmt.Fprintf(ew, "measured pattern         peak, beamwidth %.1f° (−3 dB), front-to-back %.1f dB, deepest null %.1f dB\n", s.WidthDeg, s.FrontBackDB, s.NullDepthDB)
	} else {
		fmt.Fprintf(ew, "measured pattern         null, null depth %.1f dB, null width %.1f° (+3 dB)\n", s.NullDepthDB, s.WidthDeg)
	}
	for _, warn := range cal.Alignment.Warnings {
		// The nominal pattern is only the starting point: its misfit is
		// what calibration is for.
		fmt.Fprintf(ew, "nominal-pattern fit      %s\n", warn)
	}
	fmt.Fprintf(ew, "saved                    %s\n", path)
	fmt.Fprintf(ew, "heading names            %s\n", cal.Pattern.HeadingRef)
	fmt.Fprintf(ew, "use it                   nullseek bearing REC --antenna %s (it carries the mount offset %+.2f°; the same heading flags as here)\n", path, total)
	_, err := io.WriteString(w, ew.String())
	return err
}

// KnownBearing is where the calibration transmitter is, as calibrate's
// flags give it: its bearing from the station in degrees true
// (--known-bearing, as typed) or its position (--tx, as typed;
// units.ParseLatLon) with the station's (--station: as typed, and
// parsed).
type KnownBearing struct {
	Bearing, Tx, Station   string
	HasStation             bool
	StationLat, StationLon float64
}

// Degrees returns the bearing in degrees true [0, 360) and a description
// of where it came from: given, or the geodesic azimuth on the WGS84
// ellipsoid from the station to the transmitter (geo.Inverse).
func (k KnownBearing) Degrees() (float64, string, error) {
	switch {
	case k.Tx != "" && k.Bearing != "":
		return 0, "", fmt.Errorf("give --tx LAT,LON (with --station) or --known-bearing DEG, not both")
	case k.Bearing != "":
		v, err := strconv.ParseFloat(strings.TrimSpace(k.Bearing), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) || v < -360 || v > 360 {
			return 0, "", fmt.Errorf("--known-bearing %q: want degrees true, e.g. 123.4", k.Bearing)
		}
		v = angle.Wrap360(v)
		return v, fmt.Sprintf("%.2f° true (given)", v), nil
	case k.Tx != "":
		txLat, txLon, err := units.ParseLatLon(k.Tx)
		if err != nil {
			return 0, "", fmt.Errorf("--tx: %w", err)
		}
		if !k.HasStation {
			return 0, "", fmt.Errorf("--tx needs the station's position too: --station LAT,LON")
		}
		dist, az, _ := geo.Inverse(k.StationLat, k.StationLon, txLat, txLon)
		if math.IsNaN(az) || !(dist >= 1) {
			return 0, "", fmt.Errorf("--tx %s and --station %s are the same place: no bearing between them", k.Tx, k.Station)
		}
		az = angle.Wrap360(az)
		if az >= 360 {
			az = 0
		}
		return az, fmt.Sprintf("%.2f° true, %.0f m from the station (geodesic, WGS84)", az, dist), nil
	}
	return 0, "", fmt.Errorf("calibrate needs the transmitter's bearing: --tx LAT,LON with --station LAT,LON, or --known-bearing DEG")
}
