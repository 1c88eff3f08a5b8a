package survey

import (
	"context"
	"io"
	"math"
	"math/rand"
	"runtime"
	"testing"

	"nullseek/ident"
	"nullseek/receiver"
	"nullseek/sdr"
)

// beaconSource is a cu8 stream at 240 kS/s of one carrier that never goes
// off: an NBFM beacon 20 kHz above the capture centre that sends its
// identifier as a keyed 1 kHz tone (MCW, ±2.5 kHz deviation, 20 WPM) from
// 0.5 s, a steady tone from 5 to 8 s, then plain carrier, every 12 s, in Gaussian
// noise at about 20 dB CNR in 12.5 kHz, after leadS seconds of noise
// alone. One cycle is made once and replayed (the noise repeats every
// cycle; that does not matter to a memory measurement). The keying is
// ident.Encode's (ITU-R M.1677-1 §2 timing); this source is a load for the
// scanner, not a reference for what identification should read.
type beaconSource struct {
	info       sdr.Info
	lead, loop []byte // cu8: the noise before the carrier, one cycle
	pos        int64  // bytes delivered
	total      int64  // bytes to deliver
}

const (
	beaconRate     = 240e3
	beaconOffsetHz = 20e3
	beaconID       = "N0CALL"
)

func newBeaconSource(t testing.TB, leadS, totalS float64) *beaconSource {
	t.Helper()
	const cycleS = 12.0
	marks, err := ident.Encode(beaconID, 20, 0)
	if err != nil {
		t.Fatal(err)
	}
	n := int(cycleS * beaconRate)
	key := make([]bool, n)
	for _, m := range marks {
		if !m.On {
			continue
		}
		for i := int((0.5 + m.StartS) * beaconRate); i < int((0.5+m.StartS+m.DurS)*beaconRate) && i < n; i++ {
			key[i] = true
		}
	}
	// a steady tone from 5 to 8 s of each cycle
	for i := int(5 * beaconRate); i < int(8*beaconRate); i++ {
		key[i] = true
	}
	rng := rand.New(rand.NewSource(11))
	const amp = 0.3
	// noise per component for 20 dB CNR in 12.5 kHz: amp²/(2σ²·12.5k/rate)
	sigma := math.Sqrt(amp * amp / (2 * 100 * 12.5e3 / beaconRate))
	q := func(v float64) byte { return byte(math.Max(0, math.Min(255, math.Round(127.5+127.5*v)))) }
	lead := make([]byte, 2*int(leadS*beaconRate))
	for i := range lead {
		lead[i] = q(sigma * rng.NormFloat64())
	}
	loop := make([]byte, 2*n)
	var ph float64
	for i := 0; i < n; i++ {
		f := beaconOffsetHz
		if key[i] {
			f += 2500 * math.Sin(2*math.Pi*1000*float64(i)/beaconRate)
		}
		ph = math.Mod(ph+2*math.Pi*f/beaconRate, 2*math.Pi)
		loop[2*i] = q(amp*math.Cos(ph) + sigma*rng.NormFloat64())
		loop[2*i+1] = q(amp*math.Sin(ph) + sigma*rng.NormFloat64())
	}
	total := 2 * int64(totalS*beaconRate)
	return &beaconSource{
		info: sdr.Info{SampleRate: beaconRate, Format: "cu8", Name: "beacon test stream", Samples: total / 2, ClipLevel: 1},
		lead: lead, loop: loop, total: total,
	}
}

func (s *beaconSource) Info() sdr.Info { return s.info }
func (s *beaconSource) Close() error   { return nil }

func (s *beaconSource) ReadCU8(dst []byte) (int, error) {
	if s.pos >= s.total {
		return 0, io.EOF
	}
	dst = dst[:min(int64(len(dst)&^1), s.total-s.pos)]
	k := 0
	for k < len(dst) {
		var c int
		if s.pos < int64(len(s.lead)) {
			c = copy(dst[k:], s.lead[s.pos:])
		} else {
			c = copy(dst[k:], s.loop[(s.pos-int64(len(s.lead)))%int64(len(s.loop)):])
		}
		k += c
		s.pos += int64(c)
	}
	return k, nil
}

