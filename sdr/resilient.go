package sdr

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"math/rand/v2"
	"net"
	"sync"
	"time"
)

// GapKind says how samples went missing.
type GapKind int

const (
	// GapReconnect: the connection (or the USB device) failed and was
	// re-established; the samples of the outage were never received.
	GapReconnect GapKind = iota + 1
	// GapDropped: samples were lost inside one connection, seen as a step
	// in arrival timing (see dropWatch for what can and cannot be seen).
	GapDropped
)

func (k GapKind) String() string {
	switch k {
	case GapReconnect:
		return "reconnect"
	case GapDropped:
		return "dropped"
	}
	return fmt.Sprintf("GapKind(%d)", int(k))
}

// Gap is one stretch of samples a resilient receiver did not deliver.
//
// Convention: nothing is inserted. The delivered stream goes on with the
// next sample received, and the gap is reported as the index in the
// delivered stream of that first sample after it (Index: the gap lies
// between delivered samples Index−1 and Index) and its estimated length
// in samples (Missing). A caller keeps sample time honest by adding the
// Missing of every gap at or before a delivered index (StreamIndex does
// this): receiver time of delivered sample i is origin +
// StreamIndex(i)/rate.
//
// Rejected alternative: zero-filling the gap, so that the delivered index
// stays the clock by itself. Zeros are not silence to a direction finder:
// a run of zero samples is a level far below the noise floor, exactly
// what a deep antenna null looks like, and would be read as one; the
// length is an estimate (±1 read of jitter), so the filled stream would
// still not be exact; and an outage of an hour at 2.4 MS/s would make the
// receiver fabricate 8.6 G samples that every stage then processes.
type Gap struct {
	Kind GapKind
	// Index is the delivered-stream index of the first sample after the gap.
	Index int64
	// Missing is the estimated number of samples not delivered (≥ 0).
	Missing int64
	// Lost is the receiver time the gap spans (Missing / rate, before
	// rounding to whole samples).
	Lost time.Duration
	// Start is the estimated UTC wall time of the first missing sample.
	Start time.Time
	// Cause is the error that ended the connection, or what was seen.
	Cause string
}

// Backoff is the wait between reconnection attempts: attempt k (from 0)
// waits a random time in [(1−Jitter)·d, d] with d = min(Max, Min·2^k)
// ("exponential backoff with jitter", common practice: the jitter keeps
// several clients of one server from retrying in step).
type Backoff struct {
	// Min is the first wait (default 250 ms), Max the longest (default 30 s).
	Min, Max time.Duration
	// Jitter is the fraction of each wait that is random, in [0, 1]
	// (default 0.5).
	Jitter float64
}

// DefaultBackoff waits 250 ms, 500 ms, 1 s, … up to 30 s, each up to half
// shorter at random.
var DefaultBackoff = Backoff{Min: 250 * time.Millisecond, Max: 30 * time.Second, Jitter: 0.5}

func (b Backoff) withDefaults() Backoff {
	if b.Min <= 0 {
		b.Min = DefaultBackoff.Min
	}
	if b.Max <= 0 {
		b.Max = DefaultBackoff.Max
	}
	if b.Max < b.Min {
		b.Max = b.Min
	}
	if b.Jitter == 0 {
		b.Jitter = DefaultBackoff.Jitter
	}
	b.Jitter = math.Max(0, math.Min(1, b.Jitter))
	return b
}

// Delay is the wait before attempt k (0-based); u in [0, 1) is the random
// draw.
func (b Backoff) Delay(k int, u float64) time.Duration {
	d := b.Max
	if k < 62 {
		if m := b.Min << k; m > 0 && m < b.Max {
			d = m
		}
	}
	return d - time.Duration(b.Jitter*u*float64(d))
}

// ResilientOptions configures a receiver that survives faults.
type ResilientOptions struct {
	// Backoff between reconnection attempts; zero fields take
	// DefaultBackoff's.
	Backoff Backoff
	// GiveUpAfter ends the stream with an error when no connection could be
	// made for this long after a fault (0 = keep trying until the context
	// is cancelled or Close is called).
	GiveUpAfter time.Duration
	// DropThreshold is the smallest in-connection loss reported (default
	// DefaultDropThreshold); negative turns drop detection off.
	DropThreshold time.Duration
	// OnGap, if set, is called for each gap as it is found, from the
	// goroutine calling Read.
	OnGap func(Gap)
	// OnLost, if set, is called when the receiver is lost, before the
	// first reconnection attempt, from the goroutine calling Read; the
	// GapReconnect gap handed to OnGap says it is back.
	OnLost func(cause error)
	// Logger receives reconnection attempts; nil = slog.Default().
	Logger *slog.Logger
}

