package capture

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"os"
	"path/filepath"
	"runtime/debug"
	"sort"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"golang.org/x/sync/errgroup"

	"nullseek/heading"
	"nullseek/internal/angle"
	"nullseek/internal/atomicfile"
	"nullseek/sdr"
)

// rtlTCPTransferSamples is how many samples one rtl_tcp read carries:
// rtl_tcp.c calls rtlsdr_read_async(dev, cb, NULL, buf_num, 0), and a
// buf_len of 0 means the default 16·32·512 bytes (rtl-sdr.h, librtlsdr-dev
// 0.6) = 131072 cu8 samples. A transfer is sent when it is full, so the
// first sample reaches us about one transfer's duration after it was taken.
const rtlTCPTransferSamples = 16 * 32 * 512 / 2

// blockSamples is how many samples the capture reads (and writes) at a
// time; a cut-short capture keeps every whole block read.
const blockSamples = 16384

// statusPeriod is how often Options.Status is shown the progress.
const statusPeriod = 250 * time.Millisecond

// MinAnalysisS is the shortest cut-short capture worth analysing, in
// seconds of samples (see Result.Analysable): the burst detector needs a
// second or so of noise to set its floor.
const MinAnalysisS = 2.0

// Result is a finished or cut-short capture.
type Result struct {
	// Info describes the recording: the receiver's Info with Start the UTC
	// time of sample 0 (re-based on the measured stream origin when
	// Latency.Auto) and Samples the number captured.
	Info sdr.Info
	// Meta and Data are the recording's files: under Options.Record, or in
	// a temporary folder that Close removes.
	Meta, Data string
	// HeadingLog is the heading log written beside a kept recording
	// (BASE.csv, heading.WriteLog's form), "" when none was written.
	HeadingLog string
	// Track is the headings on the recording's clock (seconds from
	// Info.Start) as the source gave them: Ref as configured, no mount
	// offset or lag. It is nil when the caller reads the headings from a
	// file (Options.HeadingFile) and when a cut-short capture had fewer
	// than two.
	Track *heading.Track
	// Kept is true when the recording stays after Close (Options.Record).
	Kept bool
	// Rotated are the base paths of the SigMF pairs kept in the
	// Options.Record directory, oldest first.
	Rotated []string
	// SweepDone is true when the rotator's sweep reached its end inside
	// the capture.
	SweepDone bool
	// Stop is what the rotator's safety stop found; nil without a rotator.
	Stop *RotatorStop
	// Warnings are conditions the user should know about, one line each.
	Warnings []string

	needsTrack bool
	tmpDir     string
}

// Seconds is the length of the recording in seconds of samples.
func (r *Result) Seconds() float64 { return float64(r.Info.Samples) / r.Info.SampleRate }

// Analysable reports whether a capture holds enough to analyse: at least
// MinAnalysisS seconds of samples and, unless the headings come from a
// file, a heading track.
func (r *Result) Analysable() bool {
	return r.Seconds() >= MinAnalysisS && (r.Track != nil || !r.needsTrack)
}

// Close removes a temporary recording (one made without Options.Record);
// a kept one stays. Safe to call more than once.
func (r *Result) Close() error {
	if r == nil || r.tmpDir == "" {
		return nil
	}
	err := os.RemoveAll(r.tmpDir)
	r.tmpDir = ""
	return err
}

// kept says in words what stays on disk.
func (r *Result) kept() string {
	if len(r.Rotated) > 0 {
		return fmt.Sprintf("kept %.1f s as %d SigMF pair(s) in %s", r.Seconds(), len(r.Rotated), filepath.Dir(r.Rotated[0])) + r.logNote()
	}
	if !r.Kept {
		return fmt.Sprintf("%.1f s captured, not kept (give --record FILE to keep a capture)", r.Seconds())
	}
	return fmt.Sprintf("kept %.1f s in %s and %s", r.Seconds(), r.Meta, filepath.Base(r.Data)) + r.logNote()
}

// logNote says where the heading log of a kept capture went.
func (r *Result) logNote() string {
	if r.HeadingLog != "" {
		return " with the heading log " + r.HeadingLog
	} else if r.needsTrack {
		return " (no heading log: too few headings)"
	}
	return ""
}

