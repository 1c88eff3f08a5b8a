package sdr

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"regexp"
	"sort"
	"strings"
	"time"
)

// Meta is a SigMF metadata file (SigMF v1.2.5, sigmf-schema.json). Fields named in
// the core namespace are decoded into typed fields; every other key (other
// namespaces such as antenna:, spatial:, or unknown core: keys) is kept
// verbatim in Extra and written back by MarshalJSON.
type Meta struct {
	Global      Global
	Captures    []Capture
	Annotations []Annotation
}

// Global is the SigMF global object.
type Global struct {
	Datatype      string   // core:datatype (required), e.g. "cu8"
	Version       string   // core:version (required), e.g. "1.2.0"
	SampleRate    *float64 // core:sample_rate in Hz; nil when absent
	Author        string   // core:author
	Collection    string   // core:collection
	Dataset       string   // core:dataset: file name of a non-conforming dataset
	DataDOI       string   // core:data_doi
	Description   string   // core:description
	HW            string   // core:hw
	License       string   // core:license (URI)
	MetadataOnly  bool     // core:metadata_only
	MetaDOI       string   // core:meta_doi
	NumChannels   int      // core:num_channels; 0 when absent (meaning 1)
	Offset        uint64   // core:offset: index of the dataset's first sample
	Recorder      string   // core:recorder
	SHA512        string   // core:sha512 of the dataset file, 128 hex digits
	TrailingBytes uint64   // core:trailing_bytes (non-conforming datasets)
	Geolocation   *GeoPoint
	Extensions    []Extension // core:extensions
	// Extra holds every other key of the global object, unmodified.
	Extra map[string]json.RawMessage
}

// GeoPoint is a GeoJSON Point as SigMF uses it: coordinates are
// [longitude°, latitude°] or [longitude°, latitude°, altitude m above WGS84].
type GeoPoint struct {
	Type        string    `json:"type"`
	Coordinates []float64 `json:"coordinates"`
	BBox        []float64 `json:"bbox,omitempty"`
}

// Extension is one entry of core:extensions.
type Extension struct {
	Name     string `json:"name"`
	Version  string `json:"version"`
	Optional bool   `json:"optional"`
}

// Capture is one SigMF capture segment.
type Capture struct {
	SampleStart uint64    // core:sample_start (required), in dataset samples
	Datetime    time.Time // core:datetime (UTC) of SampleStart; zero when absent
	Frequency   *float64  // core:frequency: RF centre in Hz; nil when absent
	GlobalIndex *uint64   // core:global_index; nil when absent
	HeaderBytes uint64    // core:header_bytes before this segment's samples
	Geolocation *GeoPoint // core:geolocation
	Extra       map[string]json.RawMessage
}

// Annotation is one SigMF annotation.
type Annotation struct {
	SampleStart   uint64   // core:sample_start (required)
	SampleCount   *uint64  // core:sample_count; nil = to the end
	FreqLowerEdge *float64 // core:freq_lower_edge in RF Hz
	FreqUpperEdge *float64 // core:freq_upper_edge in RF Hz
	Label         string   // core:label (≤ 20 characters recommended)
	Comment       string   // core:comment
	Generator     string   // core:generator
	UUID          string   // core:uuid
	Extra         map[string]json.RawMessage
}

// field binds one JSON key to a Go value.
type field struct {
	key string
	ptr any
}

func (g *Global) fields() []field {
	return []field{
		{"core:datatype", &g.Datatype}, {"core:version", &g.Version},
		{"core:sample_rate", &g.SampleRate}, {"core:author", &g.Author},
		{"core:collection", &g.Collection}, {"core:dataset", &g.Dataset},
		{"core:data_doi", &g.DataDOI}, {"core:description", &g.Description},
		{"core:hw", &g.HW}, {"core:license", &g.License},
		{"core:metadata_only", &g.MetadataOnly}, {"core:meta_doi", &g.MetaDOI},
		{"core:num_channels", &g.NumChannels}, {"core:offset", &g.Offset},
		{"core:recorder", &g.Recorder}, {"core:sha512", &g.SHA512},
		{"core:trailing_bytes", &g.TrailingBytes},
		{"core:geolocation", &g.Geolocation}, {"core:extensions", &g.Extensions},
	}
}

// datetimeField adapts a time.Time to SigMF's datetime string.
type datetimeField struct{ t *time.Time }

func (c *Capture) fields() []field {
	return []field{
		{"core:sample_start", &c.SampleStart}, {"core:datetime", datetimeField{&c.Datetime}},
		{"core:frequency", &c.Frequency}, {"core:global_index", &c.GlobalIndex},
		{"core:header_bytes", &c.HeaderBytes}, {"core:geolocation", &c.Geolocation},
	}
}

