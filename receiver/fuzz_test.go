package receiver

import (
	"bytes"
	"strings"
	"testing"

	"nullseek/sdr"
)

// FuzzRateSizing: whatever rate a recording declares, sizing the stages
// from it is bounded. The sdr edge refuses a rate outside
// [sdr.MinSampleRate, sdr.MaxSampleRate] in one line (a probe found
// --rate 1e11 panicking in the FFT, 1e300 looping for ever and 1e12 out of
// memory); for every rate it accepts, the carrier search (the rate → FFT
// size loop) and the front end's channel plan are built without a panic,
// an endless loop or an FFT larger than 2^20 points, and any refusal is
// one line.
func FuzzRateSizing(f *testing.F) {
	for _, r := range []float64{2.4e6, 1e3, 1e8, 1e8 + 1, 1e11, 1e300, 1e12, 999, 0, -1, 48000, 250000, 3.2e6} {
		f.Add(r, float64(0))
	}
	f.Add(2.4e6, 100e3)
	data := make([]byte, 8192) // 4096 cu8 samples, a flat level
	for i := range data {
		data[i] = byte(128 + i%3)
	}
	f.Fuzz(func(t *testing.T, rate, offset float64) {
		src, err := sdr.NewRawSource(bytes.NewReader(data), int64(len(data)), sdr.RawParams{SampleRate: rate, Format: "cu8"}, "fuzz")
		inBounds := rate >= sdr.MinSampleRate && rate <= sdr.MaxSampleRate
		if (err == nil) != inBounds {
			t.Fatalf("rate %v: open error %v, in bounds %v", rate, err, inBounds)
		}
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("multi-line error %q", err)
			}
			return
		}
		_, err = FindCarriers(src, CarrierSearch{})
		src.Close()
		if err != nil {
			msg := err.Error()
			if strings.Contains(msg, "\n") {
				t.Fatalf("multi-line error %q", msg)
			}
			// "too short for a spectrum (N samples, need NFFT)"
			if i := strings.LastIndex(msg, "need "); i >= 0 && len(msg)-i > len("need 1048576)") {
				t.Fatalf("FFT size beyond 2^20 at %v S/s: %s", rate, msg)
			}
		}
		info := src.Info()
		s, err := NewScanner(info, Config{OffsetHz: offset})
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("multi-line error %q", err)
			}
			return
		}
		if s.OffsetHz() != offset {
			t.Fatalf("offset %v became %v", offset, s.OffsetHz())
		}
	})
}