// ending is what was kept and where the rotator stopped, for the one line
// that says how a capture ended.
func (r *Result) ending() string {
	s := r.kept()
	if r.Stop != nil {
		s += "; " + r.Stop.String()
	}
	return s
}

// RotatorStop is what the safety stop at the end of a capture found.
type RotatorStop struct {
	// Addr is the rotctld address.
	Addr string
	// AzDeg is the azimuth read back after the stop (rotctld's number),
	// valid when Err is nil.
	AzDeg float64
	// Err says why the stop could not be sent or confirmed.
	Err error
}

func (s *RotatorStop) String() string {
	if s.Err != nil {
		return fmt.Sprintf("could not tell the rotator to stop (%v): check that it is not turning", s.Err)
	}
	return fmt.Sprintf("rotator at %s stopped at %.1f°", s.Addr, s.AzDeg)
}

// sink is where the samples go (an *sdr.SigMFWriter).
type sink interface {
	Write([]complex64) error
	SetStart(time.Time)
	Saturations() int64
	Close() error
	Abort() error
}

// session is one Run.
type session struct {
	o    Options
	note func(string)
	// open connects the receiver; newSink starts the recording. Tests
	// replace them.
	open    func(ctx context.Context, o *Options) (sdr.Source, error)
	newSink func(base string, info sdr.Info) (sink, error)

	stopOnce sync.Once
	stop     *RotatorStop
}

// discard is the logger given to the rotator: its warnings would repeat
// the one line that says how the capture ended.
var discard = slog.New(slog.NewTextHandler(io.Discard, nil))

// Run connects the receiver (and the rotator or compass), records until the
// capture ends and returns the recording and its heading track (see the
// package comment for how a capture ends). With an *Interrupted or
// *ReceiverFault error the Result is not nil and holds what was kept;
// with any other error it is nil and nothing is left on disk. Call the
// Result's Close when done with it.
func Run(ctx context.Context, o Options) (*Result, error) {
	if err := o.Validate(); err != nil {
		return nil, err
	}
	s := &session{o: o, open: openReceiver, newSink: newSigMF}
	return s.run(ctx)
}

// interruptedSetUp turns the error of a set-up that a cancellation cut
// short (a dial that was waiting) into the *Interrupted it is.
func (s *session) interruptedSetUp(ctx context.Context, err error) error {
	var intr *Interrupted
	if err == nil || ctx.Err() == nil || errors.As(err, &intr) {
		return err
	}
	return &Interrupted{Cause: context.Cause(ctx), During: "connecting", detail: "nothing was recorded" + stopText(s.stop)}
}

// openReceiver connects the receiver o names; ctx ending closes it.
func openReceiver(ctx context.Context, o *Options) (sdr.Source, error) {
	cfg := sdr.RTLConfig{CenterHz: o.tuning(), SampleRate: o.RateHz, PPM: o.PPM, AutoGain: o.Gain.Auto, GainDB: o.Gain.DB}
	if o.Receiver.Scheme == "usb" {
		src, err := sdr.OpenUSB(o.Receiver.Index, cfg)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", o.Receiver, err)
		}
		return src, nil
	}
	return sdr.DialRTLTCP(ctx, o.Receiver.Addr, cfg)
}

func newSigMF(base string, info sdr.Info) (sink, error) {
	w, err := sdr.CreateSigMF(base, info, "cu8")
	if err != nil {
		return nil, err
	}
	w.Meta().Global.Description = "nullseek live capture from " + info.Name
	return w, nil
}

// originer is a receiver that measures its stream origin (sdr.RTLTCP).
type originer interface{ StreamOrigin() time.Time }

// meter counts the samples captured and measures the last block's level,
// for the status line.
type meter struct {
	n       atomic.Int64
	levelDB atomic.Uint64 // math.Float64bits
	clipped atomic.Bool
	clip    float32
}

// minLevelDBFS is the level shown for a block of zeros.
const minLevelDBFS = -120.0

