// Package identtest holds the helpers the ident packages' tests share:
// reading the committed WAV fixtures and their manifests, the character
// error rate (testtool's), and running the outside peer decoder (multimon-ng). Only
// tests import it.
package identtest

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"strconv"
	"strings"
	"testing"
)

// Root is the repository root, found from this file's location so that
// every package's tests reach the same testdata.
var Root = func() string {
	_, f, _, _ := runtime.Caller(0)
	return filepath.Join(filepath.Dir(f), "..", "..", "..")
}()

// MorseDir is testdata/morse (the ebook2cw and GNU Radio fixtures).
var MorseDir = filepath.Join(Root, "testdata", "morse")

// ReadWAV reads a mono PCM WAV (8-bit unsigned or 16-bit signed) into
// float32 in [-1, 1), with its sample rate.
func ReadWAV(path string) ([]float32, float64, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, 0, err
	}
	if len(b) < 12 || string(b[0:4]) != "RIFF" || string(b[8:12]) != "WAVE" {
		return nil, 0, fmt.Errorf("%s: not a RIFF/WAVE file", path)
	}
	var rate float64
	var bits, chans, format int
	for p := 12; p+8 <= len(b); {
		id, n := string(b[p:p+4]), int(binary.LittleEndian.Uint32(b[p+4:p+8]))
		body := b[p+8:]
		if n > len(body) {
			n = len(body)
		}
		switch id {
		case "fmt ":
			if n < 16 {
				return nil, 0, fmt.Errorf("%s: short fmt chunk", path)
			}
			format = int(binary.LittleEndian.Uint16(body[0:2]))
			chans = int(binary.LittleEndian.Uint16(body[2:4]))
			rate = float64(binary.LittleEndian.Uint32(body[4:8]))
			bits = int(binary.LittleEndian.Uint16(body[14:16]))
			if format == 0xFFFE && n >= 26 { // WAVE_FORMAT_EXTENSIBLE: subformat GUID
				format = int(binary.LittleEndian.Uint16(body[24:26]))
			}
		case "data":
			if format != 1 || chans != 1 {
				return nil, 0, fmt.Errorf("%s: want mono PCM, got format %d, %d channels", path, format, chans)
			}
			var out []float32
			switch bits {
			case 16:
				out = make([]float32, n/2)
				for i := range out {
					out[i] = float32(int16(binary.LittleEndian.Uint16(body[2*i:]))) / 32768
				}
			case 8:
				out = make([]float32, n)
				for i := range out {
					out[i] = (float32(body[i]) - 128) / 128
				}
			default:
				return nil, 0, fmt.Errorf("%s: %d-bit samples not supported", path, bits)
			}
			return out, rate, nil
		}
		p += 8 + n + n%2
	}
	return nil, 0, fmt.Errorf("%s: no data chunk", path)
}

// MustReadWAV is ReadWAV that fails the test on error.
func MustReadWAV(t testing.TB, path string) ([]float32, float64) {
	t.Helper()
	a, rate, err := ReadWAV(path)
	if err != nil {
		t.Fatal(err)
	}
	return a, rate
}

// Atof parses a manifest number or fails the test.
func Atof(t testing.TB, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("manifest number %q: %v", s, err)
	}
	return v
}

// Multimon decodes a WAV with multimon-ng's MORSE_CW decoder (Debian
// multimon-ng 1.2.0): sox resamples it to raw 22050 Hz s16le, the input
// multimon-ng's help asks for. sox and mm are the programs' paths (from
// testtool.Need).
func Multimon(t testing.TB, sox, mm, wav string) string {
	t.Helper()
	s := exec.Command(sox, wav, "-t", "raw", "-r", "22050", "-e", "signed-integer", "-b", "16", "-c", "1", "-")
	raw, err := s.Output()
	if err != nil {
		t.Fatalf("sox %s: %v", wav, err)
	}
	m := exec.Command(mm, "-q", "-c", "-a", "MORSE_CW", "-t", "raw", "-")
	m.Stdin = bytes.NewReader(raw)
	out, err := m.Output()
	if err != nil {
		t.Fatalf("multimon-ng %s: %v", wav, err)
	}
	return strings.TrimSpace(mmLongMark.ReplaceAllString(string(out), " "))
}

// mmLongMark is how multimon-ng writes key-down it cannot place in a
// character: "<" and ">" around the elements, "_" for one far longer than
// a dash. One made only of such long marks is a long steady tone, no
// character; it is dropped before scoring (as our decoder reads it, a
// word break).
var mmLongMark = regexp.MustCompile(`<_+>`)

// ReadF32 reads a file of float32 little-endian samples (GNU Radio's
// file_sink of floats on this platform).
func ReadF32(t testing.TB, path string) []float32 {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	p := make([]float32, len(b)/4)
	for i := range p {
		p[i] = math.Float32frombits(binary.LittleEndian.Uint32(b[4*i:]))
	}
	return p
}

// FieldScript is testdata/ident/make_field.py, the GNU Radio generator of
// the field-condition recordings.
var FieldScript = filepath.Join(Root, "testdata", "ident", "make_field.py")

// RunField runs make_field.py with python (testtool.GNURadio's answer) and
// args, into a fresh temporary directory it returns.
func RunField(t testing.TB, python string, args ...string) string {
	t.Helper()
	dir := t.TempDir()
	cmd := exec.Command(python, append([]string{FieldScript, args[0], "--out", dir}, args[1:]...)...)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("make_field.py %s: %v\n%s", strings.Join(args, " "), err, out)
	}
	return dir
}
