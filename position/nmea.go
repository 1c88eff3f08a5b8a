package position

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"

	"nullseek/internal/nmea"
)

// ErrNMEAOther: a well-formed NMEA sentence that is neither GGA nor RMC.
var ErrNMEAOther = errors.New("NMEA sentence is neither GGA nor RMC")

// GGA is the content of one $--GGA sentence (Global Positioning System Fix
// Data). Field numbers follow NMEA 0183 as published in gpsd's
// www/NMEA.adoc (gpsd 3.22): 1 UTC time hhmmss.ss, 2–3 latitude ddmm.mm
// N/S, 4–5 longitude dddmm.mm E/W, 6 fix quality, 7 satellites in use,
// 8 HDOP, 9–10 altitude above mean sea level and "M", 11–12 geoid
// separation (geoid above the WGS84 ellipsoid) and "M", 13 age of
// differential data, 14 differential station ID.
type GGA struct {
	Talker string
	// TimeOfDay is field 1 as a duration since 00:00 UTC; HasTime is
	// false only for a no-fix GGA with an empty time (receivers send
	// "$GPGGA,,,,,,0,00,99.99,,,,,,*48" before their first fix).
	TimeOfDay time.Duration
	HasTime   bool
	// Quality is field 6: 0 no fix, 1 GPS, 2 DGPS, 3 PPS, 4 RTK fixed,
	// 5 RTK float, 6 estimated (dead reckoning), 7 manual input,
	// 8 simulation.
	Quality int
	// LatDeg, LonDeg are set when HasPos (always when Quality > 0).
	LatDeg, LonDeg float64
	HasPos         bool
	Satellites     int
	HDOP           *float64
	AltMSLM        *float64
	GeoidSepM      *float64
}

// RMC is the content of one $--RMC sentence (Recommended Minimum Specific
// GNSS Data): 1 UTC time, 2 status A valid / V warning, 3–4 latitude,
// 5–6 longitude, 7 speed over ground in knots, 8 track made good in
// degrees true, 9 date ddmmyy, 10–11 magnetic variation, 12 mode
// indicator (NMEA 2.3 and later: A autonomous, D differential,
// E estimated, M manual, S simulator, N not valid), 13 navigational
// status (NMEA 4.1).
type RMC struct {
	Talker string
	// Time is fields 9 and 1 together, UTC. Two-digit years 80–99 are
	// 1980–1999, 00–79 are 2000–2079 (a pivot is common practice; the
	// standard gives only two digits). HasTime is false only for a status
	// V sentence with an empty time or date ("$GPRMC,,V,,,,,,,,,,N*53").
	Time    time.Time
	HasTime bool
	// Valid is status A with a mode indicator, if present, other than N,
	// M or S.
	Valid          bool
	Status         byte
	ModeIndicator  byte // 0 when the field is absent (before NMEA 2.3)
	LatDeg, LonDeg float64
	HasPos         bool
}

// ParseGGA parses one GGA sentence from any talker (GP, GN, GL, GA, BD,
// GB, GQ, …). The checksum is required (nmea.Split).
func ParseGGA(line string) (GGA, error) {
	var g GGA
	s, err := nmea.Split(line, true)
	if err != nil {
		return g, err
	}
	if s.Type != "GGA" {
		return g, fmt.Errorf("%w: %s%s", ErrNMEAOther, s.Talker, s.Type)
	}
	g.Talker = s.Talker
	f := s.Fields
	if len(f) < 14 {
		return g, fmt.Errorf("NMEA GGA has %d fields, want 14", len(f))
	}
	if g.Quality, err = smallInt(f[5], 8); err != nil {
		return g, fmt.Errorf("NMEA GGA fix quality (field 6): %w", err)
	}
	if f[0] != "" || g.Quality != 0 {
		if g.TimeOfDay, err = timeOfDay(f[0]); err != nil {
			return g, fmt.Errorf("NMEA GGA time (field 1): %w", err)
		}
		g.HasTime = true
	}
	if g.LatDeg, g.LonDeg, g.HasPos, err = latLon(f[1], f[2], f[3], f[4]); err != nil {
		return g, fmt.Errorf("NMEA GGA (fields 2-5): %w", err)
	}
	if g.Quality > 0 && !g.HasPos {
		return g, fmt.Errorf("NMEA GGA fix quality %d without a position", g.Quality)
	}
	if f[6] != "" {
		if g.Satellites, err = smallInt(f[6], 999); err != nil {
			return g, fmt.Errorf("NMEA GGA satellites (field 7): %w", err)
		}
	}
	if g.HDOP, err = optDecimal(f[7], false); err != nil {
		return g, fmt.Errorf("NMEA GGA HDOP (field 8): %w", err)
	}
	if g.AltMSLM, err = optMetres(f[8], f[9]); err != nil {
		return g, fmt.Errorf("NMEA GGA altitude (fields 9-10): %w", err)
	}
	if g.GeoidSepM, err = optMetres(f[10], f[11]); err != nil {
		return g, fmt.Errorf("NMEA GGA geoid separation (fields 11-12): %w", err)
	}
	return g, nil
}

