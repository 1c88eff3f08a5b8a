// Package station reads a station file: one small TOML file (TOML v1.0.0,
// through github.com/pelletier/go-toml/v2) that names a bearing station
// and says everything the commands would otherwise repeat as flags — its
// position, antenna, receiver, channels with their expected identifiers,
// heading source and database. testdata/station/kestrel-ridge.toml is the
// documented example.
//
// Parsing is strict: an unknown key, a value of the wrong type or out of
// range is one error naming the file, the line and the key (Error). Paths
// in the file are relative to the file's directory. Frequencies take the
// forms of units.ParseHz (a TOML string "144.525MHz" or a number of hertz),
// positions those of units.ParseLatLon.
//
// Conventions: angles in degrees; the mount offset is degrees clockwise
// from the heading sensor's reference direction to the antenna's reference
// direction (main lobe or null), so antenna heading = sensor heading +
// offset, as in heading.Track; declination east positive.
package station

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"net"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"unicode"

	toml "github.com/pelletier/go-toml/v2"

	"nullseek/heading"
	"nullseek/internal/units"
)

// File is a parsed and validated station file.
type File struct {
	// Path is the file read; relative paths below are resolved against
	// its directory.
	Path string
	// Name names the station in tables, CSVs and fixes.
	Name string
	// Database is the SQLite store's path.
	Database string
	Position Position
	Antenna  Antenna
	Receiver Receiver
	Channels []Channel
	Heading  Heading
	// Warnings are things that are allowed but worth saying (AGC on).
	Warnings []string
}

// Position sources.
const (
	PositionFixed = "fixed"
	PositionGPSD  = "gpsd"
	PositionNMEA  = "nmea"
)

// Position says where the station is.
type Position struct {
	// Source is PositionFixed, PositionGPSD or PositionNMEA.
	Source string
	// HasLatLon says LatDeg and LonDeg are set (always for a fixed
	// station; optional for a moving one, as a starting point).
	HasLatLon      bool
	LatDeg, LonDeg float64
	// AltM is metres above the WGS84 ellipsoid, nil when not given.
	AltM *float64
	// DeclinationDeg (east positive) overrides the magnetic model; nil
	// when not given.
	DeclinationDeg *float64
	// GPSD is gpsd's HOST:PORT (Source gpsd); NMEA the GGA/RMC feed
	// (Source nmea: tcp://HOST:PORT, udp://[HOST]:PORT or
	// serial:DEVICE[@BAUD]).
	GPSD, NMEA string
}

// Antenna kinds.
const (
	AntennaLoop    = "loop"
	AntennaYagi    = "yagi"
	AntennaBody    = "body"
	AntennaPattern = "pattern"
)

// Antenna is the direction-finding antenna.
type Antenna struct {
	// Kind is AntennaLoop, AntennaYagi, AntennaBody or AntennaPattern.
	Kind string
	// PatternFile is a measured pattern (calibrate's output), required for
	// AntennaPattern; "" otherwise.
	PatternFile string
	// MountOffsetDeg: see the package comment; in (−360, 360).
	MountOffsetDeg float64
}

// Receiver is the SDR.
type Receiver struct {
	// Source is "rtl_tcp://HOST:PORT" or "usb:INDEX" as written; RTLTCP is
	// HOST:PORT for the first, USBIndex the index for the second (−1
	// otherwise).
	Source   string
	RTLTCP   string
	USBIndex int
	// SampleRateHz is within librtlsdr's accepted ranges.
	SampleRateHz float64
	// CentreHz is the tuning frequency; 0 when not given (the command
	// chooses it from the channels).
	CentreHz float64
	// GainDB is the fixed tuner gain; AGC turns automatic gain on instead
	// (allowed, with a warning: it distorts level readings).
	GainDB float64
	AGC    bool
	// PPM is the crystal correction.
	PPM int
}

// Channel is one frequency to listen on.
type Channel struct {
	FreqHz float64
	// Mode is "auto", "fm", "am" or "cw".
	Mode string
	// IDs are the identifiers expected on the channel.
	IDs []string
}

