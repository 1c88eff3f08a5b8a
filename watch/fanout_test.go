package watch

import (
	"context"
	"errors"
	"io"
	"sync"
	"testing"

	"nullseek/sdr"
)

// countSource gives samples whose real part is their index, in reads of
// at most step samples, then err.
type countSource struct {
	n, step, at int
	err         error
}

func (s *countSource) Info() sdr.Info { return sdr.Info{SampleRate: 2.4e6, Name: "count"} }
func (s *countSource) Close() error   { return nil }
func (s *countSource) Read(dst []complex64) (int, error) {
	if s.at >= s.n {
		return 0, s.err
	}
	k := min(len(dst), s.step, s.n-s.at)
	for i := range k {
		dst[i] = complex(float32(s.at+i), 0)
	}
	s.at += k
	return k, nil
}

// TestFanOutEveryTapEverySample: each of three taps, reading with its own
// buffer size, gets every sample of the stream once and in order (more
// samples than the block pool holds, so blocks are reused), then the
// source's own ending: io.EOF, or its error.
func TestFanOutEveryTapEverySample(t *testing.T) {
	for _, end := range []error{io.EOF, errors.New("receiver gone")} {
		const n = fanOutBlock*fanOutDepth*3 + 12345
		f := newFanOut(&countSource{n: n, step: 50000, err: end}, 3)
		var wg sync.WaitGroup
		got := make([]int, 3)
		errs := make([]error, 3)
		for i, tp := range f.taps {
			wg.Add(1)
			go func() {
				defer wg.Done()
				buf := make([]complex64, []int{1000, 16384, 99999}[i])
				for {
					k, err := tp.Read(buf)
					for _, v := range buf[:k] {
						if int(real(v)) != got[i] {
							errs[i] = errors.New("out of order")
							return
						}
						got[i]++
					}
					if err != nil {
						errs[i] = err
						return
					}
				}
			}()
		}
		f.run(context.Background())
		wg.Wait()
		for i := range got {
			if got[i] != n || !errors.Is(errs[i], end) {
				t.Errorf("end %v: tap %d read %d of %d samples, ended with %v", end, i, got[i], n, errs[i])
			}
		}
	}
}

// TestFanOutStopsWithContext: a tap that stops reading does not hang the
// fan-out once the context ends; the other taps then end with its error.
func TestFanOutStopsWithContext(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	f := newFanOut(&countSource{n: 1 << 30, step: 1 << 16, err: io.EOF}, 2)
	done := make(chan error)
	go func() {
		buf := make([]complex64, 4096)
		for {
			if _, err := f.taps[0].Read(buf); err != nil {
				done <- err
				return
			}
		}
	}()
	// taps[1] never reads: the pool runs dry and run waits.
	go cancel()
	f.run(ctx)
	if err := <-done; !errors.Is(err, context.Canceled) {
		t.Errorf("the reading tap ended with %v, want context.Canceled", err)
	}
}

// A fingerprint label names one transmitter per channel: on a station of
// several channels, T1 of one channel and T1 of another are stored as two
// transmitters (the store keys transmitters by name); on one channel the
// label stays as the scan printed it.
func TestChannelLabel(t *testing.T) {
	if got := channelLabel("T1", 144.825e6, 1); got != "T1" {
		t.Errorf("one channel: %q, want T1", got)
	}
	a, b := channelLabel("T1", 144.825e6, 2), channelLabel("T1", 144.760e6, 2)
	if a == b || a != "T1@144.8250MHz" || b != "T1@144.7600MHz" {
		t.Errorf("two channels: %q and %q, want T1@144.8250MHz and T1@144.7600MHz", a, b)
	}
}
