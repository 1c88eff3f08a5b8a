package ident

import (
	"encoding/binary"
	"fmt"
	"os"
	"path/filepath"
	"testing"
)

// mcReadWAV reads a mono PCM WAV (8-bit unsigned or 16-bit signed) into
// float32 in [-1, 1). Test helper for the fixtures in testdata/morse.
func mcReadWAV(path string) ([]float32, float64, error) {
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

const morseDir = "../testdata/morse"

// TestDebugDecodeWAV decodes the WAV named by NULLSEEK_DEBUG_WAV (a
// developer aid; skipped otherwise).
func TestDebugDecodeWAV(t *testing.T) {
	p := os.Getenv("NULLSEEK_DEBUG_WAV")
	if p == "" {
		t.Skip("set NULLSEEK_DEBUG_WAV=file.wav to decode a file")
	}
	files, _ := filepath.Glob(p)
	for _, f := range files {
		a, rate, err := mcReadWAV(f)
		if err != nil {
			t.Fatal(err)
		}
		d, err := DecodeTone(a, rate, DecodeOptions{})
		if err != nil {
			t.Logf("%s: %v", f, err)
			continue
		}
		t.Logf("%s: %q tone %.1f Hz, %.1f WPM (eff %.1f), SNR %.1f dB, warn %v", filepath.Base(f), d.Text, d.ToneHz, d.WPM, d.FarnsworthWPM, d.SNRDB, d.Warnings)
	}
}
