package receiver

import (
	"context"
	"io"
	"math"
	"math/rand"
	"runtime"
	"testing"
	"time"

	"nullseek/sdr"
)

// cycleSource is an endless-looking cu8 stream made by replaying a
// precomputed one-second buffer until totalS seconds have been delivered:
// Gaussian noise with one FM-like carrier burst per second, so the scanner
// opens, measures and emits a burst every second for the whole input. It
// implements sdr.Source and sdr.CU8Reader (the scanner's fast path).
type cycleSource struct {
	info  sdr.Info
	lead  []byte // cu8 delivered once before buf (may be empty)
	buf   []byte // one second of cu8
	pos   int    // byte position in buf
	left  int64  // bytes still to deliver
	total int64
}

const memOffsetHz = 20e3

func newCycleSource(rate, totalS float64) *cycleSource {
	n := int(rate)
	buf := make([]byte, 2*n)
	rng := rand.New(rand.NewSource(1))
	const noiseSigma = 0.02 // per component, full scale 1: about −31 dBFS of noise
	var ph float64
	for i := 0; i < n; i++ {
		t := float64(i) / rate
		re, im := noiseSigma*rng.NormFloat64(), noiseSigma*rng.NormFloat64()
		if t >= 0.2 && t < 0.65 { // a 0.45 s burst every second, 0.3 amplitude (about 20 dB SNR in the channel)
			f := memOffsetHz + 2500*math.Sin(2*math.Pi*800*t)
			ph += 2 * math.Pi * f / rate
			re += 0.3 * math.Cos(ph)
			im += 0.3 * math.Sin(ph)
		}
		q := func(v float64) byte { return byte(math.Max(0, math.Min(255, math.Round(127.5+127.5*v)))) }
		buf[2*i], buf[2*i+1] = q(re), q(im)
	}
	total := int64(totalS*rate) * 2
	return &cycleSource{
		info: sdr.Info{SampleRate: rate, Format: "cu8", Name: "cyclic test stream", Samples: total / 2, ClipLevel: 1},
		buf:  buf, left: total, total: total,
	}
}

func (s *cycleSource) Info() sdr.Info { return s.info }
func (s *cycleSource) Close() error   { return nil }

// newCarrierSource is a cycleSource whose carrier never goes off after
// leadS seconds of noise alone: the same FM-like carrier as
// newCycleSource's bursts (its 800 Hz modulation and the 20 kHz offset
// make whole cycles in the one-second loop, so the phase runs on).
func newCarrierSource(rate, leadS, totalS float64) *cycleSource {
	n := int(rate)
	rng := rand.New(rand.NewSource(2))
	const noiseSigma = 0.02
	q := func(v float64) byte { return byte(math.Max(0, math.Min(255, math.Round(127.5+127.5*v)))) }
	lead := make([]byte, 2*int(leadS*rate))
	for i := range lead {
		lead[i] = q(noiseSigma * rng.NormFloat64())
	}
	buf := make([]byte, 2*n)
	for i := 0; i < n; i++ {
		t := float64(i) / rate
		ph := 2*math.Pi*memOffsetHz*t - 2500/800*math.Cos(2*math.Pi*800*t)
		buf[2*i] = q(0.3*math.Cos(ph) + noiseSigma*rng.NormFloat64())
		buf[2*i+1] = q(0.3*math.Sin(ph) + noiseSigma*rng.NormFloat64())
	}
	total := int64(totalS*rate) * 2
	return &cycleSource{
		info: sdr.Info{SampleRate: rate, Format: "cu8", Name: "carrier test stream", Samples: total / 2, ClipLevel: 1},
		lead: lead, buf: buf, left: total, total: total,
	}
}

func (s *cycleSource) ReadCU8(dst []byte) (int, error) {
	if s.left <= 0 {
		return 0, io.EOF
	}
	dst = dst[:len(dst)&^1]
	if int64(len(dst)) > s.left {
		dst = dst[:s.left]
	}
	k := 0
	if done := s.total - s.left; done < int64(len(s.lead)) {
		k = copy(dst, s.lead[done:])
	}
	for k < len(dst) {
		c := copy(dst[k:], s.buf[s.pos:])
		k += c
		s.pos = (s.pos + c) % len(s.buf)
	}
	s.left -= int64(k)
	return k, nil
}

func (s *cycleSource) Read(dst []complex64) (int, error) {
	raw := make([]byte, 2*len(dst))
	n, err := s.ReadCU8(raw)
	for i := 0; i < n/2; i++ {
		dst[i] = complex(sdr.CU8Value(raw[2*i]), sdr.CU8Value(raw[2*i+1]))
	}
	return n / 2, err
}

