package sdr

import (
	"bytes"
	"errors"
	"io"
	"os"
	"path/filepath"
	"testing"
)

// FuzzParseMeta: any input gives a *Meta or an error, never a panic; what
// parses survives a marshal/parse round trip.
func FuzzParseMeta(f *testing.F) {
	if b, err := os.ReadFile(filepath.Join(testdataDir(), "sigmf_logo.sigmf-meta")); err == nil {
		f.Add(b)
	}
	seeds := []string{
		`{"global":{"core:datatype":"cu8","core:version":"1.2.0"},"captures":[],"annotations":[]}`,
		`{"global":{"core:datatype":"cf32_le","core:version":"1.2.0","core:sample_rate":2.4e6,"core:extensions":[{"name":"antenna","version":"1.0.0","optional":true}],"core:geolocation":{"type":"Point","coordinates":[1,2,3]}},"captures":[{"core:sample_start":0,"core:frequency":1.455e8,"core:datetime":"2024-01-01T00:00:00.5Z","core:header_bytes":4}],"annotations":[{"core:sample_start":1,"core:sample_count":2,"core:freq_lower_edge":1,"core:freq_upper_edge":2,"core:label":"x"}]}`,
		`{"global":{"core:datatype":"ci16_le","core:version":"1.2.0"},"captures":[{"core:sample_start":5},{"core:sample_start":1}]}`,
		`{"global":null}`, `[]`, `{`, `{"global":{"core:datatype":1}}`, `{"captures":[{"core:datetime":"x"}]}`,
	}
	for _, s := range seeds {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := ParseMeta(b)
		if err != nil {
			if m != nil {
				t.Fatal("meta and error")
			}
			return
		}
		out, err := m.MarshalJSON()
		if err != nil {
			t.Fatalf("marshal of parsed meta: %v", err)
		}
		if _, err := ParseMeta(out); err != nil {
			t.Fatalf("re-parse failed: %v\ninput %q\noutput %s", err, b, out)
		}
	})
}

// FuzzRawReader: arbitrary bytes in any datatype, known or unknown length,
// read with arbitrary block sizes: no panic, sample counts consistent with
// the byte count, errors only for leftover bytes, emptiness or non-finite
// floats.
func FuzzRawReader(f *testing.F) {
	f.Add([]byte{0, 255, 127, 128}, uint8(0), uint8(3), false)
	f.Add([]byte{1, 2, 3, 4, 5, 6, 7, 8, 0, 0, 0xc0, 0x7f, 0, 0, 0, 0}, uint8(3), uint8(1), true)
	f.Add([]byte{1, 2, 3}, uint8(2), uint8(7), false)
	f.Add([]byte{}, uint8(1), uint8(1), true)
	formats := []string{"cu8", "ci8", "ci16_le", "cf32_le", "cf32_be", "cf64_le", "cu16_be", "ci32_le"}
	f.Fuzz(func(t *testing.T, data []byte, fi, block uint8, unknown bool) {
		dt := formats[int(fi)%len(formats)]
		fmt, _ := parseFormat(dt)
		size := int64(len(data))
		if unknown {
			size = -1
		}
		s, err := NewRawSource(bytes.NewReader(data), size, RawParams{SampleRate: 1e6, Format: dt}, "fuzz")
		if err != nil {
			if !unknown && (len(data) == 0 || len(data)%fmt.bytesPerSample() != 0) {
				return
			}
			t.Fatalf("unexpected open error: %v", err)
		}
		buf := make([]complex64, int(block)+1)
		total := 0
		for {
			n, err := s.Read(buf)
			if n < 0 || n > len(buf) {
				t.Fatalf("n = %d", n)
			}
			total += n
			if err != nil {
				if !errors.Is(err, io.EOF) && !fmt.isFloat() && len(data)%fmt.bytesPerSample() == 0 && len(data) > 0 {
					t.Fatalf("integer data of whole samples failed: %v", err)
				}
				break
			}
		}
		if total > len(data)/fmt.bytesPerSample() {
			t.Fatalf("read %d samples from %d bytes", total, len(data))
		}
		if !fmt.isFloat() && len(data)%fmt.bytesPerSample() == 0 && total != len(data)/fmt.bytesPerSample() {
			t.Fatalf("read %d of %d samples", total, len(data)/fmt.bytesPerSample())
		}
	})
}
