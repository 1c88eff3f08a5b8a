package geo

import (
	"bufio"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"nullseek/internal/angle"
	"nullseek/internal/units"
	"sort"
	"strconv"
	"strings"
	"time"
)

// BearingRecord is one bearing as read from a file, before magnetic bearings
// are turned into true ones. LOP.BearingDeg holds the bearing as written:
// true when Magnetic is false, magnetic otherwise. When HasDeclination is set
// the record carries its own declination (degrees, east positive) which wins
// over any model value.
type BearingRecord struct {
	LOP
	Magnetic       bool
	DeclinationDeg float64
	HasDeclination bool
}

// InputError names the place of a bad value: Row is the 1-based CSV row (the
// header is row 1; comment lines count) or the 1-based JSON entry, Field the
// column name ("" when the whole row is wrong).
type InputError struct {
	Unit  string // "row" or "entry"
	Row   int
	Field string
	Err   error
}

func (e *InputError) Error() string {
	if e.Field == "" {
		return fmt.Sprintf("%s %d: %v", e.Unit, e.Row, e.Err)
	}
	return fmt.Sprintf("%s %d, field %q: %v", e.Unit, e.Row, e.Field, e.Err)
}

func (e *InputError) Unwrap() error { return e.Err }

// Column names of the bearing CSV. The first seven are required.
var (
	requiredColumns = []string{"ident", "station", "lat", "lon", "bearing_deg", "sigma_deg", "reference"}
	optionalColumns = []string{"time", "declination_deg", "ambiguous"}
)

// StationToleranceM is how far apart two rows naming the same station may
// place it before the input is refused as conflicting.
const StationToleranceM = 5.0

// BearingReader reads bearing records one at a time, from CSV or JSON, so
// a file of any length is read in constant memory (apart from one entry per
// station name, kept to refuse a station that moves). Use NewBearingReader,
// then Next until io.EOF.
type BearingReader struct {
	unit string // "row" or "entry"
	// CSV
	cr  *csv.Reader
	col map[string]int
	// JSON
	dec   *json.Decoder
	entry int
	// both
	count    int
	stations map[string]stationSeen
}

type stationSeen struct {
	lat, lon float64
	row      int
}

// Count is the number of records returned so far.
func (br *BearingReader) Count() int { return br.count }

// Unit is "row" for CSV input and "entry" for JSON.
func (br *BearingReader) Unit() string { return br.unit }

// NewBearingReader sniffs the format (JSON when the first byte that is not
// white space is '[' or '{', else CSV) and reads the CSV header or the
// opening of the JSON array. The formats are those of ReadBearingsCSV and
// ReadBearingsJSON.
func NewBearingReader(r io.Reader) (*BearingReader, error) {
	bf := bufio.NewReaderSize(r, 64<<10)
	for {
		c, err := bf.ReadByte()
		if err == io.EOF {
			return nil, &InputError{Unit: "row", Row: 1, Err: errors.New("empty input: expected a header row")}
		}
		if err != nil {
			return nil, fmt.Errorf("read bearings: %w", err)
		}
		if c == ' ' || c == '\t' || c == '\r' || c == '\n' {
			continue
		}
		_ = bf.UnreadByte()
		br := &BearingReader{stations: map[string]stationSeen{}}
		if c == '[' || c == '{' {
			br.unit = "entry"
			return br, br.openJSON(bf)
		}
		br.unit = "row"
		return br, br.openCSV(bf)
	}
}

