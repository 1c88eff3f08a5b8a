package sdr

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"
)

// openErr opens path and returns the error of Open, or of the first Read
// when Open succeeds; it fails the test on a multi-line error.
func openErr(t *testing.T, path string, raw RawParams) error {
	t.Helper()
	s, err := Open(path, raw)
	if err == nil {
		buf := make([]complex64, 64)
		_, err = s.Read(buf)
		s.Close()
	}
	if err != nil && strings.Contains(err.Error(), "\n") {
		t.Errorf("multi-line error: %q", err)
	}
	return err
}

// wantErr checks err is non-nil and mentions every fragment.
func wantErr(t *testing.T, what string, err error, has ...string) {
	t.Helper()
	if err == nil {
		t.Errorf("%s: accepted, want an error mentioning %q", what, has)
		return
	}
	for _, h := range has {
		if !strings.Contains(err.Error(), h) {
			t.Errorf("%s: error %q lacks %q", what, err, h)
		}
	}
}

// The sample rate of every kind of recording is bounded to 1 kS/s–100 MS/s
// (MaxSampleRate's doc gives the reason). The cases are the ones a probe
// of hostile inputs found: a SigMF core:sample_rate of 1e12 died out of
// memory, a raw --rate 1e11 panicked in the FFT, 1e300 looped for ever and
// 1e10 took 1.6 GB before a vague error. Each must now be refused by Open,
// before any buffer is sized from it, with little memory.
func TestSampleRateBound(t *testing.T) {
	dir := t.TempDir()
	raw := filepath.Join(dir, "r.cu8")
	writeFile(t, raw, make([]byte, 4096))
	var before runtime.MemStats
	runtime.ReadMemStats(&before)
	for _, r := range []float64{1e12, 1e11, 1e300, 1e10, 100e6 + 1, 999, 1e-300, math.Inf(1), math.NaN(), -2.4e6} {
		name := fmt.Sprintf("rate %g", r)
		wantErr(t, "raw "+name, openErr(t, raw, RawParams{SampleRate: r, Format: "cu8"}), "r.cu8", "--rate")
		// SigMF JSON has no NaN or Inf literals; ParseMeta refuses
		// non-positive rates itself.
		if !math.IsNaN(r) && !math.IsInf(r, 0) && r > 0 {
			meta := fmt.Sprintf(`{"global":{"core:datatype":"cu8","core:version":"1.2.0","core:sample_rate":%g},"captures":[],"annotations":[]}`, r)
			base := writePair(t, dir, fmt.Sprintf("s%d", int(math.Log10(r)+400)), meta, make([]byte, 4096))
			wantErr(t, "SigMF "+name, openErr(t, base+".sigmf-meta", RawParams{}), "core:sample_rate")
		}
	}
	var after runtime.MemStats
	runtime.ReadMemStats(&after)
	if grew := after.TotalAlloc - before.TotalAlloc; grew > 64<<20 {
		t.Errorf("refusing the rates allocated %d MB", grew>>20)
	}
	// The edges are accepted.
	for _, r := range []float64{MinSampleRate, 48000, 2.4e6, MaxSampleRate} {
		if err := openErr(t, raw, RawParams{SampleRate: r, Format: "cu8"}); err != nil {
			t.Errorf("rate %g refused: %v", r, err)
		}
	}
	// The message states the bound and what to do.
	err := openErr(t, raw, RawParams{SampleRate: 1e11, Format: "cu8"})
	wantErr(t, "message", err, "1 kS/s–100 MS/s", "decimate")
}

// A WAV header's rate is a uint32: anything above 100 MS/s (up to 4.29 GS/s)
// is refused like a SigMF rate.
func TestWAVRateBound(t *testing.T) {
	dir := t.TempDir()
	for _, rate := range []uint32{0, 999, 100e6 + 1, math.MaxUint32} {
		p := filepath.Join(dir, fmt.Sprintf("w%d.wav", rate))
		writeFile(t, p, wavBytes(rate, 2, 16, 4, 1, 16))
		wantErr(t, fmt.Sprintf("WAV rate %d", rate), openErr(t, p, RawParams{}), "WAV header's rate")
	}
	p := filepath.Join(dir, "ok.wav")
	writeFile(t, p, wavBytes(48000, 2, 16, 4, 1, 16))
	if err := openErr(t, p, RawParams{}); err != nil {
		t.Errorf("48 kS/s WAV refused: %v", err)
	}
}

