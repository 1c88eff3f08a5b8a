package survey

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"nullseek/internal/angle"
	"sort"
	"sync"
	"sync/atomic"
	"time"

	"nullseek/heading"
	"nullseek/sdr"
)

// SweepPlan says how the rotator turns during a live capture. Azimuths are
// rotctld's (not normalised: a rotator with overlap accepts −180…450 and
// takes its own way between the two numbers).
type SweepPlan struct {
	// FromDeg and ToDeg are the start and end azimuths, degrees.
	FromDeg, ToDeg float64
	// StepDeg is 0 for a continuous sweep (heading.Rotator.ContinuousSweep);
	// otherwise the step of a stepped sweep (heading.Rotator.StepSweep),
	// signed towards ToDeg.
	StepDeg float64
	// Dwell is how long a stepped sweep waits at each step.
	Dwell time.Duration
}

// Check reports a plan that cannot be run.
func (p SweepPlan) Check() error {
	for _, v := range []float64{p.FromDeg, p.ToDeg, p.StepDeg} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("sweep: angles must be finite numbers of degrees")
		}
	}
	if p.FromDeg == p.ToDeg {
		return fmt.Errorf("sweep from %.1f° to %.1f° does not turn", p.FromDeg, p.ToDeg)
	}
	if p.StepDeg != 0 && (p.ToDeg-p.FromDeg)*p.StepDeg < 0 {
		return fmt.Errorf("sweep step %.2f° does not lead from %.1f° to %.1f°", p.StepDeg, p.FromDeg, p.ToDeg)
	}
	if p.Dwell < 0 {
		return fmt.Errorf("sweep dwell %v is negative", p.Dwell)
	}
	return nil
}

// DefaultLiveMarginS is how long a live capture goes on after the sweep
// ends, so the last readings of the sweep have level readings after them.
const DefaultLiveMarginS = 2.0

// LiveOptions configure CaptureLive.
type LiveOptions struct {
	// Rotator, when set, is turned by Plan during the capture and polled
	// for the heading track. Dial it with RotatorOptions.CaptureStart set
	// to the source's Info().Start so its sweep is on the recording's clock.
	Rotator *heading.Rotator
	Plan    SweepPlan
	// PollHz is the heading poll rate (default heading.DefaultPollHz).
	PollHz float64
	// MaxS caps the capture, in seconds of samples (0: no cap; then a
	// Rotator is required, and the capture ends MarginS after the sweep).
	MaxS float64
	// MarginS is how long the capture goes on after the sweep ends
	// (default DefaultLiveMarginS).
	MarginS float64
	// Ref is the north the rotator's azimuths are measured from.
	Ref heading.Ref
	// Sink receives every captured sample in order (for example
	// sdr.SigMFWriter.Write); nil discards them. Its error ends the capture.
	Sink func([]complex64) error
}

// LiveCapture is a finished live capture.
type LiveCapture struct {
	// Info is the source's Info with Samples set to the samples captured.
	Info sdr.Info
	// Track is the rotator's azimuth on the capture's clock (seconds from
	// Info.Start), polled over the whole capture and merged with the
	// sweep's own readings; nil without a rotator.
	Track *heading.Track
	// SweepDone is true when the sweep reached its end inside the capture.
	SweepDone bool
	// Warnings are conditions the user should know about.
	Warnings []string
}