func (br *BearingReader) openCSV(r io.Reader) error {
	cr := csv.NewReader(r)
	cr.Comment = '#'
	cr.TrimLeadingSpace = true
	cr.FieldsPerRecord = 0
	cr.ReuseRecord = true
	header, err := cr.Read()
	if err == io.EOF {
		return &InputError{Unit: "row", Row: 1, Err: errors.New("empty input: expected a header row")}
	}
	if err != nil {
		return csvErr(err)
	}
	hdrRow, _ := cr.FieldPos(0)
	col := map[string]int{}
	for i, h := range header {
		h = strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff")))
		if _, dup := col[h]; dup && h != "" {
			return &InputError{Unit: "row", Row: hdrRow, Field: h, Err: errors.New("column appears twice in the header")}
		}
		col[h] = i
	}
	for _, name := range requiredColumns {
		if _, ok := col[name]; !ok {
			return &InputError{Unit: "row", Row: hdrRow, Field: name,
				Err: fmt.Errorf("missing column in the header (need %s)", strings.Join(requiredColumns, ","))}
		}
	}
	br.cr, br.col = cr, col
	return nil
}

func (br *BearingReader) openJSON(r io.Reader) error {
	dec := json.NewDecoder(r)
	dec.UseNumber()
	tok, err := dec.Token()
	if err != nil {
		return fmt.Errorf("bearings JSON: %w", err)
	}
	if tok == json.Delim('{') {
		// Find "bearings"; skip other keys.
		for {
			if !dec.More() {
				return errors.New(`bearings JSON: the object has no "bearings" array`)
			}
			k, err := dec.Token()
			if err != nil {
				return fmt.Errorf("bearings JSON: %w", err)
			}
			if ks, _ := k.(string); ks == "bearings" {
				break
			}
			var skip json.RawMessage
			if err := dec.Decode(&skip); err != nil {
				return fmt.Errorf("bearings JSON: %w", err)
			}
		}
		tok, err = dec.Token()
		if err != nil {
			return fmt.Errorf("bearings JSON: %w", err)
		}
	}
	if tok != json.Delim('[') {
		return fmt.Errorf(`bearings JSON (want an array of objects or {"bearings": [...]}): found %v`, tok)
	}
	br.dec = dec
	return nil
}

// Next returns the next record, io.EOF after the last, or the first bad
// value as an *InputError naming the row (or entry) and field.
func (br *BearingReader) Next() (BearingRecord, error) {
	var rec BearingRecord
	var err error
	if br.cr != nil {
		rec, err = br.nextCSV()
	} else {
		rec, err = br.nextJSON()
	}
	if err != nil {
		return rec, err
	}
	if err := br.checkStation(rec); err != nil {
		return rec, err
	}
	br.count++
	return rec, nil
}

func (br *BearingReader) nextCSV() (BearingRecord, error) {
	fields, err := br.cr.Read()
	if err == io.EOF {
		return BearingRecord{}, io.EOF
	}
	if err != nil {
		return BearingRecord{}, csvErr(err)
	}
	row, _ := br.cr.FieldPos(0)
	get := func(name string) (string, bool) {
		i, ok := br.col[name]
		if !ok {
			return "", false
		}
		return strings.TrimSpace(fields[i]), true
	}
	return parseRecord("row", row, get)
}

func (br *BearingReader) nextJSON() (BearingRecord, error) {
	if !br.dec.More() {
		if _, err := br.dec.Token(); err != nil {
			return BearingRecord{}, fmt.Errorf("bearings JSON: %w", err)
		}
		return BearingRecord{}, io.EOF
	}
	br.entry++
	n := br.entry
	var it map[string]json.RawMessage
	if err := br.dec.Decode(&it); err != nil {
		return BearingRecord{}, &InputError{Unit: "entry", Row: n, Err: fmt.Errorf("not a JSON object: %v", err)}
	}
	lower := make(map[string]json.RawMessage, len(it))
	for k, v := range it {
		lower[strings.ToLower(k)] = v
	}
	var bad error
	get := func(name string) (string, bool) {
		raw, ok := lower[name]
		if !ok || string(raw) == "null" {
			return "", false
		}
		var s string
		if json.Unmarshal(raw, &s) == nil {
			return strings.TrimSpace(s), true
		}
		var num json.Number
		if json.Unmarshal(raw, &num) == nil {
			return num.String(), true
		}
		var b bool
		if json.Unmarshal(raw, &b) == nil {
			return strconv.FormatBool(b), true
		}
		if bad == nil {
			bad = &InputError{Unit: "entry", Row: n, Field: name, Err: fmt.Errorf("%s is neither a number, a boolean nor a string", raw)}
		}
		return string(raw), true
	}
	for _, name := range requiredColumns {
		if _, ok := lower[name]; !ok {
			return BearingRecord{}, &InputError{Unit: "entry", Row: n, Field: name, Err: errors.New("missing")}
		}
	}
	rec, err := parseRecord("entry", n, get)
	if bad != nil {
		return BearingRecord{}, bad
	}
	return rec, err
}

