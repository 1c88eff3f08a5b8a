package sdr

import "time"

// dropWatch detects samples lost inside one connection from arrival timing
// alone. The rtl_tcp stream carries no sequence numbers or timestamps
// (osmocom rtl-sdr src/rtl_tcp.c sends the bare cu8 buffers of
// rtlsdr_read_async), so a lost buffer is visible only as a clock step: the
// lag of each read,
//
//	lag = arrival − (origin + received/rate),
//
// where origin is the earliest arrival-less-duration seen (StreamOrigin),
// is the delay the read's data met beyond the smallest delay of the
// connection. A read stall (network, scheduler, a slow caller) raises the
// lag for a while and then the buffered data arrives in a burst and the
// lag falls back; samples the server dropped (rtl_tcp.c frees the oldest
// buffer of its queue once it holds more than -n buffers, default 500)
// never arrive, so the lag stays up by their duration. The watch keeps the
// minimum lag over windows of dropWindow and reports a drop when a
// window's minimum exceeds the previous window's by more than threshold;
// comparing consecutive windows lets the slow drift of a dongle's crystal
// (±100 ppm typical, 0.2 ms per 2 s window: common practice) pass.
//
// What it cannot see: a loss shorter than threshold; a loss during which
// the receiver's clock also stopped (nothing was sampled, nothing is
// missing); whether the lost samples were dropped by rtl_tcp, by librtlsdr
// (an RTL2832 FIFO overflow is silent) or by the kernel — only that they
// did not arrive; and the exact sample where the loss happened: it is
// placed at the first read whose lag rose above the threshold, which for a
// queue drop after a stall is the stall point (rtl_tcp drops the oldest
// queued buffers, those right after the last ones sent).
type dropWatch struct {
	rate      float64
	threshold time.Duration
	window    time.Duration
	// originNs is the origin the lags are measured from: the earliest
	// arrival-less-duration, raised by each drop found.
	originNs int64
	// winStart is the start of the current window, winMin its minimum lag,
	// prevMin the previous window's (−1 before the first full window).
	winStart        time.Time
	winMin, prevMin time.Duration
	// candAt is the sample count at the first read since the lag last
	// was within prevMin+threshold (−1: none): where a drop would be.
	candAt int64
	onDrop func(at, missing int64, lost time.Duration)
}

// dropWindow is the window of the lag minimum (a variable for tests): long
// enough to span a stall's catch-up burst (rtl_tcp's queue drains in
// milliseconds on a LAN), short enough to place a drop within seconds.
var dropWindow = 2 * time.Second

// DefaultDropThreshold is the smallest in-connection loss reported by
// default: 20 ms, under one rtl_tcp buffer at 2.4 MS/s (rtl_tcp.c reads
// 16 × 32 × 512-byte transfers = 131072 samples, 55 ms) and well over
// loopback and LAN scheduling jitter after the windowed minimum.
const DefaultDropThreshold = 20 * time.Millisecond

func newDropWatch(rate float64, threshold time.Duration, onDrop func(at, missing int64, lost time.Duration)) *dropWatch {
	if threshold <= 0 {
		threshold = DefaultDropThreshold
	}
	return &dropWatch{rate: rate, threshold: threshold, window: dropWindow, prevMin: -1, candAt: -1, onDrop: onDrop}
}

// note records that by time a, got samples (counted from sample 0 of the
// connection) had arrived, of which the last n in this read.
func (w *dropWatch) note(a time.Time, got, n int64) {
	if w == nil || !(w.rate > 0) || got <= 0 {
		return
	}
	cand := a.UnixNano() - int64(float64(got)/w.rate*1e9)
	if w.originNs == 0 || cand < w.originNs {
		// Earlier than any so far: the smallest delay fell, every lag of
		// this window is measured from here on.
		if w.originNs != 0 {
			// Lags measured from the old origin grow by the difference.
			d := time.Duration(w.originNs - cand)
			w.winMin += d
			if w.prevMin >= 0 {
				w.prevMin += d
			}
		}
		w.originNs = cand
	}
	lag := time.Duration(cand - w.originNs)
	if w.winStart.IsZero() {
		w.winStart, w.winMin = a, lag
	}
	if w.prevMin >= 0 {
		switch late := lag > w.prevMin+w.threshold; {
		case late && w.candAt < 0:
			w.candAt = got - n
		case !late:
			w.candAt = -1 // caught up: that was a stall
		}
	}
	if lag < w.winMin {
		w.winMin = lag
	}
	if a.Sub(w.winStart) < w.window {
		return
	}
	// The window is complete.
	if w.prevMin >= 0 && w.winMin > w.prevMin+w.threshold {
		step := w.winMin - w.prevMin
		at := w.candAt
		if at < 0 {
			at = got - n
		}
		missing := int64(float64(step)/1e9*w.rate + 0.5)
		w.originNs += int64(step)
		if w.onDrop != nil {
			w.onDrop(at, missing, step)
		}
		w.prevMin = w.winMin - step
		w.candAt = -1
	} else {
		w.prevMin = w.winMin
	}
	w.winStart, w.winMin = a, time.Duration(1<<62)
}
