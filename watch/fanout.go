package watch

import (
	"context"
	"sync/atomic"

	"nullseek/sdr"
)

// fanOutBlock and fanOutDepth size the blocks the receiver is read in when
// several channels listen: 64 Ki samples (27 ms at 2.4 MS/s) and up to
// eight of them on the way, so a channel's scan may lag the others by a
// fifth of a second before the receiver waits for it.
const (
	fanOutBlock = 1 << 16
	fanOutDepth = 8
)

// fanOut reads the receiver once and hands every block, unchanged and in
// order, to each channel's scan (a tap): each channel filters the same
// samples its own way. A block goes back to the pool when every tap has
// copied it out.
type fanOut struct {
	src  sdr.Source
	taps []*tap
	free chan *iqBlock
	// err is how the receiver ended; written before the taps' queues
	// close, so a tap that finds its queue closed reads it safely.
	err error
}

type iqBlock struct {
	iq   []complex64
	n    int
	refs atomic.Int32
}

// tap is one channel's view of the stream: an sdr.Source whose Read
// hands out the fan-out's blocks.
type tap struct {
	f   *fanOut
	q   chan *iqBlock
	cur *iqBlock
	off int
}

func newFanOut(src sdr.Source, channels int) *fanOut {
	f := &fanOut{src: src, free: make(chan *iqBlock, fanOutDepth)}
	for range fanOutDepth {
		f.free <- &iqBlock{iq: make([]complex64, fanOutBlock)}
	}
	for range channels {
		f.taps = append(f.taps, &tap{f: f, q: make(chan *iqBlock, fanOutDepth)})
	}
	return f
}

// run reads the receiver until it ends or ctx does, then closes every
// tap's queue.
func (f *fanOut) run(ctx context.Context) {
	defer func() {
		for _, t := range f.taps {
			close(t.q)
		}
	}()
	for {
		var b *iqBlock
		select {
		case b = <-f.free:
		case <-ctx.Done():
			f.err = ctx.Err()
			return
		}
		n, err := f.src.Read(b.iq)
		if n > 0 {
			b.n = n
			b.refs.Store(int32(len(f.taps)))
			for _, t := range f.taps {
				select {
				case t.q <- b:
				case <-ctx.Done():
					f.err = ctx.Err()
					return
				}
			}
		} else {
			f.free <- b
		}
		if err != nil {
			f.err = err
			return
		}
	}
}

func (t *tap) Info() sdr.Info { return t.f.src.Info() }
func (t *tap) Close() error   { return nil }

func (t *tap) Read(dst []complex64) (int, error) {
	if t.cur == nil {
		b, ok := <-t.q
		if !ok {
			return 0, t.f.err
		}
		t.cur, t.off = b, 0
	}
	n := copy(dst, t.cur.iq[t.off:t.cur.n])
	t.off += n
	if t.off == t.cur.n {
		if t.cur.refs.Add(-1) == 0 {
			t.f.free <- t.cur
		}
		t.cur = nil
	}
	return n, nil
}
