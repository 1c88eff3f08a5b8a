package sdr

import (
	"encoding/json"
	"nullseek/internal/testtool"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// The official SigMF logo metadata (sigmf/SigMF logo/, see testdata README)
// is valid SigMF 1.2.0 and parses with the values it states.
func TestParseMetaOfficialLogo(t *testing.T) {
	b, err := os.ReadFile(filepath.Join(testdataDir(), "sigmf_logo.sigmf-meta"))
	if err != nil {
		t.Fatal(err)
	}
	m, err := ParseMeta(b)
	if err != nil {
		t.Fatalf("official SigMF example rejected: %v", err)
	}
	g := m.Global
	if g.Datatype != "ri16_le" || g.Version != "1.2.0" || *g.SampleRate != 48000 || g.NumChannels != 2 || len(g.SHA512) != 128 {
		t.Errorf("global = %+v", g)
	}
	want := time.Date(2021, 6, 18, 23, 17, 51, 163959000, time.UTC)
	if len(m.Captures) != 1 || !m.Captures[0].Datetime.Equal(want) {
		t.Errorf("captures = %+v", m.Captures)
	}
	if len(m.Annotations) != 3 || *m.Annotations[1].SampleCount != 138000 || m.Annotations[2].SampleStart != 186000 ||
		*m.Annotations[0].FreqLowerEdge != -22000 || m.Annotations[0].Comment != "logo warmup" {
		t.Errorf("annotations = %+v", m.Annotations)
	}
	// Reading it as IQ is refused with a clear reason (2 channels, real).
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "logo.sigmf-meta"), b)
	writeFile(t, filepath.Join(dir, "logo.sigmf-data"), make([]byte, 8))
	if _, err := Open(filepath.Join(dir, "logo.sigmf-meta"), RawParams{}); err == nil || !strings.Contains(err.Error(), "num_channels is 2") {
		t.Errorf("open logo: %v, want a num_channels error", err)
	}
}