// wavBytes builds a RIFF/WAVE file by the layout of the Microsoft/IBM
// Multimedia Programming Interface and Data Specifications 1.0 (1991):
// "RIFF" size "WAVE", a 16-byte "fmt " chunk (wFormatTag, nChannels,
// nSamplesPerSec, nAvgBytesPerSec, nBlockAlign, wBitsPerSample) and a
// "data" chunk of dataBytes zero bytes.
func wavBytes(rate uint32, channels, bits, blockAlign, tag uint16, dataBytes int) []byte {
	var b bytes.Buffer
	le := func(v any) { binary.Write(&b, binary.LittleEndian, v) }
	b.WriteString("RIFF")
	le(uint32(4 + 8 + 16 + 8 + dataBytes))
	b.WriteString("WAVEfmt ")
	le(uint32(16))
	le(tag)
	le(channels)
	le(rate)
	le(rate * uint32(blockAlign))
	le(blockAlign)
	le(bits)
	b.WriteString("data")
	le(uint32(dataBytes))
	b.Write(make([]byte, dataBytes))
	return b.Bytes()
}

// The WAV block (nBlockAlign) must be nChannels × wBitsPerSample/8 (RIFF/WAVE
// 1.0, "Data Packing for PCM WAVE Files"): a header that disagrees leaves
// the data's layout unknown and is refused.
func TestWAVBlockAlign(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "a.wav")
	writeFile(t, p, wavBytes(48000, 2, 16, 6, 1, 24))
	wantErr(t, "block align 6 for 2×16 bits", openErr(t, p, RawParams{}), "6-byte sample frames", "corrupt")
	writeFile(t, p, wavBytes(48000, 2, 16, 0, 1, 24))
	wantErr(t, "block align 0", openErr(t, p, RawParams{}), "0-byte sample frames")
}

// A WAV file of endless empty chunks before its data is refused after
// maxWAVChunks, not walked one read per chunk.
func TestWAVChunkBound(t *testing.T) {
	var b bytes.Buffer
	b.WriteString("RIFF\xff\xff\xff\xffWAVE")
	for i := 0; i < 100000; i++ {
		b.WriteString("JUNK\x00\x00\x00\x00")
	}
	p := filepath.Join(t.TempDir(), "j.wav")
	writeFile(t, p, b.Bytes())
	wantErr(t, "100000 empty chunks", openErr(t, p, RawParams{}), "more than 256 chunks")
}

// Centre frequencies (raw --center, SigMF core:frequency of any capture,
// a WAV's --center) are 0 (unknown) or within 0–3000 GHz (ITU RR No. 1.5).
func TestCenterBound(t *testing.T) {
	dir := t.TempDir()
	raw := filepath.Join(dir, "r.cu8")
	writeFile(t, raw, make([]byte, 64))
	for _, f := range []float64{-1, -145e6, 3.0001e12, math.NaN(), math.Inf(-1)} {
		wantErr(t, fmt.Sprintf("raw --center %g", f), openErr(t, raw, RawParams{SampleRate: 1e6, Format: "cu8", CenterHz: f}), "--center")
	}
	for _, f := range []float64{0, 9e3, 145.5e6, 3e12} {
		if err := openErr(t, raw, RawParams{SampleRate: 1e6, Format: "cu8", CenterHz: f}); err != nil {
			t.Errorf("--center %g refused: %v", f, err)
		}
	}
	for i, capt := range []string{
		`[{"core:sample_start":0,"core:frequency":-145e6}]`,
		`[{"core:sample_start":0,"core:frequency":145e6},{"core:sample_start":4,"core:frequency":-1}]`,
	} {
		meta := `{"global":{"core:datatype":"cu8","core:version":"1.2.0","core:sample_rate":1e6},"captures":` + capt + `,"annotations":[]}`
		base := writePair(t, dir, fmt.Sprintf("c%d", i), meta, make([]byte, 64))
		wantErr(t, "core:frequency "+capt, openErr(t, base+".sigmf-meta", RawParams{}), "core:frequency", "not negative")
	}
	w := filepath.Join(dir, "w.wav")
	writeFile(t, w, wavBytes(48000, 2, 16, 4, 1, 16))
	wantErr(t, "WAV --center -1", openErr(t, w, RawParams{CenterHz: -1}), "--center")
}

