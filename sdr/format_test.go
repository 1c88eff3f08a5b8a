package sdr

import (
	"bytes"
	"io"
	"math"
	"nullseek/internal/testtool"
	"path/filepath"
	"strings"
	"testing"
)

// The cu8 convention: zero between codes 127 and 128, scale 1/127.5, so the
// rails map to exactly ±1 (RTL-SDR common practice; osmocom's
// own tools subtract 127, rtl_fm.c and rtl_power.c, and (x-127.5)/127.5 is the other common
// choice, which nullseek uses so that the DC offset is zero).
func TestCU8Convention(t *testing.T) {
	cases := []struct {
		b    byte
		want float64
	}{
		{0, -1}, {255, 1}, {127, -0.5 / 127.5}, {128, 0.5 / 127.5}, {64, (64 - 127.5) / 127.5},
	}
	for _, c := range cases {
		if got := CU8Value(c.b); math.Abs(float64(got)-c.want) > 1e-7 {
			t.Errorf("CU8Value(%d) = %v, want %v", c.b, got, c.want)
		}
	}
	// Symmetry: code k and 255-k are opposite.
	for k := 0; k < 256; k++ {
		if CU8Value(byte(k)) != -CU8Value(byte(255-k)) {
			t.Fatalf("cu8 %d and %d not symmetric", k, 255-k)
		}
	}
}

// Clip levels as documented on Info.ClipLevel: integer full scale of each
// format (common practice: signed n-bit max is 2^(n-1)-1 of 2^(n-1)).
func TestClipLevels(t *testing.T) {
	cases := []struct {
		dt   string
		want float32
	}{
		{"cu8", 1}, {"ci8", 127.0 / 128}, {"ci16_le", 32767.0 / 32768}, {"ci16_be", 32767.0 / 32768},
		{"cf32_le", 1}, {"cf64_be", 1}, {"cu16_le", 1},
	}
	for _, c := range cases {
		f, err := parseFormat(c.dt)
		if err != nil {
			t.Fatal(err)
		}
		if f.clip != c.want {
			t.Errorf("%s clip = %v, want %v", c.dt, f.clip, c.want)
		}
	}
}

// Datatype grammar, from the SigMF v1.2.5 ABNF (core:datatype): sized types need an
// endianness suffix, 8-bit types must not have one.
func TestDatatypeGrammar(t *testing.T) {
	good := []string{"cu8", "ci8", "ci16_le", "cf32_le", "ri16_le", "cf64_be", "cu32_be", "ru8"}
	bad := []string{"", "cf32", "ci16", "cu8_le", "xi16_le", "ci24_le", "cf32_LE", "cf32_le ", "c", "cf16_le"}
	for _, s := range good {
		if !ValidDatatype(s) {
			t.Errorf("%q rejected, SigMF allows it", s)
		}
	}
	for _, s := range bad {
		if ValidDatatype(s) {
			t.Errorf("%q accepted, SigMF grammar forbids it", s)
		}
	}
	if _, err := parseFormat("ri16_le"); err == nil || !strings.Contains(err.Error(), "real-valued") {
		t.Errorf("ri16_le: err = %v, want a real-valued error", err)
	}
}

// Raw reader against numpy's decoding of the same bytes (outside reference:
// numpy dtype decode, Debian python3-numpy; script testdata/sdr/numpy_decode.py).
func TestRawAgainstNumpy(t *testing.T) {
	py := testtool.Python(t, "numpy")
	script := filepath.Join(testdataDir(), "numpy_decode.py")
	for i, dt := range []string{"cu8", "ci8", "ci16_le", "ci16_be", "cu16_le", "ci32_le", "cf32_le", "cf32_be", "cf64_le"} {
		t.Run(dt, func(t *testing.T) {
			dir := t.TempDir()
			run(t, py, script, dt, "5000", string(rune('1'+i)), dir)
			want := readCF32(t, filepath.Join(dir, "expected.cf32"))
			s, err := Open(filepath.Join(dir, "data.bin"), RawParams{SampleRate: 1e6, Format: dt})
			if err != nil {
				t.Fatal(err)
			}
			defer s.Close()
			if s.Info().Samples != 5000 || s.Info().Format != dt {
				t.Fatalf("info = %+v", s.Info())
			}
			got := readAll(t, s, 777) // odd block size crosses buffer edges
			if len(got) != len(want) {
				t.Fatalf("got %d samples, numpy %d", len(got), len(want))
			}
			for k := range got {
				if got[k] != want[k] {
					// float64→float32 rounding may differ by an ulp.
					d := got[k] - want[k]
					if math.Abs(float64(real(d))) > 1e-7 || math.Abs(float64(imag(d))) > 1e-7 {
						t.Fatalf("sample %d: got %v, numpy %v", k, got[k], want[k])
					}
				}
			}
		})
	}
}

// Writer encode and reader decode are inverse on every integer code; values
// beyond full scale saturate and are counted.
func TestEncodeSaturation(t *testing.T) {
	cases := []struct {
		dt      string
		in      complex64
		wantOut complex64
		wantSat int
	}{
		{"cu8", complex(1, -1), complex(1, -1), 0},
		{"cu8", complex(1.5, -3), complex(1, -1), 2},
		{"ci8", complex(1, -1), complex(127.0/128, -1), 1}, // +1.0 is one past the top code
		{"ci16_le", complex(0.5, -0.25), complex(0.5, -0.25), 0},
		{"ci16_le", complex(2, 0), complex(32767.0/32768, 0), 1},
		{"cf32_le", complex(7, -7), complex(7, -7), 0},
	}
	for _, c := range cases {
		f, _ := parseFormat(c.dt)
		buf := make([]byte, f.bytesPerSample())
		sat := f.encode(buf, []complex64{c.in})
		out := make([]complex64, 1)
		f.convert(out, buf)
		if sat != c.wantSat || out[0] != c.wantOut {
			t.Errorf("%s %v: got %v sat %d, want %v sat %d", c.dt, c.in, out[0], sat, c.wantOut, c.wantSat)
		}
	}
	f, _ := parseFormat("ci16_le")
	for code := -32768; code <= 32767; code += 1 {
		var in [4]byte
		in[0], in[1] = byte(code), byte(code>>8)
		out := make([]complex64, 1)
		f.convert(out, in[:])
		var back [4]byte
		if f.encode(back[:], out) != 0 || back != in {
			t.Fatalf("ci16 code %d does not round-trip", code)
		}
	}
}