func (a *Annotation) fields() []field {
	return []field{
		{"core:sample_start", &a.SampleStart}, {"core:sample_count", &a.SampleCount},
		{"core:freq_lower_edge", &a.FreqLowerEdge}, {"core:freq_upper_edge", &a.FreqUpperEdge},
		{"core:label", &a.Label}, {"core:comment", &a.Comment},
		{"core:generator", &a.Generator}, {"core:uuid", &a.UUID},
	}
}

var (
	versionRE  = regexp.MustCompile(`^\d+\.\d+\.\d`)
	sha512RE   = regexp.MustCompile(`^[0-9a-fA-F]{128}$`)
	datetimeRE = regexp.MustCompile(`^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d+)?Z$`)
)

// ParseDatetime parses a SigMF core:datetime: RFC 3339 with "Z" as the only
// allowed offset and any number of fractional-second digits (SigMF v1.2.5, core:datetime).
func ParseDatetime(s string) (time.Time, error) {
	if !datetimeRE.MatchString(s) {
		return time.Time{}, fmt.Errorf("datetime %q is not RFC 3339 UTC like 2024-05-01T12:00:00.000Z (SigMF allows only the Z offset)", s)
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return time.Time{}, fmt.Errorf("datetime %q: %w", s, err)
	}
	return t.UTC(), nil
}

// FormatDatetime writes t as a SigMF core:datetime (UTC, nanoseconds, Z).
func FormatDatetime(t time.Time) string {
	return t.UTC().Format("2006-01-02T15:04:05.000000000Z")
}

// decodeObject decodes the known fields of one JSON object and keeps the
// other keys in *extra. where names the object for errors.
func decodeObject(raw json.RawMessage, where string, fs []field, extra *map[string]json.RawMessage) (present map[string]bool, err error) {
	var m map[string]json.RawMessage
	if err := json.Unmarshal(raw, &m); err != nil || m == nil {
		return nil, fmt.Errorf("%s must be a JSON object", where)
	}
	present = map[string]bool{}
	for _, f := range fs {
		v, ok := m[f.key]
		if !ok {
			continue
		}
		delete(m, f.key)
		if bytes.Equal(bytes.TrimSpace(v), []byte("null")) {
			return nil, fmt.Errorf("%s %s is null", where, f.key)
		}
		present[f.key] = true
		if d, ok := f.ptr.(datetimeField); ok {
			var s string
			if err := json.Unmarshal(v, &s); err != nil {
				return nil, fmt.Errorf("%s %s: want a string", where, f.key)
			}
			t, err := ParseDatetime(s)
			if err != nil {
				return nil, fmt.Errorf("%s %s: %w", where, f.key, err)
			}
			*d.t = t
			continue
		}
		if err := json.Unmarshal(v, f.ptr); err != nil {
			var te *json.UnmarshalTypeError
			if errors.As(err, &te) {
				return nil, fmt.Errorf("%s %s: %s is not a valid %s", where, f.key, te.Value, te.Type)
			}
			return nil, fmt.Errorf("%s %s: %w", where, f.key, err)
		}
	}
	if len(m) > 0 {
		*extra = m
	}
	return present, nil
}