func (m *meter) add(b []complex64) {
	var p float64
	clipped := false
	for _, v := range b {
		re, im := real(v), imag(v)
		p += float64(re)*float64(re) + float64(im)*float64(im)
		if re >= m.clip || -re >= m.clip || im >= m.clip || -im >= m.clip {
			clipped = true
		}
	}
	db := minLevelDBFS
	if p > 0 {
		db = max(minLevelDBFS, 10*math.Log10(p/float64(len(b))))
	}
	m.levelDB.Store(math.Float64bits(db))
	m.clipped.Store(clipped)
	m.n.Add(int64(len(b)))
}

func (m *meter) level() float64 { return math.Float64frombits(m.levelDB.Load()) }

// headings holds the rotator's polled positions and the sweep's track.
type headings struct {
	mu     sync.Mutex
	polled []heading.Sample
	lastAz float64
	have   bool
	swept  *heading.Track
	done   bool
}

func (s *session) run(ctx context.Context) (res *Result, err error) {
	defer func() {
		if res == nil {
			err = s.interruptedSetUp(ctx, err)
		}
	}()
	o := &s.o
	s.note = o.Notes
	if s.note == nil {
		s.note = func(string) {}
	}
	recDir := ""
	if fi, err := os.Stat(o.Record); err == nil && fi.IsDir() {
		recDir = o.Record
	}
	base, tmpDir, err := recordingBase(o.Record, recDir != "")
	if err != nil {
		return nil, err
	}
	defer func() {
		if res == nil && tmpDir != "" {
			os.RemoveAll(tmpDir)
		}
	}()
	// The recording is started first: a folder that cannot be written
	// costs nothing.
	rate := o.RateHz
	w, err := s.newSink(base, sdr.Info{SampleRate: rate, CenterHz: o.tuning()})
	if err != nil {
		return nil, err
	}
	closed := false
	defer func() {
		if !closed {
			w.Abort()
		}
	}()

	// The compass before the receiver: an unreachable compass costs
	// nothing, and no sentence waits unread in a socket buffer to be
	// stamped late.
	var feed *CompassFeed
	if o.Compass != nil {
		stream, err := o.Compass.open(ctx)
		if err != nil {
			return nil, err
		}
		defer stream.Close()
		if feed, err = StartCompassFeed(ctx, stream, CompassOptions{Ref: o.Ref, SilenceS: o.compassSilenceS}); err != nil {
			return nil, err
		}
		defer feed.Stop()
		s.note(fmt.Sprintf("reading %s headings from the compass at %s", o.Ref, o.Compass))
	}

	// sctx ends with the session: the receiver is closed then, which also
	// ends a read that is waiting.
	sctx, endSession := context.WithCancel(ctx)
	defer endSession()
	src, err := s.open(sctx, o)
	if err != nil {
		return nil, err
	}
	defer src.Close()
	info := src.Info()
	info.SampleRate = rate
	var first []complex64
	if info.Start.IsZero() {
		// A USB receiver stamps its start with the first read.
		buf := make([]complex64, blockSamples)
		n, err := src.Read(buf)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", info.Name, err)
		}
		first, info.Start = buf[:n], src.Info().Start
		if info.Start.IsZero() {
			return nil, fmt.Errorf("live capture: %s gave no start time", info.Name)
		}
	}
	latS, refine := o.Latency.S, false
	if o.Latency.Auto {
		latS = 0
		if _, ok := src.(originer); ok {
			latS, refine = rtlTCPTransferSamples/rate, true
		}
	}
	info.Start = info.Start.Add(-time.Duration(latS * float64(time.Second)))
	w.SetStart(info.Start)
	var rec *sdr.RotatingSigMF
	if recDir != "" {
		every := o.RecordEvery
		if every == 0 {
			every = DefaultRecordEvery
		}
		geo := o.Geolocation
		ri := info
		ri.CenterHz = o.tuning()
		if rec, err = sdr.NewRotatingSigMF(ri, sdr.RotateOptions{Dir: recDir, Every: every, Position: func() *sdr.GeoPoint { return geo }}); err != nil {
			return nil, fmt.Errorf("--record %s: %w", recDir, err)
		}
		w = &teeSink{sink: w, rec: rec}
	}

	var rot *heading.Rotator
	if o.Plan != nil {
		rot, err = heading.DialRotator(ctx, o.Rotator, heading.RotatorOptions{CaptureStart: info.Start, PollHz: o.PollHz, Ref: o.Ref, Logger: discard})
		if err != nil {
			return nil, err
		}
		defer rot.Close()
		// Deferred calls run on every way out, a panic included.
		defer s.stopRotator(rot)
		s.note(fmt.Sprintf("recording %s while the rotator at %s sweeps %s", info.Name, o.Rotator, o.Plan))
	} else {
		s.note(fmt.Sprintf("recording %s for %.1f s", info.Name, o.DurationS))
	}

	m := &meter{clip: info.ClipLevel}
	if m.clip <= 0 {
		m.clip = 1
	}
	var stopAt atomic.Int64
	stopAt.Store(math.MaxInt64)
	if o.DurationS > 0 {
		stopAt.Store(int64(math.Ceil(o.DurationS * rate)))
	}
	hs := &headings{}
	g, gctx := errgroup.WithContext(sctx)
	defer context.AfterFunc(gctx, endSession)()
	g.Go(guard(func() error {
		defer endSession() // the capture is complete: end the others
		return s.read(gctx, src, w, first, &stopAt, m, info.Name)
	}))
	if rot != nil {
		g.Go(guard(func() error { return s.poll(gctx, rot, info.Start, hs) }))
		g.Go(guard(func() error { return s.sweep(gctx, rot, info.Start, rate, &stopAt, hs) }))
	}
	if feed != nil {
		g.Go(guard(func() error {
			select {
			case <-feed.Failed():
				return referenceHint(feed.Err(), o.Ref)
			case <-gctx.Done():
				return nil
			}
		}))
	}
	if o.Status != nil {
		g.Go(guard(func() error {
			s.showStatus(gctx, rate, &stopAt, m, hs, feed)
			return nil
		}))
	}
	werr := g.Wait()
	endSession()
	if o.Status != nil {
		o.Status.Clear()
	}

	got := m.n.Load()
	elapsed := float64(got) / rate
	var stop *RotatorStop
	if rot != nil {
		stop = s.stopRotator(rot)
	}
	if feed != nil {
		feed.Stop()
	}
	var pe *panicError
	if errors.As(werr, &pe) {
		s.note(fmt.Sprintf("panic: %v\n%s", pe.v, pe.stack)) // a bug: keep where it was
	}
	interrupted := ctx.Err() != nil
	var fault *ReceiverFault
	isFault := !interrupted && errors.As(werr, &fault)
	if werr != nil && !interrupted && !isFault {
		err := fmt.Errorf("live capture stopped %.1f s in: %w", elapsed, werr)
		if stop != nil && stop.Err != nil {
			err = fmt.Errorf("%w; %s", err, stop)
		}
		return nil, err
	}

	res = &Result{Info: info, Stop: stop, needsTrack: o.HeadingFile == "", tmpDir: tmpDir, Kept: o.Record != "" && recDir == ""}
	res.Info.Samples = got
	res.Meta, res.Data = base+".sigmf-meta", base+".sigmf-data"
	cut := interrupted || isFault
	if got == 0 {
		// Nothing to keep: the deferred calls discard the recording.
		switch {
		case interrupted:
			return nil, &Interrupted{Cause: context.Cause(ctx), During: "the capture", detail: "nothing was recorded" + stopText(stop)}
		case isFault:
			return nil, fault.finish(res.Info, o.DurationS, "nothing was recorded"+stopText(stop))
		}
		return nil, fmt.Errorf("live capture: %s gave no samples", info.Name)
	}

	// The headings, as a new track on the capture's clock.
	var tr *heading.Track
	var trErr error
	switch {
	case rot != nil:
		hs.mu.Lock()
		tr, trErr = rotatorTrack(hs.polled, hs.swept, o.Ref, rot.Addr(), elapsed)
		res.SweepDone = hs.done
		hs.mu.Unlock()
	case feed != nil:
		tr, trErr = feed.Track(info.Start)
		if trErr != nil {
			trErr = fmt.Errorf("live capture: %w", trErr)
		}
		if w := feed.SkippedWarning(); w != "" {
			res.Warnings = append(res.Warnings, w)
		}
	}
	if so, ok := src.(originer); ok && refine && !so.StreamOrigin().IsZero() {
		// The first-arrival stamp less one transfer was a guess; the origin
		// measured over the whole capture is not (sdr.RTLTCP.StreamOrigin).
		// The headings were stamped against the guess: move them with it.
		origin := so.StreamOrigin()
		tr = shifted(tr, res.Info.Start.Sub(origin).Seconds())
		res.Info.Start = origin
		w.SetStart(origin)
	}
	tr = upTo(tr, elapsed)
	if o.Turn != nil {
		// A steady turn is defined on the recording's clock already.
		tr, trErr = TurnTrack(*o.Turn, elapsed)
	}
	if trErr != nil {
		if !cut {
			return nil, trErr
		}
		res.Warnings = append(res.Warnings, "no heading track: "+trErr.Error())
		tr = nil
	}
	res.Track = tr
	if rot != nil && !res.SweepDone && !cut && tr != nil {
		last := tr.Samples[len(tr.Samples)-1]
		res.Warnings = append(res.Warnings, fmt.Sprintf("the capture ended (duration %.1f s) before the sweep did: rotator stopped at %.1f°; bearings use the part swept", elapsed, last.Deg))
	}
	if n := w.Saturations(); n > 0 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("%d sample components were at the receiver's rails (clipping): lower --gain", n))
	}
	closed = true
	if err := w.Close(); err != nil {
		return nil, err
	}
	logBase := base
	if rec != nil {
		if res.Rotated = rec.Files(); len(res.Rotated) > 0 {
			logBase = res.Rotated[0]
		}
	}
	if o.Record != "" && tr != nil {
		log := logBase + ".csv"
		if err := atomicfile.WriteFunc(log, func(w io.Writer) error { return heading.WriteLog(w, tr) }); err != nil {
			for _, p := range []string{res.Meta, res.Data} {
				os.Remove(p)
			}
			return nil, fmt.Errorf("heading log: %w", err)
		}
		res.HeadingLog = log
	}
	switch {
	case interrupted:
		return res, &Interrupted{Cause: context.Cause(ctx), AfterS: elapsed, During: "the capture", detail: res.ending()}
	case isFault:
		return res, fault.finish(res.Info, o.DurationS, res.ending())
	}
	return res, nil
}

