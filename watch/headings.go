package watch

import (
	"sync"

	"nullseek/heading"
	"nullseek/store"
)

// KeepHeadingsS is how many seconds of headings the watch keeps in memory:
// a piece of a transmission spans receiver.DefaultConfig.PieceS (20 s) and
// is handed over when it is complete, so its readings are at most that old
// plus the receiver's delay; five minutes leaves room for a slow scan
// catching up.
const KeepHeadingsS = 300.0

// liveHeadings holds the headings of the last KeepHeadingsS seconds on the
// stream's clock, and those not yet written to the store.
type liveHeadings struct {
	mu      sync.Mutex
	ref     heading.Ref
	samples []heading.Sample
	pending []store.HeadingSample
	lastDeg float64
	have    bool
	mount   float64
	lagS    float64
}

func newLiveHeadings(ref heading.Ref, mountOffsetDeg, lagS float64) *liveHeadings {
	return &liveHeadings{ref: ref, mount: mountOffsetDeg, lagS: lagS}
}

// add records one sensor heading at tS seconds of the stream's clock; one
// not later than the last is dropped (a track is strictly increasing).
func (h *liveHeadings) add(tS, deg float64) {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.lastDeg, h.have = deg, true
	if n := len(h.samples); n > 0 && tS <= h.samples[n-1].T {
		return
	}
	h.samples = append(h.samples, heading.Sample{T: tS, Deg: deg})
	h.pending = append(h.pending, store.HeadingSample{TimeS: tS, Deg: deg})
	// Drop what is older than KeepHeadingsS, in one copy when the front
	// part is a quarter of the slice (amortised O(1) a sample).
	cut := 0
	for cut < len(h.samples) && h.samples[cut].T < tS-KeepHeadingsS {
		cut++
	}
	if cut > 0 && cut >= len(h.samples)/4 {
		h.samples = append(h.samples[:0], h.samples[cut:]...)
	}
}

// take returns the headings not yet written and forgets them.
func (h *liveHeadings) take() []store.HeadingSample {
	h.mu.Lock()
	defer h.mu.Unlock()
	p := h.pending
	h.pending = nil
	return p
}

// latest is the last sensor heading and whether there is one.
func (h *liveHeadings) latest() (float64, bool) {
	h.mu.Lock()
	defer h.mu.Unlock()
	return h.lastDeg, h.have
}

// refresh copies the headings kept into snap, the track a channel's next
// readings are joined with (so a piece sees one consistent set of
// headings; each channel's scan keeps its own snap and reads it with
// heading.Track.At).
func (h *liveHeadings) refresh(snap *heading.Track) {
	h.mu.Lock()
	defer h.mu.Unlock()
	snap.Ref, snap.MountOffsetDeg, snap.LagS = h.ref, h.mount, h.lagS
	snap.Samples = append(snap.Samples[:0], h.samples...)
}