// A pipe of unknown length: whole samples stream, a partial trailing sample
// is an error naming the leftover bytes.
func TestRawUnknownLength(t *testing.T) {
	data := []byte{0, 255, 128, 127, 10, 20, 30}
	s, err := NewRawSource(io.MultiReader(bytes.NewReader(data[:3]), bytes.NewReader(data[3:])), -1, RawParams{SampleRate: 1e6, Format: "cu8"}, "pipe")
	if err != nil {
		t.Fatal(err)
	}
	buf := make([]complex64, 10)
	n, err := s.Read(buf)
	if n != 3 || err == nil || !strings.Contains(err.Error(), "1 bytes left over") {
		t.Fatalf("n=%d err=%v, want 3 samples and a 1-byte leftover error", n, err)
	}
	if buf[0] != complex(-1, 1) {
		t.Errorf("first sample %v", buf[0])
	}
}

// ReadCU8 returns the file's bytes unchanged, whole pairs only, sharing the
// position with Read.
func TestReadCU8(t *testing.T) {
	dir := t.TempDir()
	data := make([]byte, 1000)
	for i := range data {
		data[i] = byte(i * 7)
	}
	p := filepath.Join(dir, "x.cu8")
	writeFile(t, p, data)
	s, err := Open(p, RawParams{SampleRate: 2.4e6, Format: "cu8"})
	if err != nil {
		t.Fatal(err)
	}
	cr, ok := s.(CU8Reader)
	if !ok {
		t.Fatal("cu8 raw source does not implement CU8Reader")
	}
	b := make([]byte, 301)
	n, err := cr.ReadCU8(b)
	if err != nil || n != 300 || !bytes.Equal(b[:n], data[:300]) {
		t.Fatalf("ReadCU8 = %d, %v", n, err)
	}
	iq := make([]complex64, 1)
	s.Read(iq)
	if iq[0] != complex(CU8Value(data[300]), CU8Value(data[301])) {
		t.Errorf("Read after ReadCU8 did not continue at sample 150")
	}
	rest, _ := io.ReadAll(readerFunc(cr.ReadCU8))
	if !bytes.Equal(rest, data[302:]) {
		t.Errorf("rest mismatch: %d bytes", len(rest))
	}
	s2, _ := Open(p, RawParams{SampleRate: 2.4e6, Format: "ci8"})
	if _, err := s2.(CU8Reader).ReadCU8(b); err == nil {
		t.Error("ReadCU8 on ci8 data succeeded")
	}
}

type readerFunc func([]byte) (int, error)

func (f readerFunc) Read(p []byte) (int, error) { return f(p) }

func BenchmarkReadCU8AsComplex(b *testing.B) {
	data := make([]byte, 1<<20)
	buf := make([]complex64, 8192)
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		s, _ := NewRawSource(bytes.NewReader(data), int64(len(data)), RawParams{SampleRate: 2.4e6, Format: "cu8"}, "bench")
		for {
			if _, err := s.Read(buf); err != nil {
				break
			}
		}
	}
}

// The cu8 fast path writes exactly the codes of the general rule
// (quantise(x*127.5+127.5, 0, 255), NaN to the code nearest zero) for every
// code's centre and both half-code boundaries, values beyond full scale and
// NaN, with the same saturation count.
func TestEncodeCU8MatchesQuantise(t *testing.T) {
	var xs []float32
	for code := -2; code <= 257; code++ {
		for _, d := range []float64{-0.5, -0.25, 0, 0.25, 0.5} {
			y := float64(code) + d
			x := float32((y - 127.5) / 127.5)
			xs = append(xs, x, math.Nextafter32(x, 2), math.Nextafter32(x, -2))
		}
	}
	xs = append(xs, float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1)), 3, -3)
	src := make([]complex64, len(xs))
	for i, x := range xs {
		src[i] = complex(x, -x)
	}
	got := make([]byte, 2*len(src))
	sat := encodeCU8(got, src)
	wantSat := 0
	for i, v := range src {
		for c, x := range [2]float32{real(v), imag(v)} {
			q, s := quantise(float64(x)*127.5+127.5, 0, 255)
			wantSat += s
			if got[2*i+c] != byte(q) {
				t.Fatalf("x=%v: cu8 fast path wrote %d, quantise %d", x, got[2*i+c], q)
			}
		}
	}
	if sat != wantSat {
		t.Errorf("saturated %d components, quantise counts %d", sat, wantSat)
	}
}

func BenchmarkEncodeCU8(b *testing.B) {
	f, _ := parseFormat("cu8")
	src := make([]complex64, 8192)
	for i := range src {
		src[i] = complex(float32(math.Sin(float64(i)*0.01)), float32(math.Cos(float64(i)*0.013)))
	}
	dst := make([]byte, 2*len(src))
	b.SetBytes(int64(len(src)))
	for b.Loop() {
		f.encode(dst, src)
	}
}