// checkStation refuses a station named twice at positions more than
// StationToleranceM apart.
func (br *BearingReader) checkStation(r BearingRecord) error {
	p, ok := br.stations[r.Station]
	if !ok {
		br.stations[r.Station] = stationSeen{r.Lat, r.Lon, r.Row}
		return nil
	}
	if p.lat == r.Lat && p.lon == r.Lon {
		return nil
	}
	if d, _, _ := Inverse(p.lat, p.lon, r.Lat, r.Lon); d > StationToleranceM {
		return &InputError{Unit: br.unit, Row: r.Row, Field: "lat/lon",
			Err: fmt.Errorf("station %q is %.0f m away from where %s %d put it; use a new station name for a new place", r.Station, d, br.unit, p.row)}
	}
	return nil
}

// ReadBearingsCSV reads bearings from CSV with a header row naming at least
// the columns ident, station, lat, lon, bearing_deg, sigma_deg, reference
// (in any order; names are case-insensitive); time (RFC 3339),
// declination_deg (degrees, east positive) and ambiguous (true/false) are
// optional, other columns are ignored. Lines starting with '#' are
// comments. lat/lon are decimal degrees (WGS84), bearing_deg any finite
// number of degrees (normalised to [0,360)), sigma_deg the 1-sigma in
// degrees (0 < sigma < 90), reference "true" or "magnetic". The first bad
// value stops reading with an *InputError naming the row and field. It
// holds every record in memory; NewBearingReader reads one at a time.
func ReadBearingsCSV(r io.Reader) ([]BearingRecord, error) {
	return readAll(r, false)
}

// ReadBearingsJSON reads bearings from JSON: either an array of objects or
// an object {"bearings": [...]}, each object having the same keys as the CSV
// columns (numbers as JSON numbers or numeric strings, ambiguous as a JSON
// boolean or a string). Errors are *InputError with Unit "entry" and the
// 1-based array index.
func ReadBearingsJSON(r io.Reader) ([]BearingRecord, error) {
	return readAll(r, true)
}

func readAll(r io.Reader, wantJSON bool) ([]BearingRecord, error) {
	br := &BearingReader{stations: map[string]stationSeen{}}
	var err error
	if wantJSON {
		br.unit = "entry"
		err = br.openJSON(r)
	} else {
		br.unit = "row"
		err = br.openCSV(r)
	}
	if err != nil {
		return nil, err
	}
	var recs []BearingRecord
	for {
		rec, err := br.Next()
		if err == io.EOF {
			return recs, nil
		}
		if err != nil {
			return nil, err
		}
		recs = append(recs, rec)
	}
}

func csvErr(err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &InputError{Unit: "row", Row: pe.StartLine, Err: pe.Err}
	}
	return fmt.Errorf("read bearings CSV: %w", err)
}

