package watch

import (
	"context"
	"math"
	"math/cmplx"
	"runtime"
	"strings"
	"testing"

	"nullseek/sdr"
)

// carrierMix is noiseSource with two unmodulated carriers added: one on
// all the time at offA Hz from the tuning, one keyed on for onS seconds
// at the start of every periodS at offB Hz. Amplitude 0.3 of full scale
// against noise of σ = 0.1 per component is about 6.5 dB above the
// noise's total power over the whole band, far above it in a channel.
type carrierMix struct {
	*noiseSource
	n            int64
	rate         float64
	stepA, stepB complex64
	phA, phB     complex64
	onS, periodS float64
	marks        []int64
	heap         []uint64
}

func newCarrierMix(rate float64, limit int64, offA, offB, onS, periodS float64, marks []int64) *carrierMix {
	rot := func(f float64) complex64 { return complex64(cmplx.Exp(complex(0, 2*math.Pi*f/rate))) }
	return &carrierMix{noiseSource: newNoiseSource(rate, limit), rate: rate,
		stepA: rot(offA), stepB: rot(offB), phA: 0.3, phB: 0.3, onS: onS, periodS: periodS, marks: marks}
}

func (s *carrierMix) Read(dst []complex64) (int, error) {
	k, err := s.noiseSource.Read(dst)
	for i := 0; i < k; i++ {
		t := float64(s.n+int64(i)) / s.rate
		dst[i] += s.phA
		s.phA *= s.stepA
		if math.Mod(t, s.periodS) < s.onS {
			dst[i] += s.phB
		}
		s.phB *= s.stepB
		if i&1023 == 0 { // keep the phasors on the unit circle's radius
			s.phA *= complex64(complex(0.3/cmplx.Abs(complex128(s.phA)), 0))
			s.phB *= complex64(complex(0.3/cmplx.Abs(complex128(s.phB)), 0))
		}
	}
	s.n += int64(k)
	if len(s.heap) < len(s.marks) && s.n >= s.marks[len(s.heap)] {
		runtime.GC()
		var ms runtime.MemStats
		runtime.ReadMemStats(&ms)
		s.heap = append(s.heap, ms.HeapAlloc)
	}
	return k, err
}

// BenchmarkWatchMemoryHour: an hour of stream at 240 kS/s (the lowest
// RTL-SDR rate band, librtlsdr rtl-sdr.h), read as fast as the watch
// takes it, on two channels: a carrier that never goes off on one and a
// 10 s turn every minute on the other (60 bursts), the rotator
// unreachable. One iteration is the whole hour. It reports the live heap
// after a collection at 5 and at 60 minutes and fails when it grew by
// more than 2 MiB between them: memory stays flat with run length and
// with transmission length.
func BenchmarkWatchMemoryHour(b *testing.B) {
	const rate = 240000
	toml := strings.Replace(strings.Replace(baseStation, `name = "Opt"`, `name = "Hour"`, 1),
		"freq = 144425000\n", "freq = 144425000\n[[channel]]\nfreq = 144375000\n", 1)
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		st, db := loadStation(b, toml)
		src := newCarrierMix(rate, 3600*rate, 25000, -25000, 10, 60, []int64{300 * rate, 3599 * rate})
		b.StartTimer()
		sum, err := Run(context.Background(), Options{Station: st, DB: db,
			Open: func(context.Context, sdr.RTLConfig) (sdr.Source, error) { return src, nil }})
		if err != nil {
			b.Fatal(err)
		}
		b.StopTimer()
		if len(src.heap) != 2 {
			b.Fatalf("heap read %d times", len(src.heap))
		}
		h5, h60 := float64(src.heap[0])/(1<<20), float64(src.heap[1])/(1<<20)
		b.ReportMetric(h5, "MiB-live@5min")
		b.ReportMetric(h60, "MiB-live@60min")
		b.ReportMetric(float64(sum.Bursts), "bursts")
		if src.heap[1] > src.heap[0]+2<<20 {
			b.Errorf("the live heap grew from %.2f MiB at 5 minutes to %.2f MiB at 60", h5, h60)
		}
		b.StartTimer()
	}
}