// Heading sources.
const (
	HeadingRotator = "rotator"
	HeadingCompass = "compass"
	HeadingLog     = "log"
)

// Heading says where the antenna's heading comes from.
type Heading struct {
	// Source is HeadingRotator, HeadingCompass or HeadingLog.
	Source string
	// Reference is "true" or "magnetic": the north the source measures
	// from.
	Reference string
	// Rotator is rotctld's HOST:PORT; the antenna sweeps from
	// SweepFromDeg to SweepToDeg (rotctld azimuths, −180…450),
	// continuously when StepDeg is 0, else in steps of StepDeg waiting
	// DwellS at each.
	Rotator                  string
	SweepFromDeg, SweepToDeg float64
	StepDeg, DwellS          float64
	// Compass is an NMEA 0183 heading feed (tcp://, udp://, serial:).
	Compass string
	// Log is a heading log file.
	Log string
	// LagS is how late the heading stamps are, in seconds (heading.Track.LagS:
	// positive when the heading source reports late).
	LagS float64
}

// Error is one problem in a station file: where (Line 0 when it is not
// one key's) and what.
type Error struct {
	File string
	Line int
	Key  string
	Msg  string
}

func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
	}
	if e.Key != "" {
		b.WriteString(": " + e.Key)
	}
	b.WriteString(": " + e.Msg)
	return b.String()
}

// raw is the file as TOML has it. Frequencies are any: a string with a
// unit or a number of hertz.
type raw struct {
	Name     string `toml:"name"`
	Database string `toml:"database"`
	Position struct {
		Source         string   `toml:"source"`
		LatLon         string   `toml:"lat_lon"`
		AltM           *float64 `toml:"alt_m"`
		DeclinationDeg *float64 `toml:"declination_deg"`
		GPSD           string   `toml:"gpsd"`
		NMEA           string   `toml:"nmea"`
	} `toml:"position"`
	Antenna struct {
		Kind           string  `toml:"kind"`
		PatternFile    string  `toml:"pattern_file"`
		MountOffsetDeg float64 `toml:"mount_offset_deg"`
	} `toml:"antenna"`
	Receiver struct {
		Source     string   `toml:"source"`
		SampleRate any      `toml:"sample_rate"`
		Centre     any      `toml:"centre"`
		GainDB     *float64 `toml:"gain_db"`
		AGC        bool     `toml:"agc"`
		PPM        int      `toml:"ppm"`
	} `toml:"receiver"`
	Channel []struct {
		Freq any      `toml:"freq"`
		Mode string   `toml:"mode"`
		IDs  []string `toml:"ids"`
	} `toml:"channel"`
	Heading struct {
		Source       string   `toml:"source"`
		Reference    string   `toml:"reference"`
		Rotator      string   `toml:"rotator"`
		SweepFromDeg *float64 `toml:"sweep_from_deg"`
		SweepToDeg   *float64 `toml:"sweep_to_deg"`
		StepDeg      float64  `toml:"step_deg"`
		DwellS       float64  `toml:"dwell_s"`
		Compass      string   `toml:"compass"`
		Log          string   `toml:"log"`
		LagS         float64  `toml:"lag_s"`
	} `toml:"heading"`
}

// MaxFileBytes bounds a station file; a real one is about 2 kB.
const MaxFileBytes = 1 << 20

// Load reads and validates the station file at path.
func Load(path string) (*File, error) {
	fi, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("station file: %w", err)
	}
	if fi.Size() > MaxFileBytes {
		return nil, &Error{File: path, Msg: fmt.Sprintf("%d bytes is too large for a station file (at most %d)", fi.Size(), MaxFileBytes)}
	}
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("station file: %w", err)
	}
	return Parse(data, path)
}

// Parse validates a station file's contents; path names it in errors and
// is the base of its relative paths.
func Parse(data []byte, path string) (*File, error) {
	var r raw
	dec := toml.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&r); err != nil {
		return nil, decodeError(path, err)
	}
	lines := keyLines(data)
	v := &validator{path: path, dir: filepath.Dir(path), lines: lines}
	f := v.file(&r)
	if v.err != nil {
		return nil, v.err
	}
	return f, nil
}

