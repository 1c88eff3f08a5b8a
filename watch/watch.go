package watch

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"math"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"nullseek/bearing"
	"nullseek/capture"
	"nullseek/geo"
	"nullseek/heading"

	"nullseek/receiver"
	"nullseek/sdr"
	"nullseek/station"
	"nullseek/store"
	"nullseek/survey"
)

// Defaults of Options.
const (
	// DefaultStatusPeriod is how often the status line is printed.
	DefaultStatusPeriod = 10 * time.Second
	// DefaultRetryPeriod is how long the watch waits before dialling a
	// heading source that failed again.
	DefaultRetryPeriod = 2 * time.Second
	// DefaultFlushInterval is the store Writer's commit interval when
	// Options.Writer does not set one. Headings are handed to the Writer
	// every headingHandoff, so the rows at risk in a crash are those of
	// the last FlushInterval + headingHandoff: one second.
	DefaultFlushInterval = 800 * time.Millisecond
	// MaxScheduleBursts is how many of the latest bursts the slot schedule
	// is refitted on: a few hours of a fox-hunt channel (a burst a minute),
	// and a bound on the work per burst.
	MaxScheduleBursts = 200
)

// headingHandoff is how often polled headings are handed to the Writer.
const headingHandoff = 200 * time.Millisecond

// SourceFactory opens the receiver. The watch calls it once; a factory
// that reconnects (an rtl_tcp client that dials again when the server
// goes away) slots in here without changing the watch, as long as its
// Source keeps one sample clock across reconnections.
type SourceFactory func(ctx context.Context, cfg sdr.RTLConfig) (sdr.Source, error)

// Options configure Run.
type Options struct {
	// Station is the parsed station file (station.Load); DB the store
	// opened at its database.
	Station *station.File
	DB      *store.DB
	// Open opens the receiver; nil dials the station file's rtl_tcp
	// address (sdr.DialRTLTCP) or opens its USB stick (sdr.OpenUSB).
	Open SourceFactory
	// Log receives one line per burst, the warnings and how the watch
	// ended; Status the periodic status lines. nil discards.
	Log, Status io.Writer
	// StatusPeriod is how often the status line is printed (0:
	// DefaultStatusPeriod).
	StatusPeriod time.Duration
	// DurationS ends the watch after this many seconds of samples; 0
	// watches until ctx ends.
	DurationS float64
	// Now is the clock of the status lines and of WMM's date; nil is
	// time.Now. The samples' UTC times come from the receiver.
	Now func() time.Time
	// Writer tunes the store's batching (FlushInterval 0 means
	// DefaultFlushInterval here).
	Writer store.WriterOptions
	// PollHz is the rotator's polls a second (0: heading.DefaultPollHz).
	PollHz float64
	// RetryPeriod is the wait before a failed heading source is dialled
	// again (0: DefaultRetryPeriod).
	RetryPeriod time.Duration
	// Receiver overrides the burst detector's settings (zero fields take
	// receiver.DefaultConfig's); the channel always comes from the station
	// file.
	Receiver receiver.Config
	// RecordDir, when set, keeps every sample received as SigMF in that
	// directory (sdr.RotatingSigMF: pairs named after their first sample's
	// UTC time, rolled over every RecordEvery or before RecordMaxBytes,
	// with core:geolocation from the station's position and each receiver
	// gap as a capture segment).
	RecordDir string
	// RecordEvery is the receiver time per recorded pair (0:
	// capture.DefaultRecordEvery); RecordMaxBytes caps a data file (0: no
	// cap).
	RecordEvery    time.Duration
	RecordMaxBytes int64
}

// Summary is what a watch did.
type Summary struct {
	// Capture is the first channel's capture row; Captures every
	// channel's, in the station file's order.
	Capture  store.CaptureID
	Captures []store.CaptureID
	Samples  int64
	Bursts   int
	Bearings int
	// Committed are the store's totals when the watch ended.
	Committed store.CommitStats
}

