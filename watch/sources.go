package watch

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"math"
	"time"

	"golang.org/x/sync/errgroup"

	"nullseek/capture"
	"nullseek/heading"
	"nullseek/internal/angle"
	"nullseek/station"
	"nullseek/store"
)

var discard = slog.New(slog.NewTextHandler(io.Discard, nil))

// runHeadings keeps the heading source running until ctx ends: when it
// fails, it says so once, and dials it again every RetryPeriod.
func (w *watcher) runHeadings(ctx context.Context) {
	retry := w.o.RetryPeriod
	if retry <= 0 {
		retry = DefaultRetryPeriod
	}
	lost := false
	for ctx.Err() == nil {
		var err error
		up := func() {
			w.headingOK.Store(true)
			if lost {
				w.logf("%s answers again: bearings resume", w.headingSourceName())
				lost = false
			}
		}
		if w.st.Heading.Source == station.HeadingRotator {
			err = w.runRotator(ctx, up)
		} else {
			err = w.runCompass(ctx, up)
		}
		w.headingOK.Store(false)
		if ctx.Err() != nil {
			return
		}
		if !lost {
			w.logf("warning: %s failed (%v): bursts are logged without bearings until it answers again", w.headingSourceName(), err)
			lost = true
		}
		select {
		case <-ctx.Done():
			return
		case <-time.After(retry):
		}
	}
}

func (w *watcher) headingSourceName() string {
	if w.st.Heading.Source == station.HeadingRotator {
		return "the rotator at " + w.st.Heading.Rotator
	}
	return "the compass at " + w.st.Heading.Compass
}

// runRotator sweeps the rotator back and forth between the station file's
// limits and polls its azimuth, until ctx ends (nil) or the rotator fails.
// On the way out it is told to stop (rotctld `S`): a rotator turns with
// force, so stopping it is a safety matter.
func (w *watcher) runRotator(ctx context.Context, up func()) error {
	h := w.st.Heading
	hz := w.o.PollHz
	if hz == 0 {
		hz = heading.DefaultPollHz
	}
	dctx, cancel := context.WithTimeout(ctx, heading.DefaultRotatorTimeout)
	rot, err := heading.DialRotator(dctx, h.Rotator, heading.RotatorOptions{CaptureStart: w.info.Start, PollHz: hz, Ref: w.ref, Logger: discard})
	cancel()
	if err != nil {
		return err
	}
	defer rot.Close()
	defer stopRotator(rot)
	up()
	g, gctx := errgroup.WithContext(ctx)
	g.Go(func() error {
		return rot.Poll(gctx, hz, func(t time.Time, az float64) {
			w.hs.add(t.Sub(w.info.Start).Seconds(), angle.Wrap360(az))
		})
	})
	g.Go(func() error {
		from, to := h.SweepFromDeg, h.SweepToDeg
		for gctx.Err() == nil {
			var err error
			if h.StepDeg == 0 {
				_, err = rot.ContinuousSweep(gctx, from, to)
			} else {
				step := math.Copysign(h.StepDeg, to-from)
				_, err = rot.StepSweep(gctx, from, step, to, time.Duration(h.DwellS*float64(time.Second)))
			}
			if err != nil {
				return err
			}
			from, to = to, from
		}
		return nil
	})
	err = g.Wait()
	if ctx.Err() != nil {
		return nil
	}
	if err == nil {
		err = fmt.Errorf("rotator at %s stopped answering", h.Rotator)
	}
	return err
}

// stopRotator tells the rotator to stop, on its connection or, when that
// is unusable, on a fresh one.
func stopRotator(rot *heading.Rotator) {
	if rot.Stop() == nil {
		return
	}
	ctx, cancel := context.WithTimeout(context.Background(), heading.DefaultRotatorTimeout)
	defer cancel()
	if r2, err := heading.DialRotator(ctx, rot.Addr(), heading.RotatorOptions{Logger: discard}); err == nil {
		r2.Stop()
		r2.Close()
	}
}

// runCompass reads the compass until ctx ends (nil) or it fails.
func (w *watcher) runCompass(ctx context.Context, up func()) error {
	addr, err := capture.ParseCompassAddr(w.st.Heading.Compass)
	if err != nil {
		return err
	}
	stream, err := addr.Open(ctx)
	if err != nil {
		return err
	}
	defer stream.Close()
	feed, err := capture.StartCompassFeed(ctx, stream, capture.CompassOptions{Ref: w.ref, KeepLast: 64,
		OnHeading: func(t time.Time, deg float64) { w.hs.add(t.Sub(w.info.Start).Seconds(), deg) }})
	if err != nil {
		return err
	}
	defer feed.Stop()
	up()
	select {
	case <-ctx.Done():
		return nil
	case <-feed.Failed():
		return feed.Err()
	}
}

// storeHeadings hands headings to the Writer under every channel's
// capture (the rotator turns one antenna for all of them, and a channel's
// capture reads back with its own heading track).
func (w *watcher) storeHeadings(hs []store.HeadingSample) error {
	if len(hs) == 0 {
		return nil
	}
	for _, l := range w.chans {
		if err := w.wr.AddHeadings(l.capture, w.ref.String(), hs); err != nil {
			return err
		}
	}
	return nil
}

// handOff hands the polled headings to the store's Writer every
// headingHandoff.
func (w *watcher) handOff(ctx context.Context) {
	tick := time.NewTicker(headingHandoff)
	defer tick.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-tick.C:
		}
		if err := w.storeHeadings(w.hs.take()); err != nil {
			w.fail(err) // the Writer has stopped: nothing more can be kept
			return
		}
	}
}