// memSamples is how many forced-GC samples of the live heap each run
// takes, spread evenly over its input: the same number for a short and a
// long run, so the longer run's maximum is not larger merely because it
// drew more samples.
const memSamples = 40

// memRun scans totalS seconds and returns the largest heap goal seen
// (MemStats.NextGC, the size the runtime lets the heap reach before its
// next collection: what bounds the peak; sampled after every block the
// scanner consumes), the largest live heap after a
// forced GC (taken every ~tenth of the input), and the number of bursts.
func memRun(t *testing.T, rate, totalS float64) (peak, live uint64, bursts int) {
	t.Helper()
	src := newCycleSource(rate, totalS)
	sc, err := NewScanner(src.Info(), Config{OffsetHz: memOffsetHz, KeepAudio: true})
	if err != nil {
		t.Fatal(err)
	}
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	peak, live = ms.NextGC, ms.HeapInuse
	next := int64(0)
	step := int64(totalS * rate / memSamples)
	progress := func(n int64) {
		runtime.ReadMemStats(&ms)
		peak = max(peak, ms.NextGC)
		if n >= next {
			runtime.GC()
			runtime.ReadMemStats(&ms)
			live = max(live, ms.HeapInuse)
			next += step
		}
	}
	emit := func(b *Burst) error { bursts++; return nil }
	if _, err := sc.Run(context.Background(), src, emit, progress); err != nil {
		t.Fatal(err)
	}
	return peak, live, bursts
}

// TestMemoryFlat: project issue "Memory does not grow with input: scanning a
// 10-minute recording peaks within 10 % of a 1-minute one". The input rate
// is 240 kS/s (RTL-SDR's lowest useful rate is 225–300 kS/s; librtlsdr
// rtl-sdr.h and librtlsdr.c, osmocom/rtl-sdr @ae0dd6d) so that 600 s of
// input is 144 M samples and the test stays a few seconds long on a shared
// machine; the scanner's buffers are sized per block, not per recording, so
// the rate does not change what is being checked. The scanner keeps audio (KeepAudio) and a burst starts
// every second, so every per-burst buffer is exercised 600 times.
//
// What is compared is the live heap after a forced GC, sampled at the same
// number of evenly spaced points in both runs (memSamples): bursts less
// than JoinWaitS apart are held (up to 16 of them) until it is clear they
// are not Morse keying, so several MiB of audio are live at times. The heap
// goal (NextGC) is logged but not asserted: it is the maximum over every
// natural collection, and the longer run has ten times as many, so its
// maximum grows with the number of draws, not with memory held (seen: 21.7
// vs 28.1 MiB with the live heap at 11.54 vs 11.55 MiB). Slack: 10 % (the
// requirement) plus 1 MiB.
func TestMemoryFlat(t *testing.T) {
	const rate = 240e3
	t0 := time.Now()
	peak1, live1, n1 := memRun(t, rate, 60)
	t1 := time.Now()
	peak10, live10, n10 := memRun(t, rate, 600)
	t2 := time.Now()
	const mib = 1 << 20
	t.Logf("60 s: %d bursts, heap goal %.2f MiB, live %.2f MiB (%.1f s)", n1, float64(peak1)/mib, float64(live1)/mib, t1.Sub(t0).Seconds())
	t.Logf("600 s: %d bursts, heap goal %.2f MiB, live %.2f MiB (%.1f s, %.0f MS/s with sampling)", n10, float64(peak10)/mib, float64(live10)/mib, t2.Sub(t1).Seconds(), 600*rate/1e6/t2.Sub(t1).Seconds())
	// One burst per second of input: the test stream is doing its job.
	if n1 < 59 || n1 > 61 || n10 < 599 || n10 > 601 {
		t.Fatalf("bursts %d and %d, want about 60 and 600", n1, n10)
	}
	if float64(live10) > 1.10*float64(live1)+mib {
		t.Errorf("live heap after GC grew from %.2f MiB (1 minute) to %.2f MiB (10 minutes): more than 10 %% + 1 MiB", float64(live1)/mib, float64(live10)/mib)
	}
}