// Run watches until ctx ends or Options.DurationS of samples were read
// (see the package comment for how a watch ends).
func Run(ctx context.Context, o Options) (*Summary, error) {
	w, err := newWatcher(o)
	if err != nil {
		return nil, err
	}
	return w.run(ctx)
}

// watcher is one Run.
type watcher struct {
	o       Options
	st      *station.File
	chans   []*listener // one per [[channel]]
	ref     heading.Ref
	pattern bearing.Pattern
	mount   float64
	declDeg *float64 // for a magnetic heading source
	now     func() time.Time
	logMu   sync.Mutex

	stationID store.StationID
	info      sdr.Info
	hs        *liveHeadings
	pos       *livePosition
	wr        *store.Writer
	rec       *sdr.RotatingSigMF

	// fail ends the watch with err (the first one given wins).
	failOnce sync.Once
	failErr  error
	stopScan context.CancelFunc

	samples   atomic.Int64
	inputDB   atomic.Uint64 // math.Float64bits of the last block's level
	lostAt    atomic.Int64  // when the receiver was lost (Unix ns); 0 while it delivers
	bursts    atomic.Int64
	bearings  atomic.Int64
	headingOK atomic.Bool
}

func newWatcher(o Options) (*watcher, error) {
	st := o.Station
	if st == nil || o.DB == nil {
		return nil, errors.New("watch: no station file or no database")
	}
	w := &watcher{o: o, st: st, now: o.Now}
	if w.now == nil {
		w.now = time.Now
	}
	if o.Log == nil {
		w.o.Log = io.Discard
	}
	if o.Status == nil {
		w.o.Status = io.Discard
	}
	bad := func(key, msg string) error { return fmt.Errorf("%s: %s: %s", st.Path, key, msg) }
	switch {
	case len(st.Channels) == 0:
		return nil, bad("[[channel]]", "no channel to listen on")
	case st.Heading.Source == station.HeadingLog:
		return nil, bad("heading.source", `watch needs a live heading ("rotator" or "compass"); a heading log is for recordings`)
	case st.Receiver.RTLTCP == "" && st.Receiver.USBIndex < 0 && o.Open == nil:
		return nil, bad("receiver.source", "no rtl_tcp address or USB stick")
	case o.DurationS < 0 || o.DurationS > capture.MaxDurationS || math.IsNaN(o.DurationS):
		return nil, fmt.Errorf("--duration %v s: want 0 (no limit) to %.0f s", o.DurationS, capture.MaxDurationS)
	}
	w.ref = heading.True
	if st.Heading.Reference == store.RefMagnetic {
		w.ref = heading.Magnetic
	}
	spec := bearing.DefaultAntenna
	spec.Kind = st.Antenna.Kind
	if st.Antenna.Kind == station.AntennaPattern {
		spec.Kind = st.Antenna.PatternFile
	}
	p, err := spec.Pattern()
	if err != nil {
		return nil, bad("antenna", err.Error())
	}
	w.pattern = p
	if w.pos, err = newLivePosition(st); err != nil {
		return nil, err
	}
	bo := survey.BearingOptions{MountOffsetDeg: st.Antenna.MountOffsetDeg, MountOffsetGiven: st.Antenna.MountOffsetDeg != 0}
	if w.mount, err = bo.MountOffset(p); err != nil {
		return nil, bad("antenna.mount_offset_deg", err.Error())
	}
	if w.ref == heading.Magnetic && !w.pos.moving {
		d := st.Position.DeclinationDeg
		if d == nil {
			v, werr := geo.Declination(st.Position.LatDeg, st.Position.LonDeg, ptrOr(st.Position.AltM, 0), w.now())
			if math.IsNaN(v) {
				return nil, bad("position", fmt.Sprintf("no declination for the magnetic headings: %v", werr))
			}
			d = &v
		}
		w.declDeg = d
	} else if w.ref == heading.Magnetic {
		w.declDeg = st.Position.DeclinationDeg // nil: WMM at each bearing's position
	}
	for i, ch := range st.Channels {
		l, err := newListener(w, i, ch)
		if err != nil {
			return nil, err
		}
		w.chans = append(w.chans, l)
	}
	return w, nil
}

