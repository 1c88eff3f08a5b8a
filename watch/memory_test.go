package watch

import (
	"context"
	"runtime"
	"strings"
	"testing"

	"nullseek/heading"
	"nullseek/sdr"
)

// heapSource wraps a source and reads the live heap (after a collection)
// when the stream passes each of the marks.
type heapSource struct {
	*noiseSource
	n     int64
	marks []int64
	heap  []uint64
}

func (h *heapSource) Read(dst []complex64) (int, error) {
	k, err := h.noiseSource.Read(dst)
	h.n += int64(k)
	if len(h.heap) < len(h.marks) && h.n >= h.marks[len(h.heap)] {
		runtime.GC()
		var ms runtime.MemStats
		runtime.ReadMemStats(&ms)
		h.heap = append(h.heap, ms.HeapAlloc)
	}
	return k, err
}

// TestWatchMemoryBounded: half an hour of stream at 240 kS/s (faster than
// real time, from memory) keeps the same live heap at 5 minutes and at 30,
// within 2 MiB: nothing grows with the run.
func TestWatchMemoryBounded(t *testing.T) {
	if testing.Short() {
		t.Skip("half an hour of samples")
	}
	st, db := loadStation(t, strings.Replace(baseStation, `name = "Opt"`, `name = "Mem"`, 1))
	const rate = 240000
	src := &heapSource{noiseSource: newNoiseSource(rate, 1800*rate), marks: []int64{300 * rate, 1799 * rate}}
	if _, err := Run(context.Background(), Options{Station: st, DB: db, Open: func(context.Context, sdr.RTLConfig) (sdr.Source, error) { return src, nil }}); err != nil {
		t.Fatal(err)
	}
	if len(src.heap) != 2 {
		t.Fatalf("heap read %d times", len(src.heap))
	}
	t.Logf("live heap at 5 min %.2f MiB, at 30 min %.2f MiB", float64(src.heap[0])/(1<<20), float64(src.heap[1])/(1<<20))
	if src.heap[1] > src.heap[0]+2<<20 {
		t.Errorf("the live heap grew from %d to %d bytes between 5 and 30 minutes", src.heap[0], src.heap[1])
	}
}

// TestLiveHeadingsBounded: an hour of 10 Hz headings keeps at most
// KeepHeadingsS of them (plus the quarter the trimming lets accumulate),
// and interpolates the last minutes as heading.Track does.
func TestLiveHeadingsBounded(t *testing.T) {
	h := newLiveHeadings(0, 0, 0)
	for i := 0; i < 36000; i++ {
		h.add(float64(i)/10, float64(i%3600)/10)
		if i%100 == 0 {
			h.take()
		}
	}
	if n, max := len(h.samples), int(KeepHeadingsS*10*4/3)+2; n > max {
		t.Errorf("%d headings kept, want at most %d", n, max)
	}
	var snap heading.Track
	h.refresh(&snap)
	// 3599.55 s lies between the samples of 3599.5 s (359.5°) and 3599.6 s
	// (359.6°): halfway is 359.55°.
	if d, ok := snap.At(3599.55); !ok || d < 359.54 || d > 359.56 {
		t.Errorf("at(3599.55) = %v, %v; want 359.55°", d, ok)
	}
	if _, ok := snap.At(3599.9 - KeepHeadingsS - 60); ok {
		t.Error("a heading older than KeepHeadingsS is still known")
	}
}
