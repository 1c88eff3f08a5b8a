// Package units reads the quantities people type into flags and station
// files: a frequency with an SI prefix and a geographic position. It is
// the one parser of each grammar, below every package that takes such
// text (cmd, station), and imports nothing of nullseek.
package units

import (
	"errors"
	"fmt"
	"math"
	"regexp"
	"strconv"
	"strings"
)

// hzPattern is a decimal number (no hex, no inf/nan, no digit separators)
// and an optional unit.
var hzPattern = regexp.MustCompile(`^([+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?)\s*([A-Za-z]*)$`)

// ParseHz reads a frequency (or a sample rate, or an offset) in hertz:
// a decimal number with an optional SI prefix and optional "Hz", such as
// 144525000, 144.525M, 144.525MHz, 144.525 MHz, 12.5k, -12.5kHz, 2.4M,
// 1.2G. Prefixes (BIPM, The International System of Units, 9th edition
// 2019, table 7): k = 10³ (K is accepted too, as commonly written),
// M = 10⁶, G = 10⁹. "Hz" may be written in any case. A lowercase m is
// milli in the SI and is refused with a hint, since 144.525mHz almost
// always means MHz. The result is finite; its range is the caller's to
// check.
func ParseHz(s string) (float64, error) {
	bad := func(why string) (float64, error) {
		return 0, fmt.Errorf("frequency %q: %s (examples: 144.525MHz, 144.525M, 144525000, -12.5k)", s, why)
	}
	m := hzPattern.FindStringSubmatch(strings.TrimSpace(s))
	if m == nil {
		return bad("not a number with an optional k, M or G and Hz")
	}
	v, err := strconv.ParseFloat(m[1], 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return bad("not a finite number")
	}
	unit := m[2]
	if len(unit) >= 2 && strings.EqualFold(unit[len(unit)-2:], "hz") {
		unit = unit[:len(unit)-2]
	}
	mult := 1.0
	switch unit {
	case "":
	case "k", "K":
		mult = 1e3
	case "M":
		mult = 1e6
	case "G":
		mult = 1e9
	case "m":
		return bad("m is milli; write M for mega")
	default:
		return bad(fmt.Sprintf("unknown unit %q", m[2]))
	}
	return v * mult, nil
}

// HzFlag is ParseHz for the value s of the command-line flag --name,
// whose name the error gives; an empty value (the flag not given) is 0.
func HzFlag(name, s string) (float64, error) {
	if s == "" {
		return 0, nil
	}
	v, err := ParseHz(s)
	if err != nil {
		return 0, fmt.Errorf("--%s: %w", name, err)
	}
	return v, nil
}

// NonZeroFlag refuses 0 as the value v of the command-line flag --name,
// for flags whose 0 would silently mean "the default".
func NonZeroFlag(name string, v float64) error {
	if v == 0 {
		return fmt.Errorf("--%s 0: give a positive value", name)
	}
	return nil
}

// Axis says which coordinate a value is.
type axis int

const (
	latitude axis = iota
	longitude
)

func (a axis) String() string {
	if a == latitude {
		return "latitude"
	}
	return "longitude"
}

func (a axis) limit() float64 {
	if a == latitude {
		return 90
	}
	return 180
}

// ParseLatitude reads a latitude in degrees, north positive (WGS84 by
// convention); see ParseLatLon for the forms.
func ParseLatitude(s string) (float64, error) { return parseCoord(s, latitude) }

// ParseLongitude reads a longitude in degrees, east positive, within
// −180…180; see ParseLatLon for the forms.
func ParseLongitude(s string) (float64, error) { return parseCoord(s, longitude) }

// ParseLatLon reads a position "LAT,LON" or "LAT LON" in degrees (north
// and east positive). Each coordinate is decimal degrees (52.2424,
// -5.8672) or degrees, minutes and seconds (52:14:32.6, 52°14′32.6″,
// 52d14'32.6"), with either a sign or a hemisphere letter before or after
// it (52.2424N, S33.5, 5.8672 W), not both. Minutes and seconds lie in
// [0, 60). When both coordinates carry hemisphere letters they may come in
// either order (5.8672E 52.2424N), as GeographicLib's DMS::DecodeLatLon
// reads them. Latitude lies within ±90°, longitude within ±180°.
func ParseLatLon(s string) (lat, lon float64, err error) {
	parts := splitPair(s)
	if len(parts) != 2 {
		return 0, 0, fmt.Errorf("position %q: want LAT,LON (examples: 52.2424,5.8672 or 52:14:32.6N 5:52:01.9E)", s)
	}
	h0, h1 := hemisphere(parts[0]), hemisphere(parts[1])
	if (h0 == 'E' || h0 == 'W') && (h1 == 'N' || h1 == 'S') {
		parts[0], parts[1] = parts[1], parts[0]
	}
	if lat, err = parseCoord(parts[0], latitude); err != nil {
		return 0, 0, fmt.Errorf("position %q: %w", s, err)
	}
	if lon, err = parseCoord(parts[1], longitude); err != nil {
		return 0, 0, fmt.Errorf("position %q: %w", s, err)
	}
	return lat, lon, nil
}