func ptrOr(p *float64, v float64) float64 {
	if p == nil {
		return v
	}
	return *p
}

// logf writes one line to the log.
func (w *watcher) logf(format string, args ...any) {
	w.logMu.Lock()
	defer w.logMu.Unlock()
	fmt.Fprintf(w.o.Log, format+"\n", args...)
}

// config is the receiver's configuration from the station file.
func (w *watcher) config() sdr.RTLConfig {
	r := w.st.Receiver
	centre := r.CentreHz
	if centre == 0 { // one channel: station.Load asks several for receiver.centre
		centre = capture.TuningHz(w.chans[0].ch.FreqHz, r.SampleRateHz)
	}
	return sdr.RTLConfig{CenterHz: centre, SampleRate: r.SampleRateHz, GainDB: r.GainDB, AutoGain: r.AGC, PPM: r.PPM}
}

func (w *watcher) open(ctx context.Context, cfg sdr.RTLConfig) (sdr.Source, error) {
	if w.o.Open != nil {
		return w.o.Open(ctx, cfg)
	}
	if w.st.Receiver.RTLTCP != "" {
		// A server that vanishes mid-stream is redialled with backoff and
		// the gap logged; the watch carries on (sdr.ResilientRTLTCP inserts
		// no samples, so sample times after a gap run on from the last
		// delivered one, and the gap says how much receiver time it lost).
		return sdr.NewResilientRTLTCP(ctx, w.st.Receiver.RTLTCP, cfg, sdr.ResilientOptions{
			OnLost: func(error) { w.lostAt.Store(w.now().UnixNano()) },
			OnGap: func(g sdr.Gap) {
				if g.Kind == sdr.GapReconnect {
					w.lostAt.Store(0)
				}
				w.logf("warning: receiver %s: gap of %.1f s (about %d samples) before sample %d: %s; carrying on",
					w.st.Receiver.RTLTCP, g.Lost.Seconds(), g.Missing, g.Index, g.Cause)
				if w.rec != nil {
					if err := w.rec.AddGap(g); err != nil {
						w.logf("warning: --record %s: %v", w.o.RecordDir, err)
					}
				}
			},
		})
	}
	src, err := sdr.OpenUSB(w.st.Receiver.USBIndex, cfg)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", w.st.Receiver.Source, err)
	}
	return src, nil
}