// recordingBase is the base path of the recording: record without a
// SigMF extension, or a new temporary folder's "live".
func recordingBase(record string, isDir bool) (base, tmpDir string, err error) {
	if record == "" || isDir {
		if tmpDir, err = os.MkdirTemp("", "nullseek-live-"); err != nil {
			return "", "", fmt.Errorf("live capture: %w", err)
		}
		return filepath.Join(tmpDir, "live"), tmpDir, nil
	}
	for _, ext := range []string{".sigmf-meta", ".sigmf-data", ".sigmf"} {
		record = strings.TrimSuffix(record, ext)
	}
	return record, "", nil
}

// guard turns a panic in a capture goroutine into its error, so that the
// capture still ends through its deferred clean-up (the rotator's stop).
func guard(f func() error) func() error {
	return func() (err error) {
		defer func() {
			if v := recover(); v != nil {
				err = &panicError{v: v, stack: debug.Stack()}
			}
		}()
		return f()
	}
}

// panicError is a recovered panic; Stack keeps where it happened.
type panicError struct {
	v     any
	stack []byte
}

func (e *panicError) Error() string { return fmt.Sprintf("internal error (please report it): %v", e.v) }

// read copies the receiver into the recording until stopAt samples, the
// context ends (nil) or the receiver fails (*ReceiverFault).
func (s *session) read(ctx context.Context, src sdr.Source, w sink, first []complex64, stopAt *atomic.Int64, m *meter, name string) error {
	buf := make([]complex64, blockSamples)
	for {
		limit, got := stopAt.Load(), m.n.Load()
		if got >= limit || ctx.Err() != nil {
			return nil
		}
		var blk []complex64
		var rerr error
		if len(first) > 0 {
			blk, first = first[:min(int64(len(first)), limit-got)], nil
		} else {
			n, err := src.Read(buf[:min(int64(len(buf)), limit-got)])
			blk, rerr = buf[:n], err
		}
		if len(blk) > 0 {
			if err := w.Write(blk); err != nil {
				return fmt.Errorf("recording: %w", err)
			}
			m.add(blk)
		}
		if rerr != nil {
			if ctx.Err() != nil {
				return nil // the capture was ended by a signal or another part
			}
			if errors.Is(rerr, io.EOF) {
				rerr = fmt.Errorf("%s: the stream ended after %d samples", name, m.n.Load())
			}
			return &ReceiverFault{Err: rerr}
		}
	}
}