// Validation rules, each from sigmf-schema.json v1.2.x / the SigMF spec
// (v1.2.5). ok=true cases must parse.
func TestParseMetaRules(t *testing.T) {
	g := `"core:datatype":"cu8","core:version":"1.2.0"`
	cases := []struct {
		name, json, errHas string
	}{
		{"minimal", `{"global":{` + g + `},"captures":[],"annotations":[]}`, ""},
		{"unknown namespace kept", `{"global":{` + g + `,"antenna:model":"loop","my_ext:x":[1,2]},"captures":[{"core:sample_start":0,"spatial:aperture_azimuth":90}],"annotations":[]}`, ""},
		{"extensions ok", `{"global":{` + g + `,"core:extensions":[{"name":"antenna","version":"1.0.0","optional":true}]},"captures":[],"annotations":[]}`, ""},
		{"fraction digits", `{"global":{` + g + `},"captures":[{"core:sample_start":0,"core:datetime":"1955-11-05T14:00:00Z"},{"core:sample_start":5,"core:datetime":"1955-11-05T14:00:00.123456789Z"}],"annotations":[]}`, ""},
		{"spec 0.x example (capture key)", `{"global":{` + g + `},"capture":[],"annotations":[]}`, `unexpected top-level key "capture"`},
		{"no datatype", `{"global":{"core:version":"1.2.0"},"captures":[],"annotations":[]}`, "no core:datatype"},
		{"no version", `{"global":{"core:datatype":"cu8"},"captures":[],"annotations":[]}`, "no core:version"},
		{"bad version", `{"global":{"core:datatype":"cu8","core:version":"v1"},"captures":[],"annotations":[]}`, "not X.Y.Z"},
		{"bad datatype", `{"global":{"core:datatype":"cf32","core:version":"1.2.0"},"captures":[],"annotations":[]}`, "grammar"},
		{"zero rate", `{"global":{` + g + `,"core:sample_rate":0},"captures":[],"annotations":[]}`, "must be positive"},
		{"negative rate", `{"global":{` + g + `,"core:sample_rate":-48000},"captures":[],"annotations":[]}`, "must be positive"},
		{"string rate", `{"global":{` + g + `,"core:sample_rate":"48000"},"captures":[],"annotations":[]}`, "core:sample_rate"},
		{"short sha512", `{"global":{` + g + `,"core:sha512":"abc"},"captures":[],"annotations":[]}`, "128 hexadecimal"},
		{"zero channels", `{"global":{` + g + `,"core:num_channels":0},"captures":[],"annotations":[]}`, "at least 1"},
		{"extension extra key", `{"global":{` + g + `,"core:extensions":[{"name":"a","version":"1","optional":true,"x":1}]},"captures":[],"annotations":[]}`, "besides"},
		{"extension missing key", `{"global":{` + g + `,"core:extensions":[{"name":"a","version":"1"}]},"captures":[],"annotations":[]}`, `no "optional"`},
		{"capture without start", `{"global":{` + g + `},"captures":[{"core:frequency":1e8}],"annotations":[]}`, "captures[0] has no core:sample_start"},
		{"captures unsorted", `{"global":{` + g + `},"captures":[{"core:sample_start":10},{"core:sample_start":5}],"annotations":[]}`, "sorted"},
		{"datetime with offset", `{"global":{` + g + `},"captures":[{"core:sample_start":0,"core:datetime":"2017-02-01T11:33:17+01:00"}],"annotations":[]}`, "only the Z offset"},
		{"datetime without zone", `{"global":{` + g + `},"captures":[{"core:sample_start":0,"core:datetime":"2017-02-01T11:33:17"}],"annotations":[]}`, "RFC 3339"},
		{"datetime bad month", `{"global":{` + g + `},"captures":[{"core:sample_start":0,"core:datetime":"2017-13-01T11:33:17Z"}],"annotations":[]}`, "month"},
		{"annotation one edge", `{"global":{` + g + `},"captures":[],"annotations":[{"core:sample_start":0,"core:freq_lower_edge":1}]}`, "together"},
		{"annotation edges reversed", `{"global":{` + g + `},"captures":[],"annotations":[{"core:sample_start":0,"core:freq_lower_edge":2,"core:freq_upper_edge":1}]}`, "above"},
		{"annotations unsorted", `{"global":{` + g + `},"captures":[],"annotations":[{"core:sample_start":9},{"core:sample_start":3}]}`, "sorted"},
		{"negative sample_start", `{"global":{` + g + `},"captures":[{"core:sample_start":-1}],"annotations":[]}`, "sample_start"},
		{"geolocation not point", `{"global":{` + g + `,"core:geolocation":{"type":"Line","coordinates":[1,2]}},"captures":[],"annotations":[]}`, "Point"},
		{"not an object", `[1,2]`, "not a SigMF object"},
		{"null global", `{"global":null}`, "must be a JSON object"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseMeta([]byte(c.json))
			switch {
			case c.errHas == "" && err != nil:
				t.Fatalf("rejected: %v", err)
			case c.errHas != "" && (err == nil || !strings.Contains(err.Error(), c.errHas)):
				t.Fatalf("err = %v, want one containing %q", err, c.errHas)
			}
		})
	}
}

// Syntax errors name line and column; truncation says so.
func TestParseMetaJSONErrors(t *testing.T) {
	_, err := ParseMeta([]byte("{\n  \"global\": {\n    \"core:datatype\": \"cu8\",,\n"))
	if err == nil || !strings.Contains(err.Error(), "line 3 column 28") {
		t.Errorf("syntax error: %v, want line 3 column 28", err)
	}
	_, err = ParseMeta([]byte(`{"global":{"core:datatype":"cu8"`))
	if err == nil || !strings.Contains(err.Error(), "truncated") {
		t.Errorf("truncated: %v", err)
	}
}

// Unknown keys survive a parse/marshal/parse cycle.
func TestMetaRoundTripKeepsExtensions(t *testing.T) {
	in := `{"global":{"core:datatype":"cu8","core:version":"1.2.0","antenna:model":"3-element yagi","core:sample_rate":2.4e6},
	"captures":[{"core:sample_start":0,"core:frequency":1.455e8,"spatial:aperture_azimuth":123.5}],
	"annotations":[{"core:sample_start":10,"core:sample_count":5,"core:label":"burst","antenna:azimuth_angle":45}]}`
	m, err := ParseMeta([]byte(in))
	if err != nil {
		t.Fatal(err)
	}
	b, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	m2, err := ParseMeta(b)
	if err != nil {
		t.Fatalf("re-parse: %v\n%s", err, b)
	}
	if string(m2.Global.Extra["antenna:model"]) != `"3-element yagi"` || string(m2.Captures[0].Extra["spatial:aperture_azimuth"]) != "123.5" ||
		string(m2.Annotations[0].Extra["antenna:azimuth_angle"]) != "45" || *m2.Captures[0].Frequency != 1.455e8 || m2.Annotations[0].Label != "burst" {
		t.Errorf("lost data: %s", b)
	}
}