func (w *watcher) run(ctx context.Context) (*Summary, error) {
	st := w.st
	stationRow := store.Station{Name: st.Name, AltM: st.Position.AltM,
		PositionSource: st.Position.Source, Antenna: st.Antenna.Kind, PatternFile: st.Antenna.PatternFile,
		MountOffsetDeg: w.mount, DeclinationDeg: st.Position.DeclinationDeg}
	if st.Position.HasLatLon { // a moving station's is only where it starts
		stationRow.LatDeg, stationRow.LonDeg = &st.Position.LatDeg, &st.Position.LonDeg
	}
	var err error
	if w.stationID, err = w.o.DB.PutStation(stationRow); err != nil {
		return nil, w.dbErr(err)
	}
	for _, warn := range st.Warnings {
		w.logf("warning: %s: %s", st.Path, warn) // AGC on, among others (station owns the wording)
	}

	sctx, cancel := context.WithCancel(ctx)
	defer cancel()
	w.stopScan = cancel
	cfg := w.config()
	src, err := w.open(sctx, cfg)
	if err != nil {
		return nil, err
	}
	defer src.Close()
	// A USB receiver stamps its start with the first read.
	first := make([]complex64, 16384)
	n, err := src.Read(first)
	if err != nil && n == 0 {
		return nil, fmt.Errorf("%s: %w", src.Info().Name, err)
	}
	w.info = src.Info()
	if w.info.Start.IsZero() {
		return nil, fmt.Errorf("%s gave no start time", w.info.Name)
	}
	if w.info.CenterHz == 0 {
		w.info.CenterHz = cfg.CenterHz
	}
	// One capture row per channel: the same stream (one key) with the
	// channel's offset, the store's natural key of a capture.
	key := sha256.Sum256([]byte(st.Name + "\x00" + w.info.Name + "\x00" + w.info.Start.UTC().Format(time.RFC3339Nano)))
	for _, l := range w.chans {
		capRow := store.Capture{Station: w.stationID, Source: w.info.Name, Format: "cu8", Start: w.info.Start, CentreHz: w.info.CenterHz,
			SampleRateHz: w.info.SampleRate, Samples: -1, FileSHA256: hex.EncodeToString(key[:]), ChannelOffsetHz: l.ch.FreqHz - w.info.CenterHz}
		if l.capture, err = w.o.DB.PutCapture(capRow); err != nil {
			return nil, w.dbErr(err)
		}
	}
	// Readings of a transmission a run that died was still hearing
	// become a burst cut at its end before this run adds its own.
	if n, err := w.o.DB.RecoverOpen(); err != nil {
		return nil, w.dbErr(err)
	} else if n > 0 {
		if n == 1 {
			w.logf("a transmission was still on the air when an earlier run stopped: stored as a burst cut at its end")
		} else {
			w.logf("%d transmissions were still on the air when an earlier run stopped: stored as bursts cut at their end", n)
		}
	}
	wo := w.o.Writer
	if wo.FlushInterval == 0 {
		wo.FlushInterval = DefaultFlushInterval
	}
	if w.wr, err = w.o.DB.NewWriter(wo); err != nil {
		return nil, err
	}
	if w.o.RecordDir != "" {
		if err := w.startRecording(); err != nil {
			w.wr.Close()
			return nil, err
		}
	}
	w.hs = newLiveHeadings(w.ref, w.mount, st.Heading.LagS)
	chs := make([]string, len(w.chans))
	for i, l := range w.chans {
		chs[i] = fmt.Sprintf("%s (ids %v)", l.name(), l.ch.IDs)
	}
	w.logf("watching %s from %s at %.3f MS/s for %s; headings from %s; position from %s; times UTC", strings.Join(chs, ", "), w.info.Name, w.info.SampleRate/1e6, st.Name, w.headingName(), w.pos.name(st))

	var bg sync.WaitGroup
	bgctx, stopBG := context.WithCancel(sctx)
	defer stopBG()
	bg.Add(4)
	go func() { defer bg.Done(); w.runHeadings(bgctx) }()
	go func() {
		defer bg.Done()
		if err := w.pos.run(bgctx); err != nil {
			w.logf("warning: %v: bearings are logged without the station's position", err)
		}
	}()
	go func() { defer bg.Done(); w.handOff(bgctx) }()
	go func() { defer bg.Done(); w.showStatus(bgctx) }()

	in := &meteredSource{Source: src, w: w, first: first[:n]}
	if w.o.DurationS > 0 {
		in.limit = int64(math.Ceil(w.o.DurationS * w.info.SampleRate))
	}
	serr := w.scan(sctx, in)
	stopBG()
	bg.Wait()
	if err := w.storeHeadings(w.hs.take()); err != nil && serr == nil {
		serr = err
	}
	if serr == nil || ctx.Err() != nil {
		// The scans ended as asked and wrote a burst still on the air as
		// cut at the end: open readings left are none of a burst's. After a
		// fault they stay, for the next watch's RecoverOpen.
		for _, l := range w.chans {
			if err := w.wr.DropOpenReadings(l.capture); err != nil && serr == nil {
				serr = err
			}
		}
	}
	cerr := w.wr.Close()
	if w.failErr != nil && cerr == nil {
		cerr = w.failErr
	}
	if w.rec != nil {
		if err := w.rec.Close(); err != nil && serr == nil {
			serr = fmt.Errorf("--record %s: %w", w.o.RecordDir, err)
		}
	}
	sum := &Summary{Capture: w.chans[0].capture, Samples: w.samples.Load(), Bursts: int(w.bursts.Load()), Bearings: int(w.bearings.Load()), Committed: w.wr.Stats()}
	for _, l := range w.chans {
		sum.Captures = append(sum.Captures, l.capture)
	}
	switch {
	case cerr != nil:
		return sum, w.dbErr(cerr)
	case serr != nil && ctx.Err() == nil:
		return sum, serr
	}
	w.logf("watch ended after %.1f s of samples: %d bursts, %d bearings, %d rows stored", float64(sum.Samples)/w.info.SampleRate, sum.Bursts, sum.Bearings, sum.Committed.Rows())
	return sum, nil
}