var mismatch = regexp.MustCompile(`cannot decode TOML (\w+) into .* of type (\S+)$`)

// decodeError turns the TOML library's error into one Error line.
func decodeError(path string, err error) error {
	var sm *toml.StrictMissingError
	if errors.As(err, &sm) && len(sm.Errors) > 0 {
		e := sm.Errors[0]
		line, _ := e.Position()
		msg := "unknown key: check its spelling and its [table] against the example station file"
		if n := len(sm.Errors) - 1; n > 0 {
			msg += fmt.Sprintf(" (and %d more unknown key(s))", n)
		}
		return &Error{File: path, Line: line, Key: strings.Join(e.Key(), "."), Msg: msg}
	}
	var de *toml.DecodeError
	if errors.As(err, &de) {
		line, _ := de.Position()
		msg := strings.TrimPrefix(de.Error(), "toml: ")
		if m := mismatch.FindStringSubmatch(msg); m != nil {
			msg = fmt.Sprintf("a TOML %s where %s is wanted", m[1], goTypeWord(m[2]))
		}
		return &Error{File: path, Line: line, Key: strings.Join(de.Key(), "."), Msg: msg}
	}
	return &Error{File: path, Msg: strings.TrimPrefix(err.Error(), "toml: ")}
}

func goTypeWord(t string) string {
	switch strings.TrimPrefix(t, "*") {
	case "float64":
		return "a number"
	case "int":
		return "a whole number"
	case "string":
		return "a string"
	case "bool":
		return "true or false"
	case "[]string":
		return `a list of strings, like ["N0CALL/1", "N0CALL/2"]`
	}
	if strings.HasPrefix(t, "struct") {
		return "a [table]"
	}
	if strings.HasPrefix(t, "[]struct") {
		return "a [[table]] list"
	}
	return t
}

// validator checks raw values; the first problem sticks.
type validator struct {
	path, dir string
	lines     map[string]int
	err       error
}

// fail records the first problem at key ("table.key" or
// "channel[1].freq"; the line is found from the key, or from its table).
func (v *validator) fail(key, format string, args ...any) {
	if v.err != nil {
		return
	}
	line := v.lines[key]
	for k := key; line == 0 && k != ""; {
		i := strings.LastIndexByte(k, '.')
		if i < 0 {
			break
		}
		k = k[:i]
		line = v.lines[k]
	}
	v.err = &Error{File: v.path, Line: line, Key: key, Msg: fmt.Sprintf(format, args...)}
}

func (v *validator) has(key string) bool { _, ok := v.lines[key]; return ok }