// parseRecord turns the named fields of one row into a record.
func parseRecord(unit string, row int, get func(string) (string, bool)) (BearingRecord, error) {
	fail := func(field string, format string, a ...any) (BearingRecord, error) {
		return BearingRecord{}, &InputError{Unit: unit, Row: row, Field: field, Err: fmt.Errorf(format, a...)}
	}
	var rec BearingRecord
	rec.Row = row
	rec.Ident, _ = get("ident")
	if rec.Ident == "" {
		return fail("ident", "empty: name the transmitter this bearing belongs to")
	}
	rec.Station, _ = get("station")
	if rec.Station == "" {
		return fail("station", "empty: name the station")
	}
	num := func(field string) (float64, error) {
		s, _ := get(field)
		if s == "" {
			return 0, &InputError{Unit: unit, Row: row, Field: field, Err: errors.New("empty: a number is required")}
		}
		v, err := strconv.ParseFloat(s, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return 0, &InputError{Unit: unit, Row: row, Field: field, Err: fmt.Errorf("%q is not a number", s)}
		}
		return v, nil
	}
	var err error
	if rec.Lat, err = num("lat"); err != nil {
		return rec, err
	}
	if rec.Lat < -90 || rec.Lat > 90 {
		return fail("lat", "%v is outside -90..90", rec.Lat)
	}
	if rec.Lon, err = num("lon"); err != nil {
		return rec, err
	}
	if rec.Lon < -180 || rec.Lon > 180 {
		return fail("lon", "%v is outside -180..180", rec.Lon)
	}
	if rec.BearingDeg, err = num("bearing_deg"); err != nil {
		return rec, err
	}
	rec.BearingDeg = angle.Wrap360(rec.BearingDeg)
	if rec.SigmaDeg, err = num("sigma_deg"); err != nil {
		return rec, err
	}
	if !(rec.SigmaDeg > 0) {
		return fail("sigma_deg", "%v must be greater than 0", rec.SigmaDeg)
	}
	if rec.SigmaDeg >= 90 {
		return fail("sigma_deg", "%v must be less than 90 degrees", rec.SigmaDeg)
	}
	ref, _ := get("reference")
	mag, err := units.ParseNorth(ref)
	if err != nil {
		return fail("reference", "%q: write true or magnetic", ref)
	}
	rec.Magnetic = mag
	if s, ok := get("time"); ok && s != "" {
		t, err := time.Parse(time.RFC3339, s)
		if err != nil {
			return fail("time", "%q is not an RFC 3339 time such as 2025-06-01T10:15:00Z", s)
		}
		rec.Time = t.UTC()
	}
	if s, ok := get("declination_deg"); ok && s != "" {
		v, err := num("declination_deg")
		if err != nil {
			return rec, err
		}
		if v < -180 || v > 180 {
			return fail("declination_deg", "%v is outside -180..180", v)
		}
		rec.DeclinationDeg, rec.HasDeclination = v, true
	}
	if s, ok := get("ambiguous"); ok && s != "" {
		switch strings.ToLower(s) {
		case "true", "yes", "1":
			rec.Ambiguous = true
		case "false", "no", "0":
		default:
			return fail("ambiguous", "%q: write true when the bearing's reciprocal fits as well (a loop's two nulls), else false", s)
		}
	}
	return rec, nil
}

// DeclinationFunc returns the magnetic declination in degrees (east
// positive) at a point and time, and a non-nil warning when the model is
// used outside its validity.
type DeclinationFunc func(latDeg, lonDeg float64, t time.Time) (declDeg float64, warn error)

// DeclinationUse is one declination applied to magnetic bearings: at a
// station, from one source, rounded to 0.01°.
type DeclinationUse struct {
	Station string
	// Deg is the declination in degrees, east positive.
	Deg float64
	// Source is "file" (the row's declination_deg), "flag" (the override) or
	// "WMM2025 YYYY-MM-DD" (the model at that UTC date).
	Source string
	// Bearings is how many bearings it turned.
	Bearings int
}