// splitPair splits at a comma, or else at the whitespace that separates
// two coordinates (a hemisphere letter may stand apart: "52.1 N 5.8 E").
func splitPair(s string) []string {
	if a, b, ok := strings.Cut(s, ","); ok {
		return []string{strings.TrimSpace(a), strings.TrimSpace(b)}
	}
	f := strings.Fields(s)
	var out []string
	for i := 0; i < len(f); i++ {
		if len(out) > 0 && len(f[i]) == 1 && strings.ContainsAny(strings.ToUpper(f[i]), "NSEW") && hemisphere(out[len(out)-1]) == 0 {
			out[len(out)-1] += f[i]
			continue
		}
		out = append(out, f[i])
	}
	return out
}

// hemisphere returns the hemisphere letter of a coordinate, 0 for none.
func hemisphere(s string) byte {
	t := strings.ToUpper(strings.TrimSpace(s))
	if t == "" {
		return 0
	}
	for _, c := range []byte{t[0], t[len(t)-1]} {
		if c == 'N' || c == 'S' || c == 'E' || c == 'W' {
			return c
		}
	}
	return 0
}

var errCoordForm = errors.New("want decimal degrees or D:M:S / D°M′S″, with a sign or a hemisphere letter")

// parseCoord reads one coordinate of the given axis.
func parseCoord(s string, ax axis) (float64, error) {
	bad := func(err error) (float64, error) {
		return 0, fmt.Errorf("%s %q: %w", ax, s, err)
	}
	t := strings.TrimSpace(s)
	sign := 1.0
	if h := hemisphere(t); h != 0 {
		up := strings.ToUpper(t)
		if up[0] == h {
			t = t[1:]
		} else {
			t = t[:len(t)-1]
		}
		t = strings.TrimSpace(t)
		if (h == 'N' || h == 'S') != (ax == latitude) {
			return bad(fmt.Errorf("hemisphere %c belongs to a %s", h, map[bool]string{true: "latitude", false: "longitude"}[h == 'N' || h == 'S']))
		}
		if strings.HasPrefix(t, "-") || strings.HasPrefix(t, "+") {
			return bad(errors.New("give a sign or a hemisphere letter, not both"))
		}
		if h == 'S' || h == 'W' {
			sign = -1
		}
	}
	if strings.HasPrefix(t, "-") {
		sign, t = -sign, t[1:]
	} else if strings.HasPrefix(t, "+") {
		t = t[1:]
	}
	fields, err := dmsFields(t)
	if err != nil {
		return bad(err)
	}
	var v float64
	for i, f := range fields {
		x, err := strconv.ParseFloat(f, 64)
		if err != nil || !validNumber(f) {
			return bad(errCoordForm)
		}
		if i > 0 && !(x >= 0 && x < 60) {
			return bad(fmt.Errorf("%s %v is not in [0, 60)", []string{"", "minutes", "seconds"}[i], x))
		}
		if i < len(fields)-1 && strings.Contains(f, ".") {
			return bad(errors.New("only the last of degrees, minutes and seconds may have a fraction"))
		}
		v += x / math.Pow(60, float64(i))
	}
	v *= sign
	if !(math.Abs(v) <= ax.limit()) {
		return bad(fmt.Errorf("%v° is outside ±%v°", v, ax.limit()))
	}
	return v, nil
}

// dmsFields splits "52:14:32.6", "52°14′32.6″", "52d14'32.6\"" or "52.24"
// into its degree, minute and second numbers.
func dmsFields(t string) ([]string, error) {
	if t == "" {
		return nil, errCoordForm
	}
	if strings.Contains(t, ":") {
		f := strings.Split(t, ":")
		if len(f) > 3 {
			return nil, errCoordForm
		}
		return f, nil
	}
	var out []string
	rest := t
	for slot, marks := range [][]string{{"°", "d", "º"}, {"′", "'"}, {"″", "\""}} {
		for _, m := range marks {
			if i := strings.Index(rest, m); i >= 0 {
				if len(out) != slot { // seconds without minutes, or minutes without degrees
					return nil, errCoordForm
				}
				out = append(out, strings.TrimSpace(rest[:i]))
				rest = strings.TrimSpace(rest[i+len(m):])
				break
			}
		}
	}
	if rest != "" {
		out = append(out, rest)
	}
	if len(out) == 0 || len(out) > 3 {
		return nil, errCoordForm
	}
	return out, nil
}

var decimalPattern = regexp.MustCompile(`^(?:[0-9]+\.?[0-9]*|\.[0-9]+)$`)

// validNumber accepts plain unsigned decimals only (strconv would take
// "inf", "1e5", "0x10").
func validNumber(f string) bool { return decimalPattern.MatchString(f) }