func writePair(t *testing.T, dir, name, meta string, data []byte) string {
	t.Helper()
	base := filepath.Join(dir, name)
	writeFile(t, base+".sigmf-meta", []byte(meta))
	if data != nil {
		writeFile(t, base+".sigmf-data", data)
	}
	return base
}

// Open's error messages: one line each, naming the path and the problem.
func TestOpenErrors(t *testing.T) {
	dir := t.TempDir()
	okMeta := `{"global":{"core:datatype":"ci16_le","core:version":"1.2.0","core:sample_rate":48000},"captures":[{"core:sample_start":0,"core:frequency":145e6,"core:datetime":"2024-01-02T03:04:05Z"}],"annotations":[]}`
	nanData := make([]byte, 8*4)
	copy(nanData[16:], []byte{0, 0, 0xc0, 0x7f}) // float32 NaN, sample 2 I
	cases := []struct {
		name   string
		setup  func() string
		raw    RawParams
		errHas []string
	}{
		{"missing data", func() string { return writePair(t, dir, "a", okMeta, nil) + ".sigmf-meta" }, RawParams{}, []string{"missing data file a.sigmf-data"}},
		{"leftover bytes", func() string { return writePair(t, dir, "b", okMeta, make([]byte, 11)) + ".sigmf-data" }, RawParams{}, []string{"3 bytes left over", "b.sigmf-data"}},
		{"empty data", func() string { return writePair(t, dir, "c", okMeta, []byte{}) + ".sigmf-meta" }, RawParams{}, []string{"no samples"}},
		{"unknown datatype", func() string {
			return writePair(t, dir, "d", strings.Replace(okMeta, "ci16_le", "ci12_le", 1), make([]byte, 8)) + ".sigmf-meta"
		}, RawParams{}, []string{"d.sigmf-meta", "ci12_le"}},
		{"malformed meta", func() string { return writePair(t, dir, "e", okMeta[:36]+"]", make([]byte, 8)) + ".sigmf-meta" }, RawParams{}, []string{"e.sigmf-meta", "line 1 column"}},
		{"truncated meta", func() string { return writePair(t, dir, "f", okMeta[:60], make([]byte, 8)) + ".sigmf-meta" }, RawParams{}, []string{"truncated"}},
		{"rate conflict", func() string { return writePair(t, dir, "g", okMeta, make([]byte, 8)) + ".sigmf-meta" }, RawParams{SampleRate: 96000}, []string{"--rate 96000 Hz conflicts with core:sample_rate 48000"}},
		{"center conflict", func() string { return writePair(t, dir, "h", okMeta, make([]byte, 8)) + ".sigmf-meta" }, RawParams{CenterHz: 146e6}, []string{"--center", "conflicts"}},
		{"format conflict", func() string { return writePair(t, dir, "i", okMeta, make([]byte, 8)) + ".sigmf-meta" }, RawParams{Format: "cu8"}, []string{"--format cu8 conflicts"}},
		{"no rate anywhere", func() string {
			return writePair(t, dir, "j", strings.Replace(okMeta, `,"core:sample_rate":48000`, "", 1), make([]byte, 8)) + ".sigmf-meta"
		}, RawParams{}, []string{"give --rate"}},
		{"raw without rate", func() string { p := filepath.Join(dir, "k.bin"); writeFile(t, p, make([]byte, 8)); return p }, RawParams{Format: "cu8"}, []string{"--rate"}},
		{"raw without format", func() string { p := filepath.Join(dir, "l.bin"); writeFile(t, p, make([]byte, 8)); return p }, RawParams{SampleRate: 1e6}, []string{"--format"}},
		{"raw negative rate", func() string { p := filepath.Join(dir, "m.bin"); writeFile(t, p, make([]byte, 8)); return p }, RawParams{SampleRate: -1, Format: "cu8"}, []string{"not a positive finite"}},
		{"raw empty", func() string { p := filepath.Join(dir, "n.bin"); writeFile(t, p, nil); return p }, RawParams{SampleRate: 1e6, Format: "cu8"}, []string{"n.bin", "no samples"}},
		{"raw bad format", func() string { p := filepath.Join(dir, "o.bin"); writeFile(t, p, make([]byte, 8)); return p }, RawParams{SampleRate: 1e6, Format: "iq8"}, []string{"unknown datatype \"iq8\""}},
		{"NaN in data", func() string {
			return writePair(t, dir, "p", strings.Replace(okMeta, "ci16_le", "cf32_le", 1), nanData) + ".sigmf-meta"
		}, RawParams{}, []string{"sample 2 is not finite"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, err := Open(c.setup(), c.raw)
			if err == nil {
				buf := make([]complex64, 100)
				_, err = s.Read(buf)
				s.Close()
			}
			if err == nil {
				t.Fatal("no error")
			}
			msg := err.Error()
			if strings.Contains(msg, "\n") {
				t.Errorf("multi-line error: %q", msg)
			}
			for _, h := range c.errHas {
				if !strings.Contains(msg, h) {
					t.Errorf("error %q lacks %q", msg, h)
				}
			}
		})
	}
}

