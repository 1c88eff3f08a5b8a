package receiver

import (
	"context"
	"io"
	"math"
	"math/rand"
	"testing"

	"nullseek/sdr"
)

// toneSource is a carrier at offsetHz switched on during the given
// intervals, plus complex Gaussian noise, as complex64 (cf32) samples.
type toneSource struct {
	rate, offsetHz, amp, sigma float64
	on                         [][2]float64
	n, total                   int64
	rng                        *rand.Rand
}

func (s *toneSource) Info() sdr.Info {
	return sdr.Info{SampleRate: s.rate, Format: "cf32_le", Name: "tone", Samples: s.total, ClipLevel: 1}
}
func (s *toneSource) Close() error { return nil }
func (s *toneSource) Read(dst []complex64) (int, error) {
	if s.n >= s.total {
		return 0, io.EOF
	}
	k := 0
	for ; k < len(dst) && s.n < s.total; k++ {
		t := float64(s.n) / s.rate
		re, im := s.rng.NormFloat64()*s.sigma, s.rng.NormFloat64()*s.sigma
		for _, iv := range s.on {
			if t >= iv[0] && t < iv[1] {
				ph := 2 * math.Pi * s.offsetHz * t
				re += s.amp * math.Cos(ph)
				im += s.amp * math.Sin(ph)
			}
		}
		dst[k] = complex(float32(re), float32(im))
		s.n++
	}
	return k, nil
}

// TestCutBursts: a recording that begins and ends inside transmissions
// reports both bursts, flagged as cut, with the recording's own start and
// end as their edges, and the floor measured from the quiet between them.
func TestCutBursts(t *testing.T) {
	src := &toneSource{rate: 96000, offsetHz: 5000, amp: 0.2, sigma: 0.002,
		on: [][2]float64{{0, 1.5}, {3.2, 5}}, total: 5 * 96000, rng: rand.New(rand.NewSource(1))}
	sc, err := NewScanner(src.Info(), Config{OffsetHz: 5000})
	if err != nil {
		t.Fatal(err)
	}
	var got []*Burst
	sum, err := sc.Run(context.Background(), src, func(b *Burst) error { got = append(got, b); return nil }, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 2 {
		t.Fatalf("%d bursts, want 2", len(got))
	}
	if !sum.InBurstAtStart || !got[0].CutAtStart || got[0].CutAtEnd {
		t.Errorf("first burst: cut at start %v/%v, at end %v", sum.InBurstAtStart, got[0].CutAtStart, got[0].CutAtEnd)
	}
	if got[0].StartS != 0 || math.Abs(got[0].EndS-1.5) > 0.01 {
		t.Errorf("first burst %.4f–%.4f s, want 0–1.5", got[0].StartS, got[0].EndS)
	}
	if !got[1].CutAtEnd || got[1].CutAtStart || math.Abs(got[1].StartS-3.2) > 0.01 {
		t.Errorf("second burst %.4f s cut at end %v", got[1].StartS, got[1].CutAtEnd)
	}
	// noise 2·σ² over the band, carrier amp²: SNR in the channel is far
	// above 20 dB for both; the cut one must not have a floor raised by
	// its own carrier.
	if got[0].SNRDB < 20 || math.Abs(got[0].NoiseDB-got[1].NoiseDB) > 1 {
		t.Errorf("cut burst SNR %.1f dB, floors %.1f and %.1f dBFS", got[0].SNRDB, got[0].NoiseDB, got[1].NoiseDB)
	}
}

// twoCarriers overlays a second, stronger carrier from t2 on.
type twoCarriers struct {
	toneSource
	off2, amp2, t2 float64
}

func (s *twoCarriers) Read(dst []complex64) (int, error) {
	n0 := s.n
	k, err := s.toneSource.Read(dst)
	for i := 0; i < k; i++ {
		t := float64(n0+int64(i)) / s.rate
		if t >= s.t2 && t < s.on[0][1]+1 {
			ph := 2 * math.Pi * s.off2 * t
			dst[i] += complex(float32(s.amp2*math.Cos(ph)), float32(s.amp2*math.Sin(ph)))
		}
	}
	return k, err
}

// TestDoubleCarrier: a second transmitter 300 Hz away coming on inside a
// burst is flagged; a single carrier is not.
func TestDoubleCarrier(t *testing.T) {
	base := toneSource{rate: 96000, offsetHz: 5000, amp: 0.1, sigma: 0.002,
		on: [][2]float64{{0.5, 3.5}}, total: 5 * 96000}
	one := base
	one.rng = rand.New(rand.NewSource(2))
	two := &twoCarriers{toneSource: base, off2: 5300, amp2: 0.3, t2: 2}
	two.rng = rand.New(rand.NewSource(3))
	for _, c := range []struct {
		name string
		src  sdr.Source
		want bool
	}{{"one", &one, false}, {"two", two, true}} {
		sc, err := NewScanner(c.src.Info(), Config{OffsetHz: 5000})
		if err != nil {
			t.Fatal(err)
		}
		var got []*Burst
		if _, err := sc.Run(context.Background(), c.src, func(b *Burst) error { got = append(got, b); return nil }, nil); err != nil {
			t.Fatal(err)
		}
		if len(got) != 1 || got[0].DoubleCarrier != c.want {
			t.Errorf("%s: %d bursts, double carrier %v (spread %.1f Hz), want %v", c.name, len(got), len(got) > 0 && got[0].DoubleCarrier, got[0].CarrierSpreadHz, c.want)
		}
	}
}