// TestMemoryContinuousCarrier: a carrier that stays on is one burst,
// delivered in pieces with its audio, and the scanner's memory does not
// grow with it: the live heap after a forced GC, sampled at memSamples
// evenly spaced points (see TestMemoryFlat for why not the heap goal), for
// ten minutes of carrier is within 20 % of one minute's
// (the bound the project asks of an hour; BenchmarkSurveyMemory in survey
// measures the hour, with identification). Input at 240 kS/s, the lowest
// RTL-SDR rate band (librtlsdr rtl-sdr.h: 225001–300000 S/s). The one-minute
// burst is under the 60 s keep cap, so it keeps its track and audio; the
// ten-minute one does not, and its pieces carry everything.
func TestMemoryContinuousCarrier(t *testing.T) {
	const rate = 240e3
	run := func(totalS float64) (peak, goal uint64, bursts []*Burst, pieces int) {
		src := newCarrierSource(rate, 2, totalS)
		sc, err := NewScanner(src.Info(), Config{OffsetHz: memOffsetHz, KeepAudio: true})
		if err != nil {
			t.Fatal(err)
		}
		runtime.GC()
		var ms runtime.MemStats
		runtime.ReadMemStats(&ms)
		base := ms.HeapInuse
		next, step := int64(0), int64(totalS*rate/memSamples)
		h := Handler{
			Piece: func(p *Piece) error {
				if len(p.FMAudio) == 0 || len(p.Level) == 0 {
					t.Errorf("piece %d of burst %d has %d audio samples and %d readings", p.Seq, p.Burst, len(p.FMAudio), len(p.Level))
				}
				pieces++
				return nil
			},
			Burst: func(b *Burst) error { bursts = append(bursts, b); return nil },
			Progress: func(n int64) {
				runtime.ReadMemStats(&ms)
				goal = max(goal, ms.NextGC-min(base, ms.NextGC))
				if n >= next {
					runtime.GC()
					runtime.ReadMemStats(&ms)
					peak = max(peak, ms.HeapInuse-min(base, ms.HeapInuse))
					next += step
				}
			},
		}
		if _, err := sc.Scan(context.Background(), src, h); err != nil {
			t.Fatal(err)
		}
		return peak, goal, bursts, pieces
	}
	peak1, goal1, b1, p1 := run(60)
	peak10, goal10, b10, p10 := run(600)
	const mib = 1 << 20
	t.Logf("60 s: live %.1f MiB over the start (heap goal %.1f), %d pieces; 600 s: live %.1f MiB (goal %.1f), %d pieces",
		float64(peak1)/mib, float64(goal1)/mib, p1, float64(peak10)/mib, float64(goal10)/mib, p10)
	if len(b1) != 1 || len(b10) != 1 {
		t.Fatalf("%d and %d bursts, want one each", len(b1), len(b10))
	}
	if b1[0].LevelTruncated || b1[0].AudioTruncated || !b10[0].LevelTruncated || !b10[0].AudioTruncated || b10[0].Level != nil {
		t.Errorf("kept tracks: 1 min truncated %v/%v, 10 min %v/%v", b1[0].LevelTruncated, b1[0].AudioTruncated, b10[0].LevelTruncated, b10[0].AudioTruncated)
	}
	if b10[0].Pieces != p10 || p10 < 49 {
		t.Errorf("10 min: %d pieces (burst says %d), want about 50", p10, b10[0].Pieces)
	}
	if float64(peak10) > 1.2*float64(peak1) {
		t.Errorf("10-minute carrier's live heap %.1f MiB is more than 1.2 × the 1-minute %.1f MiB", float64(peak10)/mib, float64(peak1)/mib)
	}
}

// BenchmarkScanCU8 runs the whole Scanner (cu8 fast path: clip count,
// channelizer to 48 kS/s, power readings, FM and AM audio kept for bursts,
// burst detector) on 2.4 MS/s input with a 0.45 s burst every second.
// MS/s is millions of complex input samples per second of wall time.
func BenchmarkScanCU8(b *testing.B) {
	const rate = 2.4e6
	const secondsPerOp = 2
	base := newCycleSource(rate, secondsPerOp)
	b.SetBytes(int64(2 * rate * secondsPerOp))
	b.ReportAllocs()
	b.ResetTimer()
	var bursts int
	for i := 0; i < b.N; i++ {
		src := &cycleSource{info: base.info, buf: base.buf, left: base.total, total: base.total}
		sc, err := NewScanner(src.Info(), Config{OffsetHz: memOffsetHz, KeepAudio: true})
		if err != nil {
			b.Fatal(err)
		}
		if _, err := sc.Run(context.Background(), src, func(*Burst) error { bursts++; return nil }, nil); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.N)*rate*secondsPerOp/1e6/b.Elapsed().Seconds(), "MS/s")
	if bursts < b.N {
		b.Fatalf("%d bursts in %d runs", bursts, b.N)
	}
}