// Metadata values reach Info; the first capture's datetime is moved back to
// sample 0 when the capture starts later; header_bytes are skipped.
func TestOpenSigMFInfoAndHeaderBytes(t *testing.T) {
	dir := t.TempDir()
	meta := `{"global":{"core:datatype":"cu8","core:version":"1.2.0","core:sample_rate":1000,"core:trailing_bytes":3},
	"captures":[{"core:sample_start":0,"core:header_bytes":4,"core:frequency":145.5e6,"core:datetime":"2024-05-01T12:00:00.5Z"},
	{"core:sample_start":2,"core:header_bytes":2}],"annotations":[]}`
	// 4 header bytes, 2 samples, 2 header bytes, 1 sample, 3 trailing bytes.
	data := []byte{9, 9, 9, 9, 0, 255, 128, 127, 9, 9, 10, 20, 7, 7, 7}
	base := writePair(t, dir, "x", meta, data)
	s, err := Open(base+".sigmf-meta", RawParams{CenterHz: 145.5e6})
	if err != nil {
		t.Fatal(err)
	}
	in := s.Info()
	if in.SampleRate != 1000 || in.CenterHz != 145.5e6 || in.Samples != 3 || in.Format != "cu8" ||
		!in.Start.Equal(time.Date(2024, 5, 1, 12, 0, 0, 5e8, time.UTC)) {
		t.Errorf("info = %+v", in)
	}
	got := readAll(t, s, 10)
	want := []complex64{complex(-1, 1), complex(CU8Value(128), CU8Value(127)), complex(CU8Value(10), CU8Value(20))}
	if len(got) != 3 || got[0] != want[0] || got[1] != want[1] || got[2] != want[2] {
		t.Errorf("samples %v, want %v", got, want)
	}
	if _, ok := s.(MetaSource); !ok {
		t.Error("SigMF source lacks Meta()")
	}
	// A capture at sample 1000 with a datetime: Start is one second earlier.
	meta2 := `{"global":{"core:datatype":"cu8","core:version":"1.2.0","core:sample_rate":1000},"captures":[{"core:sample_start":1000,"core:datetime":"2024-05-01T12:00:01Z"}],"annotations":[]}`
	base2 := writePair(t, dir, "y", meta2, make([]byte, 4000))
	s2, err := Open(base2+".sigmf-data", RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	if !s2.Info().Start.Equal(time.Date(2024, 5, 1, 12, 0, 0, 0, time.UTC)) {
		t.Errorf("start = %v", s2.Info().Start)
	}
}

// Writer round trip for every written datatype: values within half a code,
// saturations counted, metadata as specified, hash equal to sha512sum's
// (GNU coreutils) and checked on read.
func TestWriterRoundTrip(t *testing.T) {
	dir := t.TempDir()
	start := time.Date(2025, 3, 4, 5, 6, 7, 890000000, time.UTC)
	in := make([]complex64, 10000)
	for i := range in {
		x := float32(i%200)/100 - 1 // -1 … 0.99
		in[i] = complex(x*0.9, -x*0.9)
	}
	in[5] = complex(1.7, -2) // saturates in integer formats
	for _, c := range []struct {
		dt   string
		step float64 // one code
		sat  int64
	}{{"cu8", 1 / 127.5, 2}, {"ci8", 1.0 / 128, 2}, {"ci16_le", 1.0 / 32768, 2}, {"cf32_le", 0, 0}} {
		t.Run(c.dt, func(t *testing.T) {
			base := filepath.Join(dir, "rec_"+c.dt)
			w, err := CreateSigMF(base, Info{SampleRate: 2.4e6, CenterHz: 145.5e6, Start: start}, c.dt,
				Annotation{SampleStart: 500, Label: "b"})
			if err != nil {
				t.Fatal(err)
			}
			n := uint64(100)
			w.AddAnnotation(Annotation{SampleStart: 100, SampleCount: &n, Label: "a"})
			for i := 0; i < len(in); i += 3333 {
				if err := w.Write(in[i:min(len(in), i+3333)]); err != nil {
					t.Fatal(err)
				}
			}
			if _, err := os.Stat(base + ".sigmf-meta"); err == nil {
				t.Fatal("meta exists before Close")
			}
			if _, err := os.Stat(base + ".sigmf-data"); err == nil {
				t.Fatal("data has its final name before Close")
			}
			if err := w.Close(); err != nil {
				t.Fatal(err)
			}
			if w.Saturations() != c.sat {
				t.Errorf("saturations %d, want %d", w.Saturations(), c.sat)
			}
			s, err := Open(base+".sigmf-meta", RawParams{})
			if err != nil {
				t.Fatal(err)
			}
			defer s.Close()
			info := s.Info()
			if info.SampleRate != 2.4e6 || info.CenterHz != 145.5e6 || !info.Start.Equal(start) || info.Samples != int64(len(in)) {
				t.Errorf("info %+v", info)
			}
			m := s.(MetaSource).Meta()
			if m.Global.Version != "1.2.0" || m.Global.Recorder != "nullseek" || m.Global.Datatype != c.dt ||
				len(m.Annotations) != 2 || m.Annotations[0].Label != "a" || *m.Annotations[0].SampleCount != 100 {
				t.Errorf("meta %+v", m)
			}
			if testtool.Have(t, "sha512sum") {
				out := run(t, "sha512sum", base+".sigmf-data")
				if !strings.HasPrefix(string(out), m.Global.SHA512) {
					t.Errorf("core:sha512 %s != sha512sum %s", m.Global.SHA512, out)
				}
			}
			got := readAll(t, s, 4096) // reaching EOF also verifies the hash
			for i := range in {
				if i == 5 {
					continue
				}
				d := got[i] - in[i]
				if float64(abs32(real(d))) > c.step/2+1e-7 || float64(abs32(imag(d))) > c.step/2+1e-7 {
					t.Fatalf("sample %d: wrote %v read %v", i, in[i], got[i])
				}
			}
		})
	}
	// A changed data file fails the hash check at the end.
	base := filepath.Join(dir, "rec_cu8")
	b, _ := os.ReadFile(base + ".sigmf-data")
	b[100] ^= 1
	writeFile(t, base+".sigmf-data", b)
	s, err := Open(base+".sigmf-meta", RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	buf := make([]complex64, 20000)
	s.Read(buf)
	if _, err := s.Read(buf); err == nil || !strings.Contains(err.Error(), "core:sha512") {
		t.Errorf("corrupt data: %v, want a sha512 mismatch", err)
	}
}

func abs32(x float32) float32 {
	if x < 0 {
		return -x
	}
	return x
}

// Abort leaves no files behind.
func TestWriterAbort(t *testing.T) {
	dir := t.TempDir()
	w, err := CreateSigMF(filepath.Join(dir, "z"), Info{SampleRate: 1e6}, "cu8")
	if err != nil {
		t.Fatal(err)
	}
	w.Write(make([]complex64, 10))
	w.Abort()
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("files left: %v", ents)
	}
	if _, err := CreateSigMF(filepath.Join(dir, "z"), Info{SampleRate: 0}, "cu8"); err == nil {
		t.Error("zero rate accepted")
	}
	if _, err := CreateSigMF(filepath.Join(dir, "z"), Info{SampleRate: 1}, "cf16_le"); err == nil {
		t.Error("bad format accepted")
	}
}