// leg is one connection (or one opening of a device) of a resilient
// receiver.
type leg interface {
	Source
	CU8Reader
}

// resilient is the reconnecting core shared by ResilientRTLTCP and the USB
// receiver.
type resilient struct {
	ctx    context.Context
	cancel context.CancelFunc
	name   string
	rate   float64
	info   Info
	opts   ResilientOptions
	open   func(ctx context.Context, w *dropWatch) (leg, error)
	log    *slog.Logger
	eofOK  bool

	mu    sync.Mutex // guards cur (for Close) and gaps
	cur   leg
	watch *dropWatch
	gaps  []Gap

	pos      int64 // samples delivered
	legStart int64 // delivered index of the current leg's sample 0
	// pending is a reconnect gap waiting for the new leg's first sample
	// (its origin); prevEnd is the receiver time just after the old leg's
	// last sample (in ns since the epoch).
	pending    *Gap
	prevEnd    int64
	reconnects int
	err        error
}

func newResilient(ctx context.Context, name string, rate float64, opts ResilientOptions, eofOK bool,
	open func(ctx context.Context, w *dropWatch) (leg, error)) (*resilient, error) {
	opts.Backoff = opts.Backoff.withDefaults()
	r := &resilient{name: name, rate: rate, opts: opts, open: open, eofOK: eofOK, log: opts.Logger}
	if r.log == nil {
		r.log = slog.Default()
	}
	r.ctx, r.cancel = context.WithCancel(ctx)
	r.watch = r.newWatch()
	l, err := open(r.ctx, r.watch)
	if err != nil {
		r.cancel()
		return nil, err
	}
	r.cur = l
	r.info = l.Info()
	return r, nil
}

func (r *resilient) newWatch() *dropWatch {
	if r.opts.DropThreshold < 0 {
		return nil
	}
	return newDropWatch(r.rate, r.opts.DropThreshold, func(at, missing int64, lost time.Duration) {
		r.addGap(Gap{Kind: GapDropped, Index: r.legStart + at, Missing: missing, Lost: lost,
			Start: time.Unix(0, r.watch.originNs-int64(lost)+int64(float64(at)/r.rate*1e9)).UTC(),
			Cause: fmt.Sprintf("arrivals fell %v behind the sample clock and did not catch up: samples lost upstream", lost.Round(time.Millisecond))})
	})
}

func (r *resilient) addGap(g Gap) {
	r.mu.Lock()
	r.gaps = append(r.gaps, g)
	r.mu.Unlock()
	if r.opts.OnGap != nil {
		r.opts.OnGap(g)
	}
}

// gapsCopy returns the gaps found so far.
func (r *resilient) gapsCopy() []Gap {
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]Gap(nil), r.gaps...)
}

// streamIndex maps a delivered index to the receiver's sample index.
func (r *resilient) streamIndex(i int64) int64 {
	r.mu.Lock()
	defer r.mu.Unlock()
	for _, g := range r.gaps {
		if g.Index <= i {
			i += g.Missing
		}
	}
	return i
}

// read runs one read of the current leg (rd returns samples read),
// reconnecting on failure until it delivers or gives up.
func (r *resilient) read(rd func(l leg) (int, error)) (int, error) {
	for {
		if r.err != nil {
			return 0, r.err
		}
		n, err := rd(r.cur)
		r.pos += int64(n)
		if n > 0 && r.pending != nil {
			r.finishGap()
		}
		if err == nil || n > 0 {
			return n, nil // an error of the leg is sticky: seen next time
		}
		if r.ctx.Err() != nil {
			r.err = fmt.Errorf("%s: %w", r.name, r.ctx.Err())
			return 0, r.err
		}
		if errors.Is(err, io.EOF) && r.eofOK {
			r.err = io.EOF
			return 0, io.EOF
		}
		if err := r.reconnect(err); err != nil {
			r.err = err
			return 0, err
		}
	}
}