// core:header_bytes and core:trailing_bytes (uint64 in SigMF v1.2.5) are
// each and together bounded by the data size; no sum of huge values wraps
// around int64 into an accepted size.
func TestHeaderTrailingBytesBound(t *testing.T) {
	dir := t.TempDir()
	big := uint64(1) << 62
	cases := []struct {
		name, global, captures, has string
	}{
		{"trailing 2^64-1", `,"core:trailing_bytes":18446744073709551615`, `[]`, "core:trailing_bytes"},
		{"trailing above size", `,"core:trailing_bytes":65`, `[]`, "exceeds the data size 64"},
		{"header 2^63", ``, `[{"core:sample_start":0,"core:header_bytes":9223372036854775808}]`, "captures[0] core:header_bytes"},
		{"headers that wrap", ``, fmt.Sprintf(`[{"core:sample_start":0,"core:header_bytes":%d},{"core:sample_start":1,"core:header_bytes":%d},{"core:sample_start":2,"core:header_bytes":%d},{"core:sample_start":3,"core:header_bytes":%d}]`, big, big, big, big), "core:header_bytes"},
		{"header plus trailing above size", `,"core:trailing_bytes":40`, `[{"core:sample_start":0,"core:header_bytes":30}]`, "exceed the data size 64"},
	}
	for i, c := range cases {
		meta := `{"global":{"core:datatype":"cu8","core:version":"1.2.0","core:sample_rate":1e6` + c.global + `},"captures":` + c.captures + `,"annotations":[]}`
		base := writePair(t, dir, fmt.Sprintf("h%d", i), meta, make([]byte, 64))
		wantErr(t, c.name, openErr(t, base+".sigmf-meta", RawParams{}), c.has)
	}
}

// Capture indices (core:sample_start) point into the data: beyond its last
// sample, or beyond int64, is refused; at its end (an empty segment) is not.
func TestCaptureIndexBound(t *testing.T) {
	dir := t.TempDir()
	for i, c := range []struct {
		captures string
		ok       bool
	}{
		{`[{"core:sample_start":0},{"core:sample_start":33}]`, false},
		{`[{"core:sample_start":18446744073709551615,"core:datetime":"2024-01-01T00:00:00Z"}]`, false},
		{`[{"core:sample_start":9223372036854775808,"core:header_bytes":2}]`, false},
		{`[{"core:sample_start":0},{"core:sample_start":32}]`, true},
	} {
		meta := `{"global":{"core:datatype":"cu8","core:version":"1.2.0","core:sample_rate":1e6},"captures":` + c.captures + `,"annotations":[]}`
		base := writePair(t, dir, fmt.Sprintf("i%d", i), meta, make([]byte, 64))
		err := openErr(t, base+".sigmf-meta", RawParams{})
		if c.ok {
			if err != nil {
				t.Errorf("%s: %v", c.captures, err)
			}
			continue
		}
		wantErr(t, c.captures, err, "core:sample_start")
	}
}

// A recording may span at most ten years of samples (MaxRecordingS): a
// stream that claims more (a sparse file, a lying size) is refused before
// a sample time can leave time.Duration's range.
func TestRecordingLengthBound(t *testing.T) {
	tenYears := int64(MaxRecordingS * 1000)
	_, err := NewRawSource(bytes.NewReader(nil), 2*(tenYears+1000), RawParams{SampleRate: 1000, Format: "cu8"}, "long")
	wantErr(t, "ten years and a second at 1 kS/s", err, "long", "10 years")
	s, err := NewRawSource(bytes.NewReader(nil), 2*tenYears, RawParams{SampleRate: 1000, Format: "cu8"}, "long")
	if err != nil {
		t.Fatalf("exactly ten years refused: %v", err)
	}
	s.Close()
	// Sparse SigMF data of 5 TB at 1 kS/s cf64 is 10.0 years: fine; a
	// capture that starts at its last sample, with a datetime, still
	// gives a valid start ten years earlier.
	dir := t.TempDir()
	base := filepath.Join(dir, "sparse")
	meta := `{"global":{"core:datatype":"cf64_le","core:version":"1.2.0","core:sample_rate":1000},"captures":[{"core:sample_start":315000000000,"core:datetime":"2034-01-01T00:00:00Z"}],"annotations":[]}`
	writeFile(t, base+".sigmf-meta", []byte(meta))
	f, err := os.Create(base + ".sigmf-data")
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Truncate(16 * 315000000000); err != nil {
		f.Close()
		t.Skipf("this file system cannot hold a 5 TB sparse file: %v", err)
	}
	f.Close()
	src, err := Open(base+".sigmf-meta", RawParams{})
	if err != nil {
		t.Fatalf("9.98 years of sparse cf64: %v", err)
	}
	if want := time.Date(2034, 1, 1, 0, 0, 0, 0, time.UTC).Add(-315e6 * time.Second); !src.Info().Start.Equal(want) {
		t.Errorf("start %v, want about %v (315e9 samples at 1 kS/s before 2034-01-01)", src.Info().Start, want)
	}
	src.Close()
	if err := os.Truncate(base+".sigmf-data", 16*316000000000); err != nil {
		t.Fatal(err)
	}
	wantErr(t, "10.01 years of sparse cf64", openErr(t, base+".sigmf-meta", RawParams{}), "10 years")
}

