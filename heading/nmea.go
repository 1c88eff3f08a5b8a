package heading

import (
	"errors"
	"fmt"
	"nullseek/internal/angle"
	"nullseek/internal/nmea"
	"strconv"
)

// NMEA 0183 limits (sentence length and checksum, as restated in gpsd
// www/NMEA.adoc, ntpsec/gpsd @46977fa).
const (
	// MaxNMEALen is the longest sentence in bytes including '$' and CR LF.
	MaxNMEALen = nmea.MaxLen
)

// Errors a caller may want to tell apart (test with errors.Is).
var (
	// ErrNMEAChecksum: the *hh checksum does not match the sentence.
	ErrNMEAChecksum = nmea.ErrChecksum
	// ErrNMEANoChecksum: the sentence has no *hh checksum.
	ErrNMEANoChecksum = nmea.ErrNoChecksum
	// ErrNMEAUnsupported: a well-formed sentence that carries no heading
	// this package reads (anything but HDT, HDM, HDG).
	ErrNMEAUnsupported = errors.New("NMEA sentence type carries no heading")
)

// Reading is the heading content of one NMEA sentence. All angles are
// degrees; headings are in [0, 360), deviation and variation are signed
// with east positive.
type Reading struct {
	// Talker is the two-character talker ID ("GP", "HC", "HE", ...).
	Talker string
	// Type is the sentence formatter: "HDT", "HDM" or "HDG".
	Type string
	// TrueDeg is the true heading; valid when HasTrue.
	TrueDeg float64
	HasTrue bool
	// MagDeg is the magnetic heading; valid when HasMag.
	MagDeg float64
	HasMag bool
	// SensorDeg is HDG field 1, the raw magnetic sensor heading (HDG only).
	SensorDeg float64
	// DeviationDeg is HDG fields 2–3, east positive; valid when HasDeviation.
	DeviationDeg float64
	HasDeviation bool
	// VariationDeg is HDG fields 4–5, east positive; valid when HasVariation.
	VariationDeg float64
	HasVariation bool
}

// Heading returns the reading's heading measured from ref, and false when
// the sentence does not carry that reference (an HDM, or an HDG without
// variation, has no true heading).
func (r Reading) Heading(ref Ref) (float64, bool) {
	switch ref {
	case True:
		return r.TrueDeg, r.HasTrue
	case Magnetic:
		return r.MagDeg, r.HasMag
	}
	return 0, false
}

// NMEAChecksum returns the NMEA 0183 checksum of body, the characters
// between '$' and '*': the 8-bit XOR of all of them (nmea.Checksum).
func NMEAChecksum(body string) byte { return nmea.Checksum(body) }

// ParseNMEA parses one NMEA 0183 heading sentence: $--HDT (true heading),
// $--HDM (magnetic heading) or $--HDG (sensor heading, deviation,
// variation), with any two-character talker ID. Trailing CR/LF and spaces
// are ignored.
//
// Rules: the sentence must start with '$', be at most MaxNMEALen bytes
// counting a CR LF ending, contain only printable ASCII and carry a *hh
// checksum that matches (hex digits of either case). A sentence without a
// checksum is rejected with ErrNMEANoChecksum: a heading corrupted on a
// noisy serial line would otherwise pass as valid (the readers have an
// option to accept them). Extra trailing fields, as later NMEA versions may
// add, are ignored. Headings must lie in [0, 360] (360 is read as 0).
//
// HDG follows the field order of NMEA 0183 (quoted in gpsd
// drivers/driver_nmea0183.c processHDG, 3.22): 1 sensor
// heading, 2 deviation, 3 E/W, 4 variation, 5 E/W. Magnetic = sensor +
// deviation (east positive; an empty deviation is taken as 0, meaning the
// sensor heading is already magnetic). True = magnetic + variation, given
// only when the variation field is present.
func ParseNMEA(line string) (Reading, error) {
	return parseNMEA(line, true)
}

func parseNMEA(line string, requireChecksum bool) (Reading, error) {
	var r Reading
	sen, err := nmea.Split(line, requireChecksum)
	if err != nil {
		return r, err
	}
	addr := sen.Talker + sen.Type
	r.Talker, r.Type = sen.Talker, sen.Type
	f := sen.Fields
	need := map[string]int{"HDT": 2, "HDM": 2, "HDG": 5}[r.Type]
	if need == 0 {
		return r, fmt.Errorf("%w: %s", ErrNMEAUnsupported, addr)
	}
	if len(f) < need {
		return r, fmt.Errorf("NMEA %s has %d fields, want %d", r.Type, len(f), need)
	}
	switch r.Type {
	case "HDT", "HDM":
		unit := r.Type[2:] // "T" or "M"
		if f[1] != unit {
			return r, fmt.Errorf("NMEA %s field 2 is %q, want %q", r.Type, f[1], unit)
		}
		deg, err := nmeaHeading(f[0])
		if err != nil {
			return r, fmt.Errorf("NMEA %s heading: %w", r.Type, err)
		}
		if unit == "T" {
			r.TrueDeg, r.HasTrue = deg, true
		} else {
			r.MagDeg, r.HasMag = deg, true
		}
	case "HDG":
		if r.SensorDeg, err = nmeaHeading(f[0]); err != nil {
			return r, fmt.Errorf("NMEA HDG sensor heading (field 1): %w", err)
		}
		if r.DeviationDeg, r.HasDeviation, err = nmeaSigned(f[1], f[2]); err != nil {
			return r, fmt.Errorf("NMEA HDG deviation (fields 2-3): %w", err)
		}
		if r.VariationDeg, r.HasVariation, err = nmeaSigned(f[3], f[4]); err != nil {
			return r, fmt.Errorf("NMEA HDG variation (fields 4-5): %w", err)
		}
		r.MagDeg, r.HasMag = angle.Wrap360(r.SensorDeg+r.DeviationDeg), true
		if r.HasVariation {
			r.TrueDeg, r.HasTrue = angle.Wrap360(r.MagDeg+r.VariationDeg), true
		}
	}
	return r, nil
}

// nmeaHeading parses a heading field: a plain decimal in [0, 360].
func nmeaHeading(s string) (float64, error) {
	if s == "" {
		return 0, errors.New("empty (sensor not ready)")
	}
	if !nmea.IsDecimal(s) {
		return 0, fmt.Errorf("%q is not a decimal number", s)
	}
	return parseHeadingDeg(s)
}

// nmeaSigned parses a magnitude with an E/W hemisphere field; both empty
// means absent.
func nmeaSigned(v, hemi string) (float64, bool, error) {
	if v == "" && hemi == "" {
		return 0, false, nil
	}
	if v == "" {
		return 0, false, fmt.Errorf("direction %q without a value", hemi)
	}
	if !nmea.IsDecimal(v) {
		return 0, false, fmt.Errorf("%q is not a decimal number", v)
	}
	x, err := strconv.ParseFloat(v, 64)
	if err != nil || x > 180 {
		return 0, false, fmt.Errorf("%q is not an angle in [0, 180]", v)
	}
	switch hemi {
	case "E":
		return x, true, nil
	case "W":
		return -x, true, nil
	}
	return 0, false, fmt.Errorf("direction %q is not E or W", hemi)
}
