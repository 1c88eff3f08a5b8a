package geo

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"nullseek/internal/angle"
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

// ReadBearingsCSV reads bearings from CSV with a header row naming at least
// the columns ident, station, lat, lon, bearing_deg, sigma_deg, reference
// (in any order; names are case-insensitive); time (RFC 3339) and
// declination_deg (degrees, east positive) are optional, other columns are
// ignored. Lines starting with '#' are comments. lat/lon are decimal degrees
// (WGS84), bearing_deg any finite number of degrees (normalised to [0,360)),
// sigma_deg the 1-sigma in degrees (0 < sigma < 90), reference "true" or
// "magnetic". The first bad value stops reading with an *InputError naming
// the row and field.
func ReadBearingsCSV(r io.Reader) ([]BearingRecord, error) {
	cr := csv.NewReader(r)
	cr.Comment = '#'
	cr.TrimLeadingSpace = true
	cr.FieldsPerRecord = 0
	header, err := cr.Read()
	if err == io.EOF {
		return nil, &InputError{Unit: "row", Row: 1, Err: errors.New("empty input: expected a header row")}
	}
	if err != nil {
		return nil, csvErr(err)
	}
	hdrRow, _ := cr.FieldPos(0)
	col := map[string]int{}
	for i, h := range header {
		h = strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff")))
		if _, dup := col[h]; dup && h != "" {
			return nil, &InputError{Unit: "row", Row: hdrRow, Field: h, Err: errors.New("column appears twice in the header")}
		}
		col[h] = i
	}
	for _, name := range requiredColumns {
		if _, ok := col[name]; !ok {
			return nil, &InputError{Unit: "row", Row: hdrRow, Field: name,
				Err: fmt.Errorf("missing column in the header (need %s)", strings.Join(requiredColumns, ","))}
		}
	}
	var recs []BearingRecord
	for {
		fields, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvErr(err)
		}
		row, _ := cr.FieldPos(0)
		get := func(name string) (string, bool) {
			i, ok := col[name]
			if !ok {
				return "", false
			}
			return strings.TrimSpace(fields[i]), true
		}
		rec, err := parseRecord("row", row, get)
		if err != nil {
			return nil, err
		}
		recs = append(recs, rec)
	}
	return recs, checkRecords("row", recs)
}

func csvErr(err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &InputError{Unit: "row", Row: pe.StartLine, Err: pe.Err}
	}
	return fmt.Errorf("read bearings CSV: %w", err)
}

// ReadBearingsJSON reads bearings from JSON: either an array of objects or
// an object {"bearings": [...]}, each object having the same keys as the CSV
// columns (numbers as JSON numbers or numeric strings). Errors are
// *InputError with Unit "entry" and the 1-based array index.
func ReadBearingsJSON(r io.Reader) ([]BearingRecord, error) {
	data, err := io.ReadAll(r)
	if err != nil {
		return nil, fmt.Errorf("read bearings JSON: %w", err)
	}
	trim := bytes.TrimSpace(data)
	var items []map[string]json.RawMessage
	if len(trim) > 0 && trim[0] == '{' {
		var wrap struct {
			Bearings []map[string]json.RawMessage `json:"bearings"`
		}
		if err := json.Unmarshal(trim, &wrap); err != nil {
			return nil, fmt.Errorf("bearings JSON: %w", err)
		}
		items = wrap.Bearings
	} else if err := json.Unmarshal(trim, &items); err != nil {
		return nil, fmt.Errorf("bearings JSON (want an array of objects or {\"bearings\": [...]}): %w", err)
	}
	var recs []BearingRecord
	for i, it := range items {
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
			var n json.Number
			if json.Unmarshal(raw, &n) == nil {
				return n.String(), true
			}
			if bad == nil {
				bad = &InputError{Unit: "entry", Row: i + 1, Field: name, Err: fmt.Errorf("%s is neither a number nor a string", raw)}
			}
			return string(raw), true
		}
		for _, name := range requiredColumns {
			if _, ok := lower[name]; !ok {
				return nil, &InputError{Unit: "entry", Row: i + 1, Field: name, Err: errors.New("missing")}
			}
		}
		rec, err := parseRecord("entry", i+1, get)
		if bad != nil {
			return nil, bad
		}
		if err != nil {
			return nil, err
		}
		recs = append(recs, rec)
	}
	return recs, checkRecords("entry", recs)
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
	switch strings.ToLower(ref) {
	case "true", "t":
	case "magnetic", "mag", "m":
		rec.Magnetic = true
	default:
		return fail("reference", "%q: write true or magnetic", ref)
	}
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

// checkRecords refuses a station named twice at positions more than
// StationToleranceM apart.
func checkRecords(unit string, recs []BearingRecord) error {
	first := map[string]int{}
	for i, r := range recs {
		j, ok := first[r.Station]
		if !ok {
			first[r.Station] = i
			continue
		}
		p := recs[j]
		if p.Lat == r.Lat && p.Lon == r.Lon {
			continue
		}
		d, _, _ := Inverse(p.Lat, p.Lon, r.Lat, r.Lon)
		if d > StationToleranceM {
			return &InputError{Unit: unit, Row: r.Row, Field: "lat/lon",
				Err: fmt.Errorf("station %q is %.0f m away from where %s %d put it; use a new station name for a new place", r.Station, d, unit, p.Row)}
		}
	}
	return nil
}

// DeclinationFunc returns the magnetic declination in degrees (east
// positive) at a point and time, and a non-nil warning when the model is
// used outside its validity.
type DeclinationFunc func(latDeg, lonDeg float64, t time.Time) (declDeg float64, warn error)

// ResolveTrue turns records into LOPs with true bearings. Magnetic bearings
// use, in order of preference: the record's own declination, overrideDeg
// when not nil, decl(lat, lon, t) at the station and the bearing's time (now
// when the record has no time). Model warnings and the use of "now" are
// returned as de-duplicated, sorted warning lines.
func ResolveTrue(recs []BearingRecord, overrideDeg *float64, decl DeclinationFunc, now time.Time) ([]LOP, []string, error) {
	warnSet := map[string]bool{}
	out := make([]LOP, 0, len(recs))
	for _, r := range recs {
		l := r.LOP
		if r.Magnetic {
			var d float64
			switch {
			case r.HasDeclination:
				d = r.DeclinationDeg
			case overrideDeg != nil:
				d = *overrideDeg
			default:
				if decl == nil {
					return nil, nil, fmt.Errorf("%s: magnetic bearing but no declination source", l.where())
				}
				t := r.Time
				if t.IsZero() {
					t = now
					warnSet["magnetic bearings without a time use the declination for today's date"] = true
				}
				var warn error
				d, warn = decl(l.Lat, l.Lon, t)
				if math.IsNaN(d) {
					return nil, nil, fmt.Errorf("%s: no declination available: %v", l.where(), warn)
				}
				if warn != nil {
					warnSet["declination: "+warn.Error()] = true
				}
			}
			l.BearingDeg = angle.Wrap360(MagneticToTrue(r.BearingDeg, d))
		}
		out = append(out, l)
	}
	warns := make([]string, 0, len(warnSet))
	for w := range warnSet {
		warns = append(warns, w)
	}
	sort.Strings(warns)
	return out, warns, nil
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