// ParseRMC parses one RMC sentence from any talker. The checksum is
// required.
func ParseRMC(line string) (RMC, error) {
	var r RMC
	s, err := nmea.Split(line, true)
	if err != nil {
		return r, err
	}
	if s.Type != "RMC" {
		return r, fmt.Errorf("%w: %s%s", ErrNMEAOther, s.Talker, s.Type)
	}
	r.Talker = s.Talker
	f := s.Fields
	if len(f) < 11 {
		return r, fmt.Errorf("NMEA RMC has %d fields, want at least 11", len(f))
	}
	switch f[1] {
	case "A", "V":
		r.Status = f[1][0]
	default:
		return r, fmt.Errorf("NMEA RMC status (field 2) %q is not A or V", f[1])
	}
	if r.LatDeg, r.LonDeg, r.HasPos, err = latLon(f[2], f[3], f[4], f[5]); err != nil {
		return r, fmt.Errorf("NMEA RMC (fields 3-6): %w", err)
	}
	if r.Status == 'A' || f[0] != "" && f[8] != "" {
		tod, err := timeOfDay(f[0])
		if err != nil {
			return r, fmt.Errorf("NMEA RMC time (field 1): %w", err)
		}
		day, err := date(f[8])
		if err != nil {
			return r, fmt.Errorf("NMEA RMC date (field 9): %w", err)
		}
		r.Time, r.HasTime = day.Add(tod), true
	}
	if len(f) >= 12 && f[11] != "" {
		if len(f[11]) != 1 || !strings.Contains("ADEMSNFPR", f[11]) {
			return r, fmt.Errorf("NMEA RMC mode indicator (field 12) %q is not one of A D E M S N F P R", f[11])
		}
		r.ModeIndicator = f[11][0]
	}
	r.Valid = r.Status == 'A' && !strings.ContainsRune("NMS", rune(r.ModeIndicator))
	if r.Valid && !r.HasPos {
		return r, errors.New("NMEA RMC status A without a position")
	}
	return r, nil
}

// timeOfDay reads hhmmss or hhmmss.s… (UTC). Second 60 (a leap second) is
// accepted and carries into the next minute.
func timeOfDay(s string) (time.Duration, error) {
	if len(s) < 6 || !nmea.IsDecimal(s) || strings.IndexByte(s, '.') >= 0 && strings.IndexByte(s, '.') != 6 {
		return 0, fmt.Errorf("%q is not hhmmss[.ss]", s)
	}
	h, _ := strconv.Atoi(s[0:2])
	m, _ := strconv.Atoi(s[2:4])
	sec, _ := strconv.Atoi(s[4:6])
	if h > 23 || m > 59 || sec > 60 {
		return 0, fmt.Errorf("%q is not a time of day", s)
	}
	d := time.Duration(h)*time.Hour + time.Duration(m)*time.Minute + time.Duration(sec)*time.Second
	if len(s) > 7 {
		frac := s[7:]
		if len(frac) > 9 {
			frac = frac[:9]
		}
		ns, _ := strconv.Atoi(frac + strings.Repeat("0", 9-len(frac)))
		d += time.Duration(ns)
	}
	return d, nil
}