func (s *beaconSource) Read(dst []complex64) (int, error) {
	raw := make([]byte, 2*len(dst))
	n, err := s.ReadCU8(raw)
	for i := 0; i < n/2; i++ {
		dst[i] = complex(sdr.CU8Value(raw[2*i]), sdr.CU8Value(raw[2*i+1]))
	}
	return n / 2, err
}

// surveyMemory surveys totalS seconds of the beacon, with identification
// and an ID list, and returns the peak heap in use and the largest heap
// goal (MemStats.NextGC, the size the runtime lets the heap reach before
// its next collection), both above the heap in use before the survey
// started, sampled after every fourth block the scanner consumes, and the
// result.
func surveyMemory(t testing.TB, totalS float64) (peak, goal uint64, res *Result) {
	t.Helper()
	src := newBeaconSource(t, 2, totalS)
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	base := ms.HeapInuse
	blocks := 0
	progress := func(int64) {
		if blocks++; blocks%4 != 0 {
			return
		}
		runtime.ReadMemStats(&ms)
		peak = max(peak, ms.HeapInuse-min(base, ms.HeapInuse))
		goal = max(goal, ms.NextGC-min(base, ms.NextGC))
	}
	opts := Options{
		Receiver: receiver.Config{OffsetHz: beaconOffsetHz},
		IDs:      []string{beaconID, "N0CALL/1"},
	}
	res, err := Run(context.Background(), src, opts, progress)
	if err != nil {
		t.Fatal(err)
	}
	runtime.ReadMemStats(&ms)
	peak = max(peak, ms.HeapInuse-min(base, ms.HeapInuse))
	return peak, goal, res
}

// BenchmarkSurveyMemory: the project's bound on memory (issue "bounded
// memory"): surveying an hour of a carrier that never goes off, at
// 240 kS/s with identification on (an ID list, so the template matcher
// runs too), peaks within 1.2× of surveying one minute of it. Reports the
// peak heap in use and the heap goal (both MiB above the start) for each
// and their ratios; fails when the heap goal's ratio passes 1.2 (the
// sampled peak depends on where the collections fall, the goal on the live
// heap). One iteration is one minute plus one hour of input: run it with
// -benchtime 1x.
//
//	go test ./survey -run XXX -bench SurveyMemory -benchtime 1x
func BenchmarkSurveyMemory(b *testing.B) {
	for i := 0; i < b.N; i++ {
		peak1, goal1, res1 := surveyMemory(b, 60)
		peak60, goal60, res60 := surveyMemory(b, 3600)
		if len(res1.Records) != 1 || len(res60.Records) != 1 {
			b.Fatalf("%d and %d bursts, want one each", len(res1.Records), len(res60.Records))
		}
		if n := res60.Records[0].Pieces; n < 290 {
			b.Fatalf("the hour came in %d pieces, want about 300", n)
		}
		const mib = 1 << 20
		b.ReportMetric(float64(peak1)/mib, "MiB-peak-1min")
		b.ReportMetric(float64(peak60)/mib, "MiB-peak-1h")
		b.ReportMetric(float64(goal1)/mib, "MiB-goal-1min")
		b.ReportMetric(float64(goal60)/mib, "MiB-goal-1h")
		b.ReportMetric(float64(peak60)/float64(peak1), "peak-ratio")
		b.ReportMetric(float64(goal60)/float64(goal1), "goal-ratio")
		if float64(goal60) > 1.2*float64(goal1) {
			b.Errorf("an hour's heap goal %.1f MiB is more than 1.2 × a minute's %.1f MiB", float64(goal60)/mib, float64(goal1)/mib)
		}
	}
}
