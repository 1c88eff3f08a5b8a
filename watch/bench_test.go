package watch

import (
	"context"
	"fmt"
	"io"
	"math/rand/v2"
	"testing"
	"time"

	"nullseek/sdr"
)

// noiseSource is a live-like stream of complex Gaussian noise at 8-bit
// resolution (σ = 0.1 of full scale per component, as a receiver at a
// moderate gain shows an empty band), repeating a block of 1 Mi samples,
// ending after limit samples. Like a receiver that does not report its
// tuning, it leaves CenterHz 0 (the watch knows what it asked for).
type noiseSource struct {
	info  sdr.Info
	block []complex64
	pos   int
	left  int64
}

func newNoiseSource(rate float64, limit int64) *noiseSource {
	r := rand.New(rand.NewPCG(1, 2))
	q := func(v float64) float32 { return float32(int(v*127.5+127.5+0.5)-127) / 127.5 } // cu8 steps
	b := make([]complex64, 1<<20)
	for i := range b {
		b[i] = complex(q(0.1*r.NormFloat64()), q(0.1*r.NormFloat64()))
	}
	return &noiseSource{block: b, left: limit, info: sdr.Info{SampleRate: rate, Start: time.Now(), Format: "cu8", Name: "noise", Samples: -1, ClipLevel: 1}}
}

func (s *noiseSource) Info() sdr.Info { return s.info }
func (s *noiseSource) Close() error   { return nil }
func (s *noiseSource) Read(dst []complex64) (int, error) {
	if s.left <= 0 {
		return 0, io.EOF
	}
	n := int(min(int64(len(dst)), s.left))
	for k := 0; k < n; {
		c := copy(dst[k:n], s.block[s.pos:])
		k += c
		s.pos = (s.pos + c) % len(s.block)
	}
	s.left -= int64(n)
	return n, nil
}

// BenchmarkWatchPerSample is the watch's cost per input sample at the
// RTL-SDR's 2.4 MS/s on an empty channel (the steady state of a station
// between bursts: front end, detector, level readings, status and store
// batching; the rotator is unreachable, so it is dialled every 2 s). One
// iteration is 2^16 samples; cpu@2.4MS/s is the share of one core a live
// stream at that rate takes.
func BenchmarkWatchPerSample(b *testing.B) { benchWatch(b, "", 1) }

// BenchmarkWatchPerSample3Channels is BenchmarkWatchPerSample listening on
// three channels of the one stream (three scans fed by the fan-out, each
// in its own goroutine). As the scans run on several cores at once, the
// wall time understates the work: cpu-ns/sample is the process's CPU time
// (getrusage) per input sample, cpu-cores@2.4MS/s the share of one core
// that takes at 2.4 MS/s, and per-channel the third of it.
func BenchmarkWatchPerSample3Channels(b *testing.B) { benchWatch(b, "", 3) }

// BenchmarkWatchPerSampleRecord is BenchmarkWatchPerSample keeping every
// sample as rotating SigMF pairs (Options.RecordDir: cu8 encoding, the
// SHA-512 of every byte, 64 KiB writes and a flush with fsync each second
// of receiver time).
func BenchmarkWatchPerSampleRecord(b *testing.B) { benchWatch(b, b.TempDir(), 1) }

func benchWatch(b *testing.B, recordDir string, channels int) {
	more, centre := "", ""
	if channels > 1 {
		centre = "centre = \"144.0MHz\"\n"
		for i := 2; i <= channels; i++ {
			more += fmt.Sprintf("[[channel]]\nfreq = \"%.3fMHz\"\nids = [\"N0CALL/%d\"]\n", 144.525-0.3*float64(i), i+1)
		}
	}
	st, db := loadStation(b, `name = "Bench"
database = "bench.db"
[position]
source = "fixed"
lat_lon = "45.0, 6.0"
[antenna]
kind = "yagi"
[receiver]
source = "rtl_tcp://127.0.0.1:1"
sample_rate = "2.4M"
gain_db = 30
`+centre+`[[channel]]
freq = "144.525MHz"
ids = ["N0CALL/1", "N0CALL/2"]
`+more+`[heading]
source = "rotator"
reference = "true"
rotator = "127.0.0.1:1"
sweep_from_deg = 0.0
sweep_to_deg = 360.0
`)
	const perIter = 1 << 16
	src := newNoiseSource(st.Receiver.SampleRateHz, int64(b.N)*perIter)
	cpu0, cpuOK := processCPU()
	b.ResetTimer()
	sum, err := Run(context.Background(), Options{Station: st, DB: db, RecordDir: recordDir,
		Open: func(context.Context, sdr.RTLConfig) (sdr.Source, error) { return src, nil }})
	b.StopTimer()
	if err != nil {
		b.Fatal(err)
	}
	if sum.Samples != int64(b.N)*perIter {
		b.Fatalf("watched %d samples of %d", sum.Samples, int64(b.N)*perIter)
	}
	ns := float64(b.Elapsed().Nanoseconds()) / float64(sum.Samples)
	b.ReportMetric(ns, "ns/sample")
	b.ReportMetric(ns*2.4e6/1e9, "cpu@2.4MS/s")
	if cpu1, ok := processCPU(); ok && cpuOK {
		cns := float64((cpu1 - cpu0).Nanoseconds()) / float64(sum.Samples)
		b.ReportMetric(cns, "cpu-ns/sample")
		b.ReportMetric(cns*2.4e6/1e9, "cpu-cores@2.4MS/s")
		b.ReportMetric(cns*2.4e6/1e9/float64(channels), "per-channel")
	}
}
