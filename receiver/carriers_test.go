package receiver

import (
	"bytes"
	"math"
	"testing"

	"nullseek/sdr"
)

// TestFindCarriersBounds: a resolution that is NaN, negative, infinite or
// so fine that the FFT would not fit is refused at once, instead of
// looping or allocating without bound.
func TestFindCarriersBounds(t *testing.T) {
	data := bytes.Repeat([]byte{127, 128}, 4800)
	for _, bin := range []float64{math.NaN(), -1, math.Inf(1), 1e-9} {
		src, err := sdr.NewRawSource(bytes.NewReader(data), int64(len(data)), sdr.RawParams{SampleRate: 48000, Format: "cu8"}, "test")
		if err != nil {
			t.Fatal(err)
		}
		if _, err := FindCarriers(src, CarrierSearch{BinHz: bin}); err == nil {
			t.Errorf("BinHz %v: accepted", bin)
		}
	}
	src, _ := sdr.NewRawSource(bytes.NewReader(data), int64(len(data)), sdr.RawParams{SampleRate: 48000, Format: "cu8"}, "test")
	if _, err := FindCarriers(src, CarrierSearch{}); err != nil {
		t.Errorf("defaults: %v", err)
	}
}
