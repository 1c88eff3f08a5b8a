package capture

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"sync"
	"time"

	"nullseek/heading"
)

// DefaultCompassSilenceS is how long, in seconds, a live compass may go
// without a usable heading sentence before the capture fails, when
// CompassOptions.SilenceS is 0. A compass sends 1–20 sentences a second, so
// five seconds without one means it is unplugged, misconfigured or talking
// about something else.
const DefaultCompassSilenceS = 5.0

// ErrCompassReference is wrapped by the silence error of a compass that
// sends headings, but none from the wanted north (an HDM-only compass when
// true headings were asked for, or the other way round).
var ErrCompassReference = errors.New("compass headings are from the other north")

// CompassOptions configure StartCompassFeed.
type CompassOptions struct {
	// Ref selects the sentences that are recorded, as heading.ReadNMEA does
	// for a file: True takes HDT and HDG with variation; Magnetic takes HDM
	// and HDG (sensor heading plus deviation). Readings without Ref are
	// counted and skipped. The track keeps Ref; converting magnetic to true
	// is the caller's job (declination at the station).
	Ref heading.Ref
	// SilenceS fails the feed when no heading of Ref has arrived for this
	// many seconds, counted from the start and then from the last one;
	// 0 means DefaultCompassSilenceS.
	SilenceS float64
	// KeepLast, when > 0, bounds the readings the feed keeps to about the
	// last KeepLast (between KeepLast and twice that): a feed that runs
	// for hours, whose caller takes the headings as they come (OnHeading),
	// does not grow. Track then covers only the readings kept.
	KeepLast int
	// OnHeading, when set, is called with every heading of Ref the feed
	// records (arrival time on the local clock, degrees), on the feed's
	// goroutine; it must not call the feed.
	OnHeading func(t time.Time, deg float64)
}

// CompassFeed records a live NMEA 0183 compass in the background, each
// heading stamped with its arrival time on the local clock (the clock a
// live receiver's sdr.Info.Start is read from). Start it before the
// receiver is dialled so that nothing the compass sends waits unread in a
// socket buffer (it would be stamped late); Track then puts the headings
// on the capture's clock. Run drives one for Options.Compass.
type CompassFeed struct {
	stream    *heading.NMEAStream
	ref       heading.Ref
	keep      int
	onHeading func(time.Time, float64)
	silence   time.Duration
	cancel    context.CancelFunc
	wg        sync.WaitGroup
	failed    chan struct{}
	failOnce  sync.Once

	mu        sync.Mutex
	at        []time.Time
	deg       []float64
	lastOK    time.Time
	otherRef  int
	stale     int
	otherKind string
	stopped   bool
	err       error
}

// StartCompassFeed starts reading stream until ctx ends, Stop is called or
// the feed fails (see Err). It sets stream.IdleTimeout to twice the silence
// limit and stream.Logger to a discarding logger: skipped lines are reported in
// SkippedWarning and in the error instead. The feed owns the
// reading; the caller still closes the stream after Stop.
func StartCompassFeed(ctx context.Context, stream *heading.NMEAStream, opts CompassOptions) (*CompassFeed, error) {
	if stream == nil {
		return nil, errors.New("compass feed: no NMEA source")
	}
	if opts.Ref != heading.True && opts.Ref != heading.Magnetic {
		return nil, fmt.Errorf("compass %s: unknown reference %d", stream.Name(), int(opts.Ref))
	}
	s := opts.SilenceS
	if s == 0 {
		s = DefaultCompassSilenceS
	}
	if !(s > 0 && s <= 3600) {
		return nil, fmt.Errorf("compass %s: silence limit %v s must be from 0 to 3600 s", stream.Name(), opts.SilenceS)
	}
	if opts.KeepLast < 0 {
		return nil, fmt.Errorf("compass %s: KeepLast %d is negative", stream.Name(), opts.KeepLast)
	}
	silence := time.Duration(s * float64(time.Second))
	// The watchdog below says more than the stream's own idle error; let
	// it speak first.
	stream.IdleTimeout = 2 * silence
	stream.Logger = slog.New(slog.NewTextHandler(io.Discard, nil))
	cctx, cancel := context.WithCancel(ctx)
	f := &CompassFeed{stream: stream, ref: opts.Ref, keep: opts.KeepLast, onHeading: opts.OnHeading, silence: silence, cancel: cancel, failed: make(chan struct{}), lastOK: time.Now()}
	f.wg.Add(2)
	go func() {
		defer f.wg.Done()
		err := stream.Run(cctx, f.add)
		if cctx.Err() != nil {
			return // Stop, the caller's context or another failure
		}
		if err == nil {
			// Run ends cleanly only when the source hung up.
			err = fmt.Errorf("compass %s closed the connection (%s)", stream.Name(), f.stats())
		} else {
			err = fmt.Errorf("compass: %w", err)
		}
		f.fail(err)
	}()
	go func() {
		defer f.wg.Done()
		tick := time.NewTicker(max(silence/20, 10*time.Millisecond))
		defer tick.Stop()
		for {
			select {
			case <-cctx.Done():
				return
			case now := <-tick.C:
				f.mu.Lock()
				quiet := now.Sub(f.lastOK)
				n := len(f.at)
				f.mu.Unlock()
				if quiet > silence {
					f.fail(f.silentErr(n))
					return
				}
			}
		}
	}()
	return f, nil
}

// add takes one valid heading sentence from the stream.
func (f *CompassFeed) add(lr heading.LiveReading) {
	deg, has := lr.Heading(f.ref)
	if f.record(lr, deg, has) && f.onHeading != nil {
		f.onHeading(lr.Time, deg)
	}
}