// scan runs every channel's scan on the stream: one channel reads it
// directly, several read it through a fanOut, each in its own goroutine.
// The first scan to fail stops the others; its error is the one returned.
func (w *watcher) scan(ctx context.Context, in sdr.Source) error {
	if len(w.chans) == 1 {
		l := w.chans[0]
		_, err := survey.Stream(ctx, in, l.options(), l.handler())
		return err
	}
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	f := newFanOut(in, len(w.chans))
	errs := make([]error, len(w.chans))
	var wg sync.WaitGroup
	var once sync.Once
	first := -1
	for i, l := range w.chans {
		wg.Add(1)
		go func() {
			defer wg.Done()
			_, errs[i] = survey.Stream(ctx, f.taps[i], l.options(), l.handler())
			if errs[i] != nil {
				once.Do(func() { first = i; cancel() })
			}
		}()
	}
	f.run(ctx)
	wg.Wait()
	if first < 0 {
		return nil
	}
	return errs[first]
}

// fail ends the watch with err.
func (w *watcher) fail(err error) {
	w.failOnce.Do(func() {
		w.failErr = err
		w.stopScan()
	})
}

func (w *watcher) headingName() string {
	h := w.st.Heading
	if h.Source == station.HeadingRotator {
		return fmt.Sprintf("the rotator at %s sweeping %.1f° ↔ %.1f°", h.Rotator, h.SweepFromDeg, h.SweepToDeg)
	}
	return "the compass at " + h.Compass
}

// meteredSource counts the samples, measures each block's level and ends
// the stream at limit samples (0: no limit).
type meteredSource struct {
	sdr.Source
	w     *watcher
	first []complex64
	limit int64
}

// Info is the stream as the watch knows it (the tuning filled in when the
// receiver does not say).
func (m *meteredSource) Info() sdr.Info { return m.w.info }

func (m *meteredSource) Read(dst []complex64) (int, error) {
	got := m.w.samples.Load()
	if m.limit > 0 {
		if got >= m.limit {
			return 0, io.EOF
		}
		if rest := m.limit - got; int64(len(dst)) > rest {
			dst = dst[:rest]
		}
	}
	var n int
	var err error
	if len(m.first) > 0 {
		n = copy(dst, m.first)
		m.first = m.first[n:]
	} else {
		n, err = m.Source.Read(dst)
	}
	if n > 0 {
		var p float64
		for _, v := range dst[:n] {
			p += float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
		}
		m.w.inputDB.Store(math.Float64bits(10 * math.Log10(max(p/float64(n), 1e-12))))
		m.w.samples.Add(int64(n))
		if m.w.rec != nil {
			if werr := m.w.rec.Write(dst[:n]); werr != nil {
				return n, fmt.Errorf("--record %s: %w", m.w.o.RecordDir, werr)
			}
		}
	}
	return n, err
}

// dbErr names the database in a store error that does not already.
func (w *watcher) dbErr(err error) error {
	if strings.Contains(err.Error(), w.o.DB.Path()) {
		return err
	}
	return fmt.Errorf("%s: %w", w.o.DB.Path(), err)
}