// ParseMeta decodes and validates a SigMF metadata file. It checks: only the
// top-level keys global, captures and annotations; global is present with
// core:datatype (SigMF grammar) and core:version (X.Y.Z); core:sample_rate,
// when present, finite and in (0, 1e12]; core:sha512 is 128 hex digits;
// core:num_channels ≥ 1; core:extensions entries are complete; every
// capture and annotation has core:sample_start; captures are strictly and
// annotations weakly ascending by sample_start; datetimes are RFC 3339 with
// Z; frequencies are finite; annotation frequency edges come in pairs with
// lower ≤ upper. Missing captures or annotations arrays are read as empty
// (lenient). Keys outside the core namespace are kept, never an error.
// Syntax errors report line and column. It does not check whether nullseek
// can read the datatype (see Open).
func ParseMeta(b []byte) (*Meta, error) {
	var top map[string]json.RawMessage
	if err := json.Unmarshal(b, &top); err != nil {
		return nil, jsonError(b, err)
	}
	if top == nil {
		return nil, errors.New("metadata is not a JSON object")
	}
	keys := make([]string, 0, len(top))
	for k := range top {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if k != "global" && k != "captures" && k != "annotations" {
			return nil, fmt.Errorf("unexpected top-level key %q: SigMF allows only global, captures, annotations", k)
		}
	}
	gr, ok := top["global"]
	if !ok {
		return nil, errors.New("no global object: SigMF metadata needs global with core:datatype and core:version")
	}
	m := &Meta{}
	g := &m.Global
	present, err := decodeObject(gr, "global", g.fields(), &g.Extra)
	if err != nil {
		return nil, err
	}
	if !present["core:datatype"] {
		return nil, errors.New("global has no core:datatype (required)")
	}
	if !ValidDatatype(g.Datatype) {
		return nil, fmt.Errorf("global core:datatype %q does not follow the SigMF grammar (e.g. cu8, ci16_le, cf32_le)", g.Datatype)
	}
	if !present["core:version"] {
		return nil, errors.New("global has no core:version (required)")
	}
	if !versionRE.MatchString(g.Version) {
		return nil, fmt.Errorf("global core:version %q is not X.Y.Z", g.Version)
	}
	if g.SampleRate != nil {
		if r := *g.SampleRate; math.IsNaN(r) || r <= 0 || r > 1e12 {
			return nil, fmt.Errorf("global core:sample_rate %v Hz must be positive and at most 1e12", r)
		}
	}
	if present["core:sha512"] && !sha512RE.MatchString(g.SHA512) {
		return nil, errors.New("global core:sha512 must be 128 hexadecimal digits")
	}
	if present["core:num_channels"] && g.NumChannels < 1 {
		return nil, fmt.Errorf("global core:num_channels %d must be at least 1", g.NumChannels)
	}
	if g.Geolocation != nil {
		if err := g.Geolocation.check(); err != nil {
			return nil, fmt.Errorf("global core:geolocation: %w", err)
		}
	}
	if err := checkExtensions(g.Extensions, gr); err != nil {
		return nil, err
	}

	var caps, anns []json.RawMessage
	if v, ok := top["captures"]; ok {
		if err := json.Unmarshal(v, &caps); err != nil {
			return nil, errors.New("captures must be a JSON array of objects")
		}
	}
	if v, ok := top["annotations"]; ok {
		if err := json.Unmarshal(v, &anns); err != nil {
			return nil, errors.New("annotations must be a JSON array of objects")
		}
	}
	m.Captures = make([]Capture, len(caps))
	for i, raw := range caps {
		c := &m.Captures[i]
		where := fmt.Sprintf("captures[%d]", i)
		p, err := decodeObject(raw, where, c.fields(), &c.Extra)
		if err != nil {
			return nil, err
		}
		if !p["core:sample_start"] {
			return nil, fmt.Errorf("%s has no core:sample_start (required)", where)
		}
		if i > 0 && c.SampleStart <= m.Captures[i-1].SampleStart {
			return nil, fmt.Errorf("%s core:sample_start %d does not follow %d: captures must be sorted by sample_start", where, c.SampleStart, m.Captures[i-1].SampleStart)
		}
		if c.Frequency != nil && (math.IsNaN(*c.Frequency) || math.Abs(*c.Frequency) > 1e12) {
			return nil, fmt.Errorf("%s core:frequency %v Hz is out of range (±1e12)", where, *c.Frequency)
		}
		if c.Geolocation != nil {
			if err := c.Geolocation.check(); err != nil {
				return nil, fmt.Errorf("%s core:geolocation: %w", where, err)
			}
		}
	}
	m.Annotations = make([]Annotation, len(anns))
	for i, raw := range anns {
		a := &m.Annotations[i]
		where := fmt.Sprintf("annotations[%d]", i)
		p, err := decodeObject(raw, where, a.fields(), &a.Extra)
		if err != nil {
			return nil, err
		}
		if !p["core:sample_start"] {
			return nil, fmt.Errorf("%s has no core:sample_start (required)", where)
		}
		if i > 0 && a.SampleStart < m.Annotations[i-1].SampleStart {
			return nil, fmt.Errorf("%s core:sample_start %d comes before %d: annotations must be sorted by sample_start", where, a.SampleStart, m.Annotations[i-1].SampleStart)
		}
		if (a.FreqLowerEdge == nil) != (a.FreqUpperEdge == nil) {
			return nil, fmt.Errorf("%s: core:freq_lower_edge and core:freq_upper_edge must be given together", where)
		}
		if a.FreqLowerEdge != nil && !(*a.FreqLowerEdge <= *a.FreqUpperEdge) {
			return nil, fmt.Errorf("%s: core:freq_lower_edge %v Hz is above core:freq_upper_edge %v Hz", where, *a.FreqLowerEdge, *a.FreqUpperEdge)
		}
	}
	return m, nil
}