// Resolver turns records into LOPs with true bearings one at a time.
// Magnetic bearings use, in order of preference: the record's own
// declination, Override when not nil, Decl(lat, lon, t) at the station and
// the bearing's time (Now when the record has no time; the model is
// evaluated once per station position and UTC day).
type Resolver struct {
	Override *float64
	Decl     DeclinationFunc
	Now      time.Time

	warn  map[string]bool
	cache map[declKey]float64
	uses  map[useKey]int
	order []useKey
}

type declKey struct {
	lat, lon float64
	day      string
}

type useKey struct {
	station, source string
	centi           int64
}

// True returns the record as a LOP with a true bearing.
func (rv *Resolver) True(r BearingRecord) (LOP, error) {
	l := r.LOP
	if !r.Magnetic {
		return l, nil
	}
	if rv.warn == nil {
		rv.warn, rv.cache, rv.uses = map[string]bool{}, map[declKey]float64{}, map[useKey]int{}
	}
	var d float64
	var source string
	switch {
	case r.HasDeclination:
		d, source = r.DeclinationDeg, "file"
	case rv.Override != nil:
		d, source = *rv.Override, "flag"
	default:
		if rv.Decl == nil {
			return LOP{}, fmt.Errorf("%s: magnetic bearing but no declination source", l.where())
		}
		t := r.Time
		if t.IsZero() {
			t = rv.Now
			rv.warn["magnetic bearings without a time use the declination for today's date"] = true
		}
		day := t.UTC().Format("2006-01-02")
		k := declKey{l.Lat, l.Lon, day}
		var ok bool
		if d, ok = rv.cache[k]; !ok {
			var warn error
			d, warn = rv.Decl(l.Lat, l.Lon, t)
			if math.IsNaN(d) {
				return LOP{}, fmt.Errorf("%s: no declination available: %v", l.where(), warn)
			}
			if warn != nil {
				rv.warn["declination: "+warn.Error()] = true
			}
			rv.cache[k] = d
		}
		source = "WMM2025 " + day
	}
	uk := useKey{l.Station, source, int64(math.Round(d * 100))}
	if _, ok := rv.uses[uk]; !ok {
		rv.order = append(rv.order, uk)
	}
	rv.uses[uk]++
	l.BearingDeg = angle.Wrap360(MagneticToTrue(r.BearingDeg, d))
	return l, nil
}

// Warnings returns the model warnings and the use of "now", de-duplicated
// and sorted.
func (rv *Resolver) Warnings() []string {
	warns := make([]string, 0, len(rv.warn))
	for w := range rv.warn {
		warns = append(warns, w)
	}
	sort.Strings(warns)
	return warns
}

// Used lists the declinations applied, in the order first used.
func (rv *Resolver) Used() []DeclinationUse {
	var out []DeclinationUse
	for _, k := range rv.order {
		out = append(out, DeclinationUse{Station: k.station, Deg: float64(k.centi) / 100, Source: k.source, Bearings: rv.uses[k]})
	}
	return out
}

// ResolveTrue turns records into LOPs with true bearings (see Resolver).
// Model warnings and the use of "now" are returned as de-duplicated, sorted
// warning lines.
func ResolveTrue(recs []BearingRecord, overrideDeg *float64, decl DeclinationFunc, now time.Time) ([]LOP, []string, error) {
	rv := &Resolver{Override: overrideDeg, Decl: decl, Now: now}
	out := make([]LOP, 0, len(recs))
	for _, r := range recs {
		l, err := rv.True(r)
		if err != nil {
			return nil, nil, err
		}
		out = append(out, l)
	}
	return out, rv.Warnings(), nil
}

// GroupByIdent splits LOPs by Ident, keeping the order in which each ident
// first appears and the input order within each group.
func GroupByIdent(lops []LOP) (idents []string, groups map[string][]LOP) {
	groups = map[string][]LOP{}
	for _, l := range lops {
		if _, ok := groups[l.Ident]; !ok {
			idents = append(idents, l.Ident)
		}
		groups[l.Ident] = append(groups[l.Ident], l)
	}
	return idents, groups
}