// CaptureLive reads src (a live receiver) into opts.Sink while the rotator
// sweeps, and stops MarginS after the sweep ends or after MaxS seconds of
// samples, whichever is first (a sweep cut short is stopped and its
// positions so far are kept, with a warning). The heading track is polled
// at PollHz over the whole capture, so the turn to the sweep's start
// counts too. Time is the sample count from Info().Start.
//
// It fails, with one line saying what went wrong, when the receiver's
// stream fails or ends, when the rotator fails or closes the connection,
// when the sink fails or when ctx is cancelled; the rotator is stopped
// (when it still answers) and the caller should discard what the sink got.
func CaptureLive(ctx context.Context, src sdr.Source, opts LiveOptions) (*LiveCapture, error) {
	info := src.Info()
	rate := info.SampleRate
	if !(rate > 0) {
		return nil, fmt.Errorf("live capture: %s has no sample rate", info.Name)
	}
	if math.IsNaN(opts.MaxS) || opts.MaxS < 0 || math.IsInf(opts.MaxS, 0) {
		return nil, fmt.Errorf("live capture: duration %v s must be a positive number of seconds", opts.MaxS)
	}
	rot := opts.Rotator
	if rot == nil && opts.MaxS == 0 {
		return nil, fmt.Errorf("live capture without a rotator needs a duration")
	}
	if rot != nil {
		if err := opts.Plan.Check(); err != nil {
			return nil, fmt.Errorf("live capture: %w", err)
		}
	}
	if info.Start.IsZero() {
		return nil, fmt.Errorf("live capture: %s gave no start time", info.Name)
	}
	margin := opts.MarginS
	if margin == 0 {
		margin = DefaultLiveMarginS
	}
	hz := opts.PollHz
	if hz == 0 {
		hz = heading.DefaultPollHz
	}

	cctx, cancel := context.WithCancel(ctx)
	defer cancel()
	var stopAt atomic.Int64
	stopAt.Store(math.MaxInt64)
	if opts.MaxS > 0 {
		stopAt.Store(int64(math.Ceil(opts.MaxS * rate)))
	}
	var (
		mu       sync.Mutex
		firstErr error
		polled   []heading.Sample
		swept    *heading.Track
		done     bool
		wg       sync.WaitGroup
	)
	fail := func(err error) {
		mu.Lock()
		if firstErr == nil {
			firstErr = err
		}
		mu.Unlock()
		cancel()
	}
	// ours reports an error that only says the capture was cancelled by
	// this function (normal end or another part's failure).
	ours := func(err error) bool { return errors.Is(err, context.Canceled) && cctx.Err() != nil && ctx.Err() == nil }
	if rot != nil {
		wg.Add(2)
		go func() {
			defer wg.Done()
			err := rot.Poll(cctx, hz, func(t time.Time, az float64) {
				ts := t.Sub(info.Start).Seconds()
				mu.Lock()
				if n := len(polled); n == 0 || ts > polled[n-1].T {
					polled = append(polled, heading.Sample{T: ts, Deg: angle.Wrap360(az)})
				}
				mu.Unlock()
			})
			if err != nil && !ours(err) && cctx.Err() == nil {
				if errors.Is(err, heading.ErrRotatorClosed) {
					err = fmt.Errorf("%w (has rotctld stopped?)", err)
				}
				fail(err)
			}
		}()
		go func() {
			defer wg.Done()
			var tr *heading.Track
			var err error
			p := opts.Plan
			if p.StepDeg == 0 {
				tr, err = rot.ContinuousSweep(cctx, p.FromDeg, p.ToDeg)
			} else {
				tr, err = rot.StepSweep(cctx, p.FromDeg, p.StepDeg, p.ToDeg, p.Dwell)
			}
			if err != nil {
				if !ours(err) && cctx.Err() == nil {
					if errors.Is(err, heading.ErrRotatorClosed) {
						err = fmt.Errorf("%w (has rotctld stopped?)", err)
					}
					fail(err)
				}
				return
			}
			end := time.Since(info.Start).Seconds() + margin
			n := int64(math.Ceil(end * rate))
			mu.Lock()
			swept, done = tr, true
			mu.Unlock()
			for {
				cur := stopAt.Load()
				if n >= cur || stopAt.CompareAndSwap(cur, n) {
					break
				}
			}
		}()
	}

	buf := make([]complex64, 16384)
	var got int64
	var readErr error
	for got < stopAt.Load() && cctx.Err() == nil {
		want := min(int64(len(buf)), stopAt.Load()-got)
		n, err := src.Read(buf[:want])
		if n > 0 {
			if opts.Sink != nil {
				if serr := opts.Sink(buf[:n]); serr != nil {
					fail(fmt.Errorf("recording: %w", serr))
					break
				}
			}
			got += int64(n)
		}
		if err != nil {
			if errors.Is(err, io.EOF) {
				err = fmt.Errorf("%s: the stream ended after %d samples", info.Name, got)
			}
			readErr = err
			break
		}
	}
	if readErr != nil && ctx.Err() == nil {
		fail(fmt.Errorf("receiver: %w", readErr))
	}
	cancel()
	wg.Wait()
	elapsed := float64(got) / rate
	if ctx.Err() != nil {
		return nil, fmt.Errorf("live capture interrupted after %.1f s: %w", elapsed, ctx.Err())
	}
	if firstErr != nil {
		return nil, fmt.Errorf("live capture stopped %.1f s in: %w", elapsed, firstErr)
	}
	lc := &LiveCapture{Info: info, SweepDone: done}
	lc.Info.Samples = got
	if rot == nil {
		return lc, nil
	}
	all := append([]heading.Sample(nil), polled...)
	if swept != nil {
		all = append(all, swept.Samples...)
	}
	sort.SliceStable(all, func(i, j int) bool { return all[i].T < all[j].T })
	tr := &heading.Track{Ref: opts.Ref}
	for _, s := range all {
		// The two pollers share one connection; a reading within 10 ms of
		// the previous one adds nothing.
		if n := len(tr.Samples); n > 0 && s.T < tr.Samples[n-1].T+0.01 {
			continue
		}
		tr.Samples = append(tr.Samples, s)
	}
	if len(tr.Samples) < 2 {
		return nil, fmt.Errorf("live capture: the rotator at %s gave %d position(s) in %.1f s", rot.Addr(), len(tr.Samples), elapsed)
	}
	if err := tr.Validate(); err != nil {
		return nil, fmt.Errorf("live capture: heading track: %w", err)
	}
	lc.Track = tr
	if !done {
		last := tr.Samples[len(tr.Samples)-1]
		lc.Warnings = append(lc.Warnings, fmt.Sprintf("the capture ended (duration %.1f s) before the sweep did: rotator stopped at %.1f°; bearings use the part swept", elapsed, last.Deg))
	}
	return lc, nil
}