// Info.Validate holds every source's numbers to the package bounds.
func TestInfoValidate(t *testing.T) {
	ok := Info{SampleRate: 2.4e6, CenterHz: 145e6, Samples: 100, ClipLevel: 1}
	if err := ok.Validate(); err != nil {
		t.Fatal(err)
	}
	bad := map[string]Info{
		"rate 0":          {SampleRate: 0, Samples: -1, ClipLevel: 1},
		"rate 1e12":       {SampleRate: 1e12, Samples: -1, ClipLevel: 1},
		"centre negative": {SampleRate: 1e6, CenterHz: -1, Samples: -1, ClipLevel: 1},
		"samples -2":      {SampleRate: 1e6, Samples: -2, ClipLevel: 1},
		"clip 0":          {SampleRate: 1e6, Samples: -1},
		"clip NaN":        {SampleRate: 1e6, Samples: -1, ClipLevel: float32(math.NaN())},
		"11 years":        {SampleRate: 1e6, Samples: int64(11 * 365.25 * 86400 * 1e6), ClipLevel: 1},
	}
	for name, in := range bad {
		if err := in.Validate(); err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
}

// RTL2832 configuration: the rates librtlsdr's rtlsdr_set_sample_rate
// accepts (osmocom rtl-sdr src/librtlsdr.c: not ≤ 225000, not in
// (300000, 900000], not > 3200000), sent as whole Hz; the other fields
// within their documented ranges.
func TestRTLConfigBounds(t *testing.T) {
	for _, c := range []struct {
		rate float64
		ok   bool
	}{
		{225000, false}, {225001, true}, {300000, true}, {300001, false}, {900000, false},
		{900001, true}, {2.4e6, true}, {3200000, true}, {3200001, false}, {1e300, false},
		{math.NaN(), false}, {225000.4, false}, {225000.6, true},
	} {
		err := RTLConfig{SampleRate: c.rate}.check()
		if (err == nil) != c.ok {
			t.Errorf("rate %v: error %v, want ok=%v", c.rate, err, c.ok)
		}
		if err != nil && !c.ok && !math.IsNaN(c.rate) && !strings.Contains(err.Error(), "225001–300000 or 900001–3200000") {
			t.Errorf("rate %v: error %q does not state the ranges", c.rate, err)
		}
	}
	if r, _ := rtlRate(225000.6); r != 225001 {
		t.Errorf("rate 225000.6 is sent as %d, want 225001", r)
	}
	base := RTLConfig{SampleRate: 2.4e6}
	for name, mod := range map[string]func(*RTLConfig){
		"centre -1":      func(c *RTLConfig) { c.CenterHz = -1 },
		"centre 2^32":    func(c *RTLConfig) { c.CenterHz = 1 << 32 },
		"centre NaN":     func(c *RTLConfig) { c.CenterHz = math.NaN() },
		"gain 101":       func(c *RTLConfig) { c.GainDB = 101 },
		"gain NaN":       func(c *RTLConfig) { c.GainDB = math.NaN() },
		"ppm 1001":       func(c *RTLConfig) { c.PPM = 1001 },
		"ppm -1001":      func(c *RTLConfig) { c.PPM = -1001 },
		"settle 11 s":    func(c *RTLConfig) { c.SettleSamples = 11 * 2400000 },
		"settle -1":      func(c *RTLConfig) { c.SettleSamples = -1 },
		"timeout -1":     func(c *RTLConfig) { c.NoDataTimeout = -1 },
		"timeout 11 min": func(c *RTLConfig) { c.NoDataTimeout = 11 * time.Minute },
		"direct 3":       func(c *RTLConfig) { c.DirectSampling = 3 },
	} {
		c := base
		mod(&c)
		if err := c.check(); err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
	good := RTLConfig{SampleRate: 2.4e6, CenterHz: 1766e6, GainDB: 49.6, PPM: -60, SettleSamples: 240000, NoDataTimeout: time.Minute}
	if err := good.check(); err != nil {
		t.Errorf("a usual configuration: %v", err)
	}
}