// date reads ddmmyy as midnight UTC.
func date(s string) (time.Time, error) {
	if len(s) != 6 || !nmea.IsDecimal(s) || strings.IndexByte(s, '.') >= 0 {
		return time.Time{}, fmt.Errorf("%q is not ddmmyy", s)
	}
	d, _ := strconv.Atoi(s[0:2])
	m, _ := strconv.Atoi(s[2:4])
	y, _ := strconv.Atoi(s[4:6])
	if y >= 80 {
		y += 1900
	} else {
		y += 2000
	}
	t := time.Date(y, time.Month(m), d, 0, 0, 0, 0, time.UTC)
	if t.Day() != d || int(t.Month()) != m {
		return time.Time{}, fmt.Errorf("%q is not a date", s)
	}
	return t, nil
}

// latLon reads NMEA's ddmm.mm,N/S and dddmm.mm,E/W into signed degrees;
// all four empty means no position.
func latLon(lat, ns, lon, ew string) (latDeg, lonDeg float64, ok bool, err error) {
	if lat == "" && ns == "" && lon == "" && ew == "" {
		return 0, 0, false, nil
	}
	if latDeg, err = degMin(lat, 90); err != nil {
		return 0, 0, false, fmt.Errorf("latitude: %w", err)
	}
	if lonDeg, err = degMin(lon, 180); err != nil {
		return 0, 0, false, fmt.Errorf("longitude: %w", err)
	}
	switch ns {
	case "N":
	case "S":
		latDeg = -latDeg
	default:
		return 0, 0, false, fmt.Errorf("latitude hemisphere %q is not N or S", ns)
	}
	switch ew {
	case "E":
	case "W":
		lonDeg = -lonDeg
	default:
		return 0, 0, false, fmt.Errorf("longitude hemisphere %q is not E or W", ew)
	}
	return latDeg, lonDeg, true, nil
}

// degMin reads degrees and decimal minutes run together (ddmm.mm): the
// digits before the last two of the integer part are degrees.
func degMin(s string, maxDeg float64) (float64, error) {
	if !nmea.IsDecimal(s) {
		return 0, fmt.Errorf("%q is not ddmm.mm", s)
	}
	ip := s
	if i := strings.IndexByte(s, '.'); i >= 0 {
		ip = s[:i]
	}
	if len(ip) < 3 {
		return 0, fmt.Errorf("%q is not ddmm.mm", s)
	}
	deg, err := strconv.ParseFloat(ip[:len(ip)-2], 64)
	if err != nil {
		return 0, fmt.Errorf("%q is not ddmm.mm", s)
	}
	min, err := strconv.ParseFloat(s[len(ip)-2:], 64)
	if err != nil || min >= 60 {
		return 0, fmt.Errorf("%q has minutes of 60 or more", s)
	}
	v := deg + min/60
	if v > maxDeg {
		return 0, fmt.Errorf("%q is beyond %v°", s, maxDeg)
	}
	return v, nil
}

func smallInt(s string, maxV int) (int, error) {
	if s == "" || len(s) > 3 || !nmea.IsDecimal(s) || strings.IndexByte(s, '.') >= 0 {
		return 0, fmt.Errorf("%q is not a whole number", s)
	}
	v, _ := strconv.Atoi(s)
	if v > maxV {
		return 0, fmt.Errorf("%d is more than %d", v, maxV)
	}
	return v, nil
}

// optDecimal reads an optional decimal; signed allows a leading '-'.
func optDecimal(s string, signed bool) (*float64, error) {
	if s == "" {
		return nil, nil
	}
	neg := false
	if signed && strings.HasPrefix(s, "-") {
		neg, s = true, s[1:]
	}
	if !nmea.IsDecimal(s) {
		return nil, fmt.Errorf("%q is not a decimal number", s)
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || v > 1e6 {
		return nil, fmt.Errorf("%q is out of range", s)
	}
	if neg {
		v = -v
	}
	return &v, nil
}

// optMetres reads a signed value with its unit field, which must be "M".
func optMetres(v, unit string) (*float64, error) {
	if v == "" {
		return nil, nil
	}
	if unit != "M" {
		return nil, fmt.Errorf("unit %q is not M", unit)
	}
	return optDecimal(v, true)
}