// reconnect closes the failed leg and opens a new one with backoff. The
// gap is recorded once the new leg's first sample gives its origin.
func (r *resilient) reconnect(cause error) error {
	got := r.pos - r.legStart
	if w := r.watch; w != nil && w.originNs != 0 {
		r.prevEnd = w.originNs + int64(float64(got)/r.rate*1e9)
	} else {
		r.prevEnd = time.Now().UnixNano()
	}
	r.mu.Lock()
	r.cur.Close()
	r.mu.Unlock()
	r.log.Warn("receiver lost, reconnecting", "source", r.name, "after_samples", r.pos, "cause", cause.Error())
	if r.opts.OnLost != nil {
		r.opts.OnLost(cause)
	}
	t0 := time.Now()
	for k := 0; ; k++ {
		d := r.opts.Backoff.Delay(k, rand.Float64())
		if r.opts.GiveUpAfter > 0 && time.Since(t0)+d > r.opts.GiveUpAfter {
			return fmt.Errorf("%s: gave up reconnecting after %v and %d attempts (ResilientOptions.GiveUpAfter); the fault was: %v", r.name, time.Since(t0).Round(time.Millisecond), k, cause)
		}
		t := time.NewTimer(d)
		select {
		case <-r.ctx.Done():
			t.Stop()
			return fmt.Errorf("%s: %w", r.name, r.ctx.Err())
		case <-t.C:
		}
		w := r.newWatch() // its callback reads r.watch, the new one by then
		l, err := r.open(r.ctx, w)
		if err != nil {
			if r.ctx.Err() != nil {
				return fmt.Errorf("%s: %w", r.name, r.ctx.Err())
			}
			r.log.Info("reconnect attempt failed", "source", r.name, "attempt", k+1, "error", err.Error())
			continue
		}
		r.mu.Lock()
		r.cur, r.watch = l, w
		r.mu.Unlock()
		if r.ctx.Err() != nil { // closed while opening
			l.Close()
			return fmt.Errorf("%s: %w", r.name, r.ctx.Err())
		}
		r.reconnects++
		r.legStart = r.pos
		r.pending = &Gap{Kind: GapReconnect, Index: r.pos, Cause: cause.Error()}
		r.log.Warn("receiver back", "source", r.name, "attempts", k+1, "outage", time.Since(t0).Round(time.Millisecond))
		return nil
	}
}

// finishGap completes a reconnect gap from the new leg's origin: the
// samples the receiver took between the old leg's last one and the new
// leg's first.
func (r *resilient) finishGap() {
	g := r.pending
	r.pending = nil
	var origin int64
	if r.watch != nil {
		origin = r.watch.originNs
	}
	if origin == 0 {
		// No drop watch: the first sample's arrival less the samples read.
		origin = time.Now().UnixNano() - int64(float64(r.pos-r.legStart)/r.rate*1e9)
	}
	lost := time.Duration(max(0, origin-r.prevEnd))
	g.Lost = lost
	g.Missing = int64(math.Round(float64(lost) / 1e9 * r.rate))
	g.Start = time.Unix(0, r.prevEnd).UTC()
	r.addGap(*g)
}

func (r *resilient) close() error {
	r.cancel()
	r.mu.Lock()
	defer r.mu.Unlock()
	if err := r.cur.Close(); err != nil && !errors.Is(err, net.ErrClosed) {
		return err // a leg that failed was closed already
	}
	return nil
}