// rotatorErr adds a hint to a closed rotator connection.
func rotatorErr(err error) error {
	if errors.Is(err, heading.ErrRotatorClosed) {
		return fmt.Errorf("%w (has rotctld stopped?)", err)
	}
	return err
}

// poll records the rotator's azimuth over the whole capture, so the turn
// to the sweep's start counts too.
func (s *session) poll(ctx context.Context, rot *heading.Rotator, start time.Time, hs *headings) error {
	err := rot.Poll(ctx, s.o.PollHz, func(t time.Time, az float64) {
		ts := t.Sub(start).Seconds()
		hs.mu.Lock()
		defer hs.mu.Unlock()
		hs.lastAz, hs.have = az, true
		if n := len(hs.polled); n == 0 || ts > hs.polled[n-1].T {
			hs.polled = append(hs.polled, heading.Sample{T: ts, Deg: angle.Wrap360(az)})
		}
	})
	if err != nil && ctx.Err() == nil {
		return rotatorErr(err)
	}
	return nil
}

// sweep turns the rotator by the plan; when it is done, the capture is set
// to end MarginS later.
func (s *session) sweep(ctx context.Context, rot *heading.Rotator, start time.Time, rate float64, stopAt *atomic.Int64, hs *headings) error {
	p := s.o.Plan
	var tr *heading.Track
	var err error
	if p.StepDeg == 0 {
		tr, err = rot.ContinuousSweep(ctx, p.FromDeg, p.ToDeg)
	} else {
		tr, err = rot.StepSweep(ctx, p.FromDeg, p.StepDeg, p.ToDeg, p.Dwell)
	}
	if err != nil {
		if ctx.Err() != nil {
			return nil // cancelled: the sweep stopped the rotator itself
		}
		return rotatorErr(err)
	}
	n := int64(math.Ceil((time.Since(start).Seconds() + s.o.MarginS) * rate))
	for {
		cur := stopAt.Load()
		if n >= cur || stopAt.CompareAndSwap(cur, n) {
			break
		}
	}
	hs.mu.Lock()
	hs.swept, hs.done = tr, true
	hs.mu.Unlock()
	return nil
}

