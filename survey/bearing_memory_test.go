package survey

import (
	"context"
	"math"
	"math/rand"
	"runtime"
	"testing"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/receiver"
	"nullseek/sdr"
)

// turningCarrierSource is a cu8 stream at 96 kS/s of a carrier that never
// goes off, 12 kHz above the centre, received on a small loop (25 dB null,
// bearing.SmallLoop's model) turning steadily at 30°/s with the
// transmitter at 123°, in Gaussian noise at 20 dB CNR in 12.5 kHz. The
// antenna comes back to the same heading every 12 s, so one 12 s cycle is
// made once and replayed (the noise repeats every cycle; that does not
// matter to a memory measurement, and the bearing is checked loosely).
// It reuses beaconSource's replay.
func turningCarrierSource(t testing.TB, totalS float64) *beaconSource {
	t.Helper()
	const rate, cycleS, off, bearingDeg = 96e3, 12.0, 12e3, 123.0
	loop, err := bearing.SmallLoop(25)
	if err != nil {
		t.Fatal(err)
	}
	n := int(cycleS * rate)
	rng := rand.New(rand.NewSource(3))
	const amp = 0.3
	sigma := math.Sqrt(amp * amp / (2 * 100 * 12.5e3 / rate))
	q := func(v float64) byte { return byte(math.Max(0, math.Min(255, math.Round(127.5+127.5*v)))) }
	buf := make([]byte, 2*n)
	for i := 0; i < n; i++ {
		ts := float64(i) / rate
		x := math.Mod(bearingDeg-30*ts+720, 360)
		k := int(x)
		f := x - float64(k)
		gdb := loop.GainDB[k%360]*(1-f) + loop.GainDB[(k+1)%360]*f
		g := math.Sqrt(math.Pow(10, gdb/10))
		ph := 2 * math.Pi * off * ts
		buf[2*i] = q(amp*g*math.Cos(ph) + sigma*rng.NormFloat64())
		buf[2*i+1] = q(amp*g*math.Sin(ph) + sigma*rng.NormFloat64())
	}
	total := 2 * int64(totalS*rate)
	return &beaconSource{info: sdr.Info{SampleRate: rate, Format: "cu8", Name: "turning carrier", Samples: total / 2, ClipLevel: 1},
		lead: nil, loop: buf, total: total}
}

// bearingMemory surveys totalS seconds of the turning carrier with the
// bearing fitted during the scan and returns the most heap it kept: the
// heap in use after a collection, above the heap before the survey,
// sampled every 64 blocks. The scanner calls progress between blocks,
// never while a window is being fitted, so a collection there sees what
// the survey retains, not a fit's passing work (a heap goal would depend
// on whether a collection happened to fall inside a fit).
func bearingMemory(t testing.TB, totalS float64) (kept uint64, tb TxBearing) {
	t.Helper()
	src := turningCarrierSource(t, totalS)
	track, err := heading.SteadyTurn{StartDeg: 0, RateDegPerS: 30}.Track(0, totalS, 10)
	if err != nil {
		t.Fatal(err)
	}
	loop, _ := bearing.SmallLoop(25)
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	base := ms.HeapAlloc
	blocks := 0
	progress := func(int64) {
		if blocks++; blocks%64 != 0 {
			return
		}
		runtime.GC()
		runtime.ReadMemStats(&ms)
		kept = max(kept, ms.HeapAlloc-min(base, ms.HeapAlloc))
	}
	res, err := Run(context.Background(), src, Options{Receiver: receiver.Config{OffsetHz: 12e3}, NoIdent: true,
		Bearing: &BearingPlan{Track: track, Pattern: loop}}, progress)
	if err != nil {
		t.Fatal(err)
	}
	_, txs := Bearings(res, track, loop, bearing.FitOptions{}, 0)
	if len(txs) != 1 || txs[0].Err != nil {
		t.Fatalf("%d transmitters %v, want one with a bearing", len(txs), txs)
	}
	return kept, txs[0]
}

// BenchmarkBearingMemory: a continuous carrier for an hour gets a bearing
// with bounded memory — fitted window by window (bearing.Windowed) from the
// receiver's pieces while the scan goes on. Reports the heap kept (MiB
// above the start, see bearingMemory) for twenty minutes and for an hour
// and their ratio, and fails past 1.2 or when the bearing is off (123°, or 303° the loop's
// other null, within 1°).
//
//	go test ./survey -run XXX -bench BearingMemory -benchtime 1x
func BenchmarkBearingMemory(b *testing.B) {
	for i := 0; i < b.N; i++ {
		g2, t2 := bearingMemory(b, 1200)
		g60, t60 := bearingMemory(b, 3600)
		const mib = 1 << 20
		b.ReportMetric(float64(g2)/mib, "MiB-kept-20min")
		b.ReportMetric(float64(g60)/mib, "MiB-kept-1h")
		b.ReportMetric(float64(g60)/float64(g2), "kept-ratio")
		b.ReportMetric(t60.Combined.BearingDeg, "bearing-1h-deg")
		if float64(g60) > 1.2*float64(g2) {
			b.Errorf("an hour kept %.1f MiB of heap, more than 1.2 × twenty minutes' %.1f MiB", float64(g60)/mib, float64(g2)/mib)
		}
		for _, tb := range []TxBearing{t2, t60} {
			if e := math.Min(angleErrDeg(tb.Combined.BearingDeg, 123), angleErrDeg(tb.Combined.BearingDeg, 303)); e > 1 {
				b.Errorf("bearing %.2f°, want 123° (or 303°)", tb.Combined.BearingDeg)
			}
		}
	}
}

// TestBearingLongCarrier is the benchmark's check at a size CI affords: a
// carrier of four minutes and one of twelve, past the receiver's 60 s
// level-track cap, get bearings combined from windows of two minutes, and
// the longer one keeps within 1.2× the shorter's heap (bearingMemory; the
// windows' buffers are the same size, what grows is one estimate per
// window).
func TestBearingLongCarrier(t *testing.T) {
	if testing.Short() {
		t.Skip("sixteen minutes of IQ: run without -short")
	}
	g4, t4 := bearingMemory(t, 240)
	g12, t12 := bearingMemory(t, 720)
	t.Logf("heap kept %.2f MiB for 4 min, %.2f MiB for 12 min; bearings %.2f° ± %.2f° and %.2f° ± %.2f°",
		float64(g4)/(1<<20), float64(g12)/(1<<20), t4.Combined.BearingDeg, t4.SigmaDeg, t12.Combined.BearingDeg, t12.SigmaDeg)
	if float64(g12) > 1.2*float64(g4) {
		t.Errorf("heap kept %.2f MiB for 12 min, more than 1.2 × %.2f MiB for 4 min", float64(g12)/(1<<20), float64(g4)/(1<<20))
	}
	for _, tb := range []TxBearing{t4, t12} {
		if e := math.Min(angleErrDeg(tb.Combined.BearingDeg, 123), angleErrDeg(tb.Combined.BearingDeg, 303)); e > 0.5 {
			t.Errorf("bearing %.2f°, want 123° (or 303°)", tb.Combined.BearingDeg)
		}
		if tb.Combined.BurstsUsed != 1 {
			t.Errorf("%d bursts, want the carrier as one", tb.Combined.BurstsUsed)
		}
	}
}