// ResilientRTLTCP is an rtl_tcp client that survives a dropped connection:
// it reconnects with backoff (ResilientOptions.Backoff), sends the whole
// configuration again after each greeting (rtl_tcp.c keeps no settings for
// a client: a restarted server, or one whose dongle was replugged, starts
// from its command-line defaults), and records each gap (see Gap for the
// convention: nothing is inserted). It also reports samples lost inside a
// connection, as far as arrival timing shows them.
//
// What can be detected over TCP: rtl_tcp sends bare cu8 bytes with no
// sequence numbers or timestamps (osmocom rtl-sdr src/rtl_tcp.c), and TCP
// itself loses nothing, so a loss is never visible in the data, only in
// its timing. A reconnection gap is measured from the receiver clock of
// each connection (the earliest arrival less the samples received): the
// estimate errs late by the new connection's first delivery delay
// (about 1 ms on loopback: 108238 samples estimated for 108000 lost in
// the test at 240 kS/s). Inside a connection, samples the server dropped
// (rtl_tcp.c frees its oldest queued buffer when its queue is full, after
// the client stalled) show as a lasting step in arrival lag and are
// reported once the step holds for a window (2 s); a stall whose data all
// arrives later is not a gap. Not detectable: a loss shorter than
// ResilientOptions.DropThreshold; where exactly in a stall the loss lay
// (it is placed at the stall); the dongle's own sample-rate error (its
// crystal, ±100 ppm typical: common practice), which the window-to-window
// comparison deliberately lets pass; and anything lost before the first
// sample.
//
// It implements Source and CU8Reader. Info() is the first connection's;
// Info().Start is the first sample's arrival and stays so across
// reconnections.
//
// The first connection is made by NewResilientRTLTCP itself and a failure
// is returned at once: a wrong address or a server that was never there is
// one clear error, not an endless retry. Only a connection that worked
// and then failed is retried. io.EOF from a server closing ends the stream
// only with cfg.EOFOnClose (a replay); otherwise it is a fault like any
// other.
type ResilientRTLTCP struct {
	resilientSource
}

// resilientSource is the API shared by ResilientRTLTCP and ResilientUSB.
type resilientSource struct {
	r *resilient
}

// NewResilientRTLTCP connects to the rtl_tcp server at addr like
// DialRTLTCP and returns a source that reconnects on faults. Cancelling
// ctx stops it (also a backoff wait).
func NewResilientRTLTCP(ctx context.Context, addr string, cfg RTLConfig, opts ResilientOptions) (*ResilientRTLTCP, error) {
	if err := cfg.check(); err != nil {
		return nil, fmt.Errorf("rtl_tcp %s: %w", addr, err)
	}
	rate, _ := rtlRate(cfg.SampleRate)
	r, err := newResilient(ctx, "rtl_tcp "+addr, float64(rate), opts, cfg.EOFOnClose,
		func(ctx context.Context, w *dropWatch) (leg, error) { return dialRTLTCP(ctx, addr, cfg, w) })
	if err != nil {
		return nil, err
	}
	return &ResilientRTLTCP{resilientSource{r}}, nil
}

// Info implements Source.
func (c *resilientSource) Info() Info { return c.r.info }

// Read implements Source; a fault is handled inside (the call blocks
// while reconnecting) and only a final failure is returned.
func (c *resilientSource) Read(dst []complex64) (int, error) {
	if len(dst) == 0 {
		return 0, nil
	}
	return c.r.read(func(l leg) (int, error) { return l.Read(dst) })
}

// ReadCU8 implements CU8Reader, with the same fault handling as Read.
func (c *resilientSource) ReadCU8(dst []byte) (int, error) {
	if len(dst) < 2 {
		return 0, nil
	}
	n, err := c.r.read(func(l leg) (int, error) { n, err := l.ReadCU8(dst); return n / 2, err })
	return 2 * n, err
}

// Close stops the receiver; a Read blocked in a backoff wait returns.
func (c *resilientSource) Close() error { return c.r.close() }

// Gaps returns the gaps found so far, in the order found. It is safe to
// call from any goroutine.
func (c *resilientSource) Gaps() []Gap { return c.r.gapsCopy() }

// StreamIndex maps a delivered sample index to the receiver's own sample
// count by adding the Missing of every gap at or before it.
func (c *resilientSource) StreamIndex(i int64) int64 { return c.r.streamIndex(i) }

// Reconnects is the number of successful reconnections.
func (c *resilientSource) Reconnects() int { return c.r.reconnects }

// ResilientUSB is an RTL-SDR on USB that survives device errors (a
// replugged or reset dongle): on a failed read it closes the device,
// reopens the same index with backoff, applies the whole configuration
// again, and records the gap like ResilientRTLTCP (same Gap convention,
// same drop detection from arrival timing). Built only with -tags rtlsdr
// (OpenResilientUSB); untested without hardware beyond building.
//
// Limits: librtlsdr's rtlsdr_read_sync cannot be interrupted, so Close
// must not be called while a Read is in progress (cancel the context and
// let Read return first); and the device is reopened by index, so with
// several dongles a replug may renumber them (librtlsdr numbers devices in
// USB enumeration order).
type ResilientUSB struct {
	resilientSource
}