// record keeps one reading and reports whether it was a usable heading.
func (f *CompassFeed) record(lr heading.LiveReading, deg float64, has bool) bool {
	f.mu.Lock()
	defer f.mu.Unlock()
	n := len(f.at)
	switch {
	case !has:
		f.otherRef++
		if f.otherKind == "" {
			f.otherKind = lr.Talker + lr.Type
			if lr.Type == "HDG" {
				f.otherKind += " without variation"
			}
		}
	case n > 0 && !lr.Time.After(f.at[n-1]):
		f.stale++
	default:
		if f.keep > 0 && n >= 2*f.keep {
			f.at = append(f.at[:0], f.at[n-f.keep:]...)
			f.deg = append(f.deg[:0], f.deg[n-f.keep:]...)
		}
		f.at = append(f.at, lr.Time)
		f.deg = append(f.deg, deg)
		f.lastOK = lr.Time
		return true
	}
	return false
}

// stats is the stream's counts with this feed's reference and time-order
// rejections folded in, in heading.NMEAStats' one-line form.
func (f *CompassFeed) stats() string {
	st := f.stream.Stats()
	f.mu.Lock()
	defer f.mu.Unlock()
	st.OtherRef, st.Stale = f.otherRef, f.stale
	st.Accepted = max(0, st.Accepted-f.otherRef-f.stale)
	if st.FirstProblem == "" && f.otherKind != "" {
		st.FirstProblem = fmt.Sprintf("%s has no %s heading", f.otherKind, f.ref)
	}
	return st.String()
}

func (f *CompassFeed) silentErr(recorded int) error {
	f.mu.Lock()
	other, kind := f.otherRef, f.otherKind
	f.mu.Unlock()
	secs := f.silence.Seconds()
	if recorded == 0 && other > 0 {
		return fmt.Errorf("compass %s: no %s heading in %.0f s, only %s (%s): %w", f.stream.Name(), f.ref, secs, kind, f.stats(), ErrCompassReference)
	}
	if f.stream.Stats().Lines == 0 {
		return fmt.Errorf("compass %s: nothing received in %.0f s (is it sending, and at this address and baud rate?)", f.stream.Name(), secs)
	}
	if recorded == 0 {
		return fmt.Errorf("compass %s: no valid heading sentence (HDT, HDM or HDG) in %.0f s (%s)", f.stream.Name(), secs, f.stats())
	}
	return fmt.Errorf("compass %s: no %s heading for %.0f s after %d good ones (%s)", f.stream.Name(), f.ref, secs, recorded, f.stats())
}

func (f *CompassFeed) fail(err error) {
	f.mu.Lock()
	if f.stopped || f.err != nil {
		f.mu.Unlock()
		return
	}
	f.err = err
	f.mu.Unlock()
	f.failOnce.Do(func() { close(f.failed) })
	f.cancel()
}

// Failed is closed when the feed fails (Err then says why).
func (f *CompassFeed) Failed() <-chan struct{} { return f.failed }

// Err returns the feed's failure, nil while it is healthy: the compass
// closed the connection, nothing at all arrived for the silence limit, no
// heading of the wanted reference arrived for it (wrapping
// ErrCompassReference when only the other north did), or a read error.
// Every message names the source and what it sent.
func (f *CompassFeed) Err() error {
	f.mu.Lock()
	defer f.mu.Unlock()
	return f.err
}

// Stop ends the feed and waits for its goroutines; failures after Stop are
// not reported. It returns Err. Safe to call more than once.
func (f *CompassFeed) Stop() error {
	f.mu.Lock()
	f.stopped = true
	f.mu.Unlock()
	f.cancel()
	f.wg.Wait()
	return f.Err()
}

// Track returns the headings recorded so far on the clock of a capture
// that starts at start: seconds from start, Ref as configured. Of the
// readings before start only the last is kept (for interpolation at the
// first samples). It fails when fewer than two readings remain.
func (f *CompassFeed) Track(start time.Time) (*heading.Track, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	tr := &heading.Track{Ref: f.ref}
	for i, at := range f.at {
		ts := at.Sub(start).Seconds()
		if ts < 0 && i+1 < len(f.at) && f.at[i+1].Before(start) {
			continue
		}
		tr.Samples = append(tr.Samples, heading.Sample{T: ts, Deg: f.deg[i]})
	}
	if len(tr.Samples) < 2 {
		return nil, fmt.Errorf("compass %s gave %d %s heading(s) during the capture", f.stream.Name(), len(tr.Samples), f.ref)
	}
	if err := tr.Validate(); err != nil {
		return nil, fmt.Errorf("compass %s: heading track: %w", f.stream.Name(), err)
	}
	return tr, nil
}

// Latest returns the last heading recorded (of Ref) and whether there is one.
func (f *CompassFeed) Latest() (deg float64, ok bool) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if n := len(f.deg); n > 0 {
		return f.deg[n-1], true
	}
	return 0, false
}

// SkippedWarning is a one-line summary of the sentences that failed their
// checks (garbage, bad or missing checksums), or "" when none did. Other
// sentence types and the other north are normal traffic and not counted.
func (f *CompassFeed) SkippedWarning() string {
	if st := f.stream.Stats(); st.Garbage+st.BadChecksum+st.NoChecksum > 0 {
		return fmt.Sprintf("compass %s: some sentences were skipped: %s", f.stream.Name(), f.stats())
	}
	return ""
}

// referenceHint adds the flags to give when a compass speaks of the other
// north than the one asked for.
func referenceHint(err error, asked heading.Ref) error {
	if !errors.Is(err, ErrCompassReference) {
		return err
	}
	if asked == heading.True {
		return fmt.Errorf("%w; for a magnetic compass give --heading-ref magnetic and --station LAT,LON (WMM2025) or --declination DEG", err)
	}
	return fmt.Errorf("%w; for a compass that gives true headings give --heading-ref true", err)
}