func (v *validator) resolve(p string) string {
	if p == "" || filepath.IsAbs(p) {
		return p
	}
	return filepath.Join(v.dir, p)
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// num prints a frequency or rate in plain digits (146000000, not 1.46e+08).
func num(x float64) string { return strconv.FormatFloat(x, 'f', -1, 64) }

// hz reads a frequency value (string with units, or a number of hertz).
func (v *validator) hz(key string, x any) (float64, bool) {
	var f float64
	switch t := x.(type) {
	case string:
		h, err := units.ParseHz(t)
		if err != nil {
			v.fail(key, "%v", err)
			return 0, false
		}
		f = h
	case int64:
		f = float64(t)
	case float64:
		f = t
	default:
		v.fail(key, `want a frequency: a string with units ("144.525MHz") or a number of hertz`)
		return 0, false
	}
	if !finite(f) {
		v.fail(key, "%v is not a finite frequency", f)
		return 0, false
	}
	return f, true
}

// hostPort checks HOST:PORT with a port 1–65535 and a non-empty host.
func hostPort(s string) error {
	host, port, err := net.SplitHostPort(s)
	if err != nil {
		return fmt.Errorf("%q is not HOST:PORT", s)
	}
	if p, err := strconv.Atoi(port); err != nil || p < 1 || p > 65535 {
		return fmt.Errorf("%q: port must be 1–65535", s)
	}
	if host == "" {
		return fmt.Errorf("%q: no host", s)
	}
	return nil
}

// feed checks an NMEA feed address's form (tcp://HOST:PORT,
// udp://[HOST]:PORT, serial:DEVICE[@BAUD]); the command that opens it
// reads it in full.
func feed(s string) error {
	switch {
	case strings.HasPrefix(s, "tcp://"):
		return hostPort(strings.TrimPrefix(s, "tcp://"))
	case strings.HasPrefix(s, "udp://"):
		if _, _, err := net.SplitHostPort(strings.TrimPrefix(s, "udp://")); err != nil {
			return fmt.Errorf("%q is not udp://[HOST]:PORT", s)
		}
		return nil
	case strings.HasPrefix(s, "serial:") && len(s) > len("serial:"):
		return nil
	}
	return fmt.Errorf("%q: want tcp://HOST:PORT, udp://[HOST]:PORT or serial:DEVICE[@BAUD]", s)
}

// idPattern: an identifier is printable, without spaces or commas.
var idPattern = regexp.MustCompile(`^[^\s,]{1,32}$`)

func (v *validator) file(r *raw) *File {
	f := &File{Path: v.path}
	// name: shown in tables and CSV cells.
	f.Name = strings.TrimSpace(r.Name)
	switch {
	case f.Name == "":
		v.fail("name", `missing: give the station a name, like name = "Kestrel Ridge"`)
	case len([]rune(f.Name)) > 64:
		v.fail("name", "%d characters is too long (at most 64)", len([]rune(f.Name)))
	case strings.IndexFunc(f.Name, unicode.IsControl) >= 0:
		v.fail("name", "contains a control character")
	}
	if strings.TrimSpace(r.Database) == "" {
		v.fail("database", `missing: name the SQLite file, like database = "kestrel-ridge.db"`)
	}
	f.Database = v.resolve(r.Database)

	v.position(r, f)
	v.antenna(r, f)
	v.receiver(r, f)
	v.channels(r, f)
	v.heading(r, f)
	return f
}

func (v *validator) position(r *raw, f *File) {
	p := &f.Position
	rp := r.Position
	p.Source = rp.Source
	if p.Source == "" {
		p.Source = PositionFixed
	}
	if rp.LatLon != "" {
		lat, lon, err := units.ParseLatLon(rp.LatLon)
		if err != nil {
			v.fail("position.lat_lon", "%v", err)
		}
		p.HasLatLon, p.LatDeg, p.LonDeg = err == nil, lat, lon
	}
	switch p.Source {
	case PositionFixed:
		if rp.LatLon == "" {
			v.fail("position.lat_lon", `missing: a fixed station needs lat_lon = "LAT, LON"`)
		}
		if rp.GPSD != "" || rp.NMEA != "" {
			v.fail("position.source", `is "fixed" but gpsd or nmea is given: set source = "gpsd" or "nmea" for a moving station`)
		}
	case PositionGPSD:
		if err := hostPort(rp.GPSD); err != nil {
			v.fail("position.gpsd", `source = "gpsd" needs gpsd = "HOST:PORT" (gpsd listens on TCP 2947): %v`, err)
		}
		p.GPSD = rp.GPSD
	case PositionNMEA:
		if err := feed(rp.NMEA); err != nil {
			v.fail("position.nmea", `source = "nmea" needs the GGA/RMC feed: %v`, err)
		}
		p.NMEA = rp.NMEA
	default:
		v.fail("position.source", "%q: want fixed, gpsd or nmea", rp.Source)
	}
	if a := rp.AltM; a != nil && !(*a > -500 && *a < 9000) {
		v.fail("position.alt_m", "%v m is outside -500…9000", *a)
	}
	p.AltM = rp.AltM
	if d := rp.DeclinationDeg; d != nil && !(*d >= -180 && *d <= 180) {
		v.fail("position.declination_deg", "%v° is outside -180…180", *d)
	}
	p.DeclinationDeg = rp.DeclinationDeg
}

func (v *validator) antenna(r *raw, f *File) {
	a := &f.Antenna
	ra := r.Antenna
	a.Kind = ra.Kind
	switch a.Kind {
	case AntennaLoop, AntennaYagi, AntennaBody:
		if ra.PatternFile != "" {
			v.fail("antenna.pattern_file", `is given with kind = %q: set kind = "pattern" to use a measured pattern`, a.Kind)
		}
	case AntennaPattern:
		if ra.PatternFile == "" {
			v.fail("antenna.pattern_file", `missing: kind = "pattern" needs the measured pattern (calibrate's JSON)`)
		} else if _, err := os.Stat(v.resolve(ra.PatternFile)); err != nil {
			v.fail("antenna.pattern_file", "%v", err)
		}
		a.PatternFile = v.resolve(ra.PatternFile)
	case "":
		v.fail("antenna.kind", "missing: want loop, yagi, body or pattern")
	default:
		v.fail("antenna.kind", "%q: want loop, yagi, body or pattern", ra.Kind)
	}
	if !(finite(ra.MountOffsetDeg) && ra.MountOffsetDeg > -360 && ra.MountOffsetDeg < 360) {
		v.fail("antenna.mount_offset_deg", "%v° is outside (-360, 360)", ra.MountOffsetDeg)
	}
	a.MountOffsetDeg = ra.MountOffsetDeg
}

// MaxFrequencyHz is the highest frequency an RTL-SDR can be told: the
// rtl_tcp command and librtlsdr's rtlsdr_set_center_freq take a uint32 of
// hertz (osmocom rtl-sdr, include/rtl-sdr.h).
const MaxFrequencyHz = math.MaxUint32

// validRate reports librtlsdr's accepted sample rates: 225 001–300 000
// and 900 001–3 200 000 S/s (osmocom rtl-sdr, src/librtlsdr.c,
// rtlsdr_set_sample_rate).
func validRate(hz float64) bool {
	return (hz > 225000 && hz <= 300000) || (hz > 900000 && hz <= 3200000)
}

func (v *validator) receiver(r *raw, f *File) {
	rx := &f.Receiver
	rr := r.Receiver
	rx.Source, rx.USBIndex = rr.Source, -1
	switch {
	case strings.HasPrefix(rr.Source, "rtl_tcp://"):
		rx.RTLTCP = strings.TrimSuffix(strings.TrimPrefix(rr.Source, "rtl_tcp://"), "/")
		if err := hostPort(rx.RTLTCP); err != nil {
			v.fail("receiver.source", "%v: want rtl_tcp://HOST:PORT", err)
		}
	case strings.HasPrefix(rr.Source, "usb:"):
		n, err := strconv.Atoi(strings.TrimPrefix(rr.Source, "usb:"))
		if err != nil || n < 0 || n > 255 {
			v.fail("receiver.source", "%q: want usb:INDEX with INDEX 0–255", rr.Source)
		}
		rx.USBIndex = n
	case rr.Source == "":
		v.fail("receiver.source", `missing: want "rtl_tcp://HOST:PORT" or "usb:INDEX"`)
	default:
		v.fail("receiver.source", `%q: want "rtl_tcp://HOST:PORT" or "usb:INDEX"`, rr.Source)
	}
	if rr.SampleRate == nil {
		v.fail("receiver.sample_rate", `missing: like sample_rate = "2.4M"`)
	} else if hz, ok := v.hz("receiver.sample_rate", rr.SampleRate); ok {
		if !validRate(hz) {
			v.fail("receiver.sample_rate", "%s S/s is not a rate an RTL-SDR accepts (225001–300000 or 900001–3200000)", num(hz))
		}
		rx.SampleRateHz = hz
	}
	if rr.Centre != nil {
		if hz, ok := v.hz("receiver.centre", rr.Centre); ok {
			if !(hz > 0 && hz <= MaxFrequencyHz) {
				v.fail("receiver.centre", "%s Hz is outside 0…%d Hz", num(hz), uint64(MaxFrequencyHz))
			}
			rx.CentreHz = hz
		}
	}
	switch {
	case rr.AGC && rr.GainDB != nil:
		v.fail("receiver.gain_db", "is given with agc = true: choose a fixed gain or AGC")
	case rr.AGC:
		f.Warnings = append(f.Warnings, "receiver.agc = true: automatic gain distorts the level readings that bearings are fitted to; a fixed gain_db is better")
	case rr.GainDB == nil:
		v.fail("receiver.gain_db", "missing: give a fixed tuner gain in dB (0–50), like gain_db = 30")
	case !(*rr.GainDB >= 0 && *rr.GainDB <= 50):
		// R820T tuners go to 49.6 dB (librtlsdr's gain table).
		v.fail("receiver.gain_db", "%v dB is outside 0–50", *rr.GainDB)
	default:
		rx.GainDB = *rr.GainDB
	}
	rx.AGC = rr.AGC
	if rr.PPM < -500 || rr.PPM > 500 {
		v.fail("receiver.ppm", "%d ppm is outside -500…500", rr.PPM)
	}
	rx.PPM = rr.PPM
}

func (v *validator) channels(r *raw, f *File) {
	if len(r.Channel) == 0 {
		v.fail("channel", "missing: give at least one [[channel]] with freq")
		return
	}
	seen := map[float64]int{}
	for i, rc := range r.Channel {
		key := fmt.Sprintf("channel[%d]", i+1)
		c := Channel{Mode: rc.Mode}
		if rc.Freq == nil {
			v.fail(key+".freq", `missing: like freq = "144.525MHz"`)
		} else if hz, ok := v.hz(key+".freq", rc.Freq); ok {
			if !(hz > 0 && hz <= MaxFrequencyHz) {
				v.fail(key+".freq", "%s Hz is outside 0…%d Hz", num(hz), uint64(MaxFrequencyHz))
			}
			if j, dup := seen[hz]; dup {
				v.fail(key+".freq", "%s Hz is also channel %d", num(hz), j)
			}
			seen[hz] = i + 1
			if rx := f.Receiver; rx.CentreHz > 0 && rx.SampleRateHz > 0 && math.Abs(hz-rx.CentreHz)+ChannelHalfWidthHz > rx.SampleRateHz/2 {
				v.fail(key+".freq", "%s Hz is outside the band received around receiver.centre: the channel (± %s Hz) must lie inside %s ± %s Hz",
					num(hz), num(ChannelHalfWidthHz), num(rx.CentreHz), num(rx.SampleRateHz/2))
			}
			for j, o := range f.Channels {
				if o.FreqHz > 0 && math.Abs(hz-o.FreqHz) < 2*ChannelHalfWidthHz && hz != o.FreqHz {
					v.fail(key+".freq", "%s Hz overlaps channel %d (%s Hz): a channel is %s Hz wide, so channels must be at least that far apart",
						num(hz), j+1, num(o.FreqHz), num(2*ChannelHalfWidthHz))
				}
			}
			c.FreqHz = hz
		}
		switch rc.Mode {
		case "":
			c.Mode = "auto"
		case "auto", "fm", "am", "cw":
		default:
			v.fail(key+".mode", "%q: want auto, fm, am or cw", rc.Mode)
		}
		ids := map[string]bool{}
		for _, id := range rc.IDs {
			switch {
			case !idPattern.MatchString(id):
				v.fail(key+".ids", "%q: an identifier is 1–32 characters without spaces or commas", id)
			case ids[strings.ToUpper(id)]:
				v.fail(key+".ids", "%q is listed twice", id)
			}
			ids[strings.ToUpper(id)] = true
		}
		c.IDs = append([]string(nil), rc.IDs...)
		f.Channels = append(f.Channels, c)
	}
	if n := len(r.Channel); n > 1 && f.Receiver.CentreHz == 0 {
		v.fail("receiver.centre", "missing: a station file with %d channels gives the tuning frequency that puts them all in the band received (each ± %s Hz inside centre ± sample_rate/2)",
			n, num(ChannelHalfWidthHz))
	}
}

// ChannelHalfWidthHz is how far either side of its frequency a channel
// reaches: the stopband edge of the receiver's channel filter
// (receiver.DefaultConfig.StopHz, which a watch test holds equal to this;
// station sits beside receiver in the layering and cannot import it). A
// channel must lie whole inside the band the receiver passes, and two
// channels at least twice this apart.
const ChannelHalfWidthHz = 12000.0

func (v *validator) heading(r *raw, f *File) {
	h := &f.Heading
	rh := r.Heading
	h.Source, h.Reference = rh.Source, rh.Reference
	if h.Reference == "" {
		h.Reference = heading.True.String()
	} else if ref, err := heading.ParseRef(h.Reference); err != nil {
		v.fail("heading.reference", "%v", err)
	} else {
		h.Reference = ref.String() // the one spelling, whatever the case given
	}
	for _, o := range []struct {
		k   string
		set bool
	}{{HeadingRotator, rh.Rotator != ""}, {HeadingCompass, rh.Compass != ""}, {HeadingLog, rh.Log != ""}} {
		if o.set && o.k != h.Source && (h.Source == HeadingRotator || h.Source == HeadingCompass || h.Source == HeadingLog) {
			v.fail("heading."+o.k, "is given with source = %q: remove it or change the source", h.Source)
		}
	}
	switch h.Source {
	case HeadingRotator:
		if err := hostPort(rh.Rotator); err != nil {
			v.fail("heading.rotator", `source = "rotator" needs rotator = "HOST:PORT" of rotctld: %v`, err)
		}
		h.Rotator = rh.Rotator
		if rh.SweepFromDeg == nil || rh.SweepToDeg == nil {
			v.fail("heading.sweep_to_deg", "missing: a rotator needs sweep_from_deg and sweep_to_deg")
			break
		}
		from, to := *rh.SweepFromDeg, *rh.SweepToDeg
		for _, kv := range []struct {
			k string
			x float64
		}{{"sweep_from_deg", from}, {"sweep_to_deg", to}} {
			// Hamlib rotctld azimuths (dummy rotator: −180…450).
			if !(kv.x >= -180 && kv.x <= 450) {
				v.fail("heading."+kv.k, "%v° is outside -180…450", kv.x)
			}
		}
		if from == to {
			v.fail("heading.sweep_to_deg", "equals sweep_from_deg: the antenna would not turn")
		}
		if !finite(rh.StepDeg) || (rh.StepDeg != 0 && (to-from)*rh.StepDeg < 0) || math.Abs(rh.StepDeg) > 360 {
			v.fail("heading.step_deg", "%v° does not lead from %v° to %v° (0 for a continuous sweep)", rh.StepDeg, from, to)
		}
		if !(rh.DwellS >= 0 && rh.DwellS <= 3600) || (rh.DwellS > 0 && rh.StepDeg == 0) {
			v.fail("heading.dwell_s", "%v s: want 0–3600, and only with step_deg", rh.DwellS)
		}
		h.SweepFromDeg, h.SweepToDeg, h.StepDeg, h.DwellS = from, to, rh.StepDeg, rh.DwellS
	case HeadingCompass:
		if err := feed(rh.Compass); err != nil {
			v.fail("heading.compass", `source = "compass" needs the NMEA feed: %v`, err)
		}
		h.Compass = rh.Compass
	case HeadingLog:
		if rh.Log == "" {
			v.fail("heading.log", `source = "log" needs log = "FILE"`)
		} else if _, err := os.Stat(v.resolve(rh.Log)); err != nil {
			v.fail("heading.log", "%v", err)
		}
		h.Log = v.resolve(rh.Log)
	case "":
		v.fail("heading.source", "missing: want rotator, compass or log")
	default:
		v.fail("heading.source", "%q: want rotator, compass or log", rh.Source)
	}
	if !(rh.LagS >= -10 && rh.LagS <= 10) {
		v.fail("heading.lag_s", "%v s is outside -10…10", rh.LagS)
	}
	h.LagS = rh.LagS
}