// stopRotator tells the rotator to stop (rotctld `S`) and reads its
// position back (`p`), once. When the capture's connection is unusable (a
// timeout leaves it out of step), a fresh one is tried: rotctld may well
// be alive.
func (s *session) stopRotator(rot *heading.Rotator) *RotatorStop {
	s.stopOnce.Do(func() {
		st := &RotatorStop{Addr: rot.Addr()}
		s.stop = st
		stopAndRead := func(r *heading.Rotator) error {
			if err := r.Stop(); err != nil {
				return err
			}
			az, _, err := r.Position()
			st.AzDeg = az
			return err
		}
		err := stopAndRead(rot)
		if err != nil {
			ctx, cancel := context.WithTimeout(context.Background(), heading.DefaultRotatorTimeout)
			defer cancel()
			r2, derr := heading.DialRotator(ctx, rot.Addr(), heading.RotatorOptions{Logger: discard})
			if derr != nil {
				st.Err = derr // the first error only said the connection was unusable
				return
			}
			defer r2.Close()
			err = stopAndRead(r2)
		}
		st.Err = err
	})
	return s.stop
}

// stopText is the rotator's stop for a message, led by "; ".
func stopText(st *RotatorStop) string {
	if st == nil {
		return ""
	}
	return "; " + st.String()
}