func (p *GeoPoint) check() error {
	if p.Type != "Point" {
		return fmt.Errorf("type %q: want a GeoJSON \"Point\"", p.Type)
	}
	if len(p.Coordinates) < 2 {
		return errors.New("coordinates need at least [longitude, latitude]")
	}
	if lon, lat := p.Coordinates[0], p.Coordinates[1]; math.Abs(lon) > 180 || math.Abs(lat) > 90 {
		return fmt.Errorf("coordinates [%v, %v] are not [longitude, latitude] in degrees", lon, lat)
	}
	return nil
}

// checkExtensions verifies each core:extensions entry has exactly name,
// version and optional (sigmf-schema.json, additionalProperties false).
func checkExtensions(exts []Extension, global json.RawMessage) error {
	if len(exts) == 0 {
		return nil
	}
	var g struct {
		E []map[string]json.RawMessage `json:"core:extensions"`
	}
	if err := json.Unmarshal(global, &g); err != nil {
		return errors.New("global core:extensions must be an array of objects")
	}
	for i, e := range g.E {
		for _, k := range []string{"name", "version", "optional"} {
			if _, ok := e[k]; !ok {
				return fmt.Errorf("global core:extensions[%d] has no %q", i, k)
			}
		}
		if len(e) != 3 {
			return fmt.Errorf("global core:extensions[%d] has keys besides name, version, optional", i)
		}
	}
	return nil
}

// jsonError turns a decoding error into one line with line:column.
func jsonError(b []byte, err error) error {
	if strings.Contains(err.Error(), "unexpected end of JSON input") {
		return fmt.Errorf("truncated metadata JSON: input ends after %d bytes", len(b))
	}
	var se *json.SyntaxError
	if errors.As(err, &se) {
		// Offset counts the bytes read, including the offending one.
		line, col := lineCol(b, se.Offset-1)
		return fmt.Errorf("malformed metadata JSON at line %d column %d: %v", line, col, se)
	}
	var te *json.UnmarshalTypeError
	if errors.As(err, &te) {
		line, col := lineCol(b, te.Offset)
		return fmt.Errorf("metadata is not a SigMF object: %s at line %d column %d", te.Value, line, col)
	}
	return fmt.Errorf("malformed metadata JSON: %w", err)
}

func lineCol(b []byte, off int64) (line, col int) {
	off = max(0, min(off, int64(len(b))))
	line = 1 + bytes.Count(b[:off], []byte{'\n'})
	col = int(off) - bytes.LastIndexByte(b[:off], '\n')
	return line, col
}

// encodeObject is the inverse of decodeObject; zero values of optional
// fields are omitted, Extra keys are merged in.
func encodeObject(fs []field, extra map[string]json.RawMessage, always map[string]bool) ([]byte, error) {
	m := map[string]any{}
	for k, v := range extra {
		m[k] = v
	}
	for _, f := range fs {
		var v any
		switch p := f.ptr.(type) {
		case datetimeField:
			if p.t.IsZero() {
				continue
			}
			v = FormatDatetime(*p.t)
		case *string:
			if *p == "" && !always[f.key] {
				continue
			}
			v = *p
		case *bool:
			if !*p {
				continue
			}
			v = *p
		case *int:
			if *p == 0 {
				continue
			}
			v = *p
		case *uint64:
			if *p == 0 && !always[f.key] {
				continue
			}
			v = *p
		case **float64:
			if *p == nil {
				continue
			}
			v = **p
		case **uint64:
			if *p == nil {
				continue
			}
			v = **p
		case **GeoPoint:
			if *p == nil {
				continue
			}
			v = *p
		case *[]Extension:
			if len(*p) == 0 {
				continue
			}
			v = *p
		default:
			return nil, fmt.Errorf("sigmf: no encoder for %s", f.key)
		}
		m[f.key] = v
	}
	return json.Marshal(m)
}

// MarshalJSON writes the metadata as SigMF JSON (keys sorted, Extra kept).
func (m *Meta) MarshalJSON() ([]byte, error) {
	g, err := encodeObject(m.Global.fields(), m.Global.Extra, map[string]bool{"core:datatype": true, "core:version": true})
	if err != nil {
		return nil, err
	}
	caps := make([]json.RawMessage, len(m.Captures))
	for i := range m.Captures {
		if caps[i], err = encodeObject(m.Captures[i].fields(), m.Captures[i].Extra, map[string]bool{"core:sample_start": true}); err != nil {
			return nil, err
		}
	}
	anns := make([]json.RawMessage, len(m.Annotations))
	for i := range m.Annotations {
		if anns[i], err = encodeObject(m.Annotations[i].fields(), m.Annotations[i].Extra, map[string]bool{"core:sample_start": true}); err != nil {
			return nil, err
		}
	}
	return json.Marshal(map[string]any{"global": json.RawMessage(g), "captures": caps, "annotations": anns})
}