// rotatorTrack merges the polled positions and the sweep's own readings
// into one track on the capture's clock.
func rotatorTrack(polled []heading.Sample, swept *heading.Track, ref heading.Ref, addr string, elapsed float64) (*heading.Track, error) {
	all := append([]heading.Sample(nil), polled...)
	if swept != nil {
		all = append(all, swept.Samples...)
	}
	sort.SliceStable(all, func(i, j int) bool { return all[i].T < all[j].T })
	tr := &heading.Track{Ref: ref}
	for _, s := range all {
		// The two pollers share one connection; a reading within 10 ms of
		// the previous one adds nothing.
		if n := len(tr.Samples); n > 0 && s.T < tr.Samples[n-1].T+0.01 {
			continue
		}
		tr.Samples = append(tr.Samples, s)
	}
	if len(tr.Samples) < 2 {
		return nil, fmt.Errorf("live capture: the rotator at %s gave %d position(s) in %.1f s", addr, len(tr.Samples), elapsed)
	}
	if err := tr.Validate(); err != nil {
		return nil, fmt.Errorf("live capture: heading track: %w", err)
	}
	return tr, nil
}

// shifted returns a copy of tr with every sample deltaS seconds later (nil
// for nil): heading tracks are immutable once built.
func shifted(tr *heading.Track, deltaS float64) *heading.Track {
	if tr == nil {
		return nil
	}
	c := *tr
	c.Samples = make([]heading.Sample, len(tr.Samples))
	for i, s := range tr.Samples {
		c.Samples[i] = heading.Sample{T: s.T + deltaS, Deg: s.Deg}
	}
	return &c
}

// upTo returns a copy of tr without the readings after endS but the first
// (which the last samples interpolate towards): the track ends with the
// recording's last block. Nil for nil.
func upTo(tr *heading.Track, endS float64) *heading.Track {
	if tr == nil {
		return nil
	}
	n := sort.Search(len(tr.Samples), func(i int) bool { return tr.Samples[i].T > endS })
	c := *tr
	c.Samples = append([]heading.Sample(nil), tr.Samples[:min(n+1, len(tr.Samples))]...)
	return &c
}

// showStatus shows the progress every statusPeriod until ctx ends.
func (s *session) showStatus(ctx context.Context, rate float64, stopAt *atomic.Int64, m *meter, hs *headings, feed *CompassFeed) {
	tick := time.NewTicker(statusPeriod)
	defer tick.Stop()
	var fl floor
	for {
		select {
		case <-ctx.Done():
			return
		case <-tick.C:
		}
		st := Status{ElapsedS: float64(m.n.Load()) / rate, LevelDBFS: m.level(), Clipping: m.clipped.Load()}
		st.SNRDB, st.SNRKnown = fl.add(st.ElapsedS, st.LevelDBFS)
		if n := stopAt.Load(); n != math.MaxInt64 {
			st.TotalS = float64(n) / rate
		}
		switch {
		case s.o.Plan != nil:
			hs.mu.Lock()
			st.Source, st.HeadingDeg, st.HeadingKnown = "rotator", hs.lastAz, hs.have
			hs.mu.Unlock()
		case feed != nil:
			st.Source = "compass"
			st.HeadingDeg, st.HeadingKnown = feed.Latest()
		case s.o.Turn != nil:
			st.Source, st.HeadingDeg, st.HeadingKnown = "turn", s.o.Turn.HeadingAt(st.ElapsedS), true
		}
		s.o.Status.Show(st)
	}
}

// teeSink writes the capture to its recording and to the rotating SigMF
// pairs of a --record directory. Abort discards the recording but keeps
// the pairs: they hold what was received.
type teeSink struct {
	sink
	rec *sdr.RotatingSigMF
}

func (t *teeSink) Write(b []complex64) error {
	if err := t.sink.Write(b); err != nil {
		return err
	}
	return t.rec.Write(b)
}

func (t *teeSink) Close() error {
	err := t.sink.Close()
	if rerr := t.rec.Close(); rerr != nil && err == nil {
		err = fmt.Errorf("--record: %w", rerr)
	}
	return err
}

func (t *teeSink) Abort() error {
	err := t.sink.Abort()
	t.rec.Close()
	return err
}
