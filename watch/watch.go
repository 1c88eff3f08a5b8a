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
	"nullseek/ident"
	"nullseek/ident/idmatch"
	"nullseek/ident/morse"
	"nullseek/logbook"
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

// maxBurstReadings bounds the level readings kept for one burst (an hour
// at store.DefaultReadingsPerS); a transmission longer than that keeps its
// first hour of readings and says so.
const maxBurstReadings = 3600 * int(store.DefaultReadingsPerS)

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
	Capture  store.CaptureID
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
	ch      station.Channel
	ref     heading.Ref
	pattern bearing.Pattern
	mount   float64
	declDeg *float64 // for a magnetic heading source
	now     func() time.Time
	logMu   sync.Mutex

	stationID store.StationID
	capture   store.CaptureID
	info      sdr.Info
	hs        *liveHeadings
	pos       *livePosition
	wr        *store.Writer
	rec       *sdr.RotatingSigMF
	idf       *ident.Identifier

	// The scan's goroutine only.
	cur      int // the burst whose readings are gathered
	readings []store.LevelReading
	raw      []store.LevelReading
	lastT    float64
	cutShort bool
	obs      []survey.Record // the latest bursts, for the schedule

	// fail ends the watch with err (the first one given wins).
	failOnce sync.Once
	failErr  error
	stopScan context.CancelFunc

	samples   atomic.Int64
	inputDB   atomic.Uint64              // math.Float64bits of the last block's level
	channelDB atomic.Uint64              // the last channel reading in a burst; NaN between
	noiseDB   atomic.Uint64              // the noise under it (receiver.Piece.NoiseDB)
	lastBurst atomic.Pointer[[2]float64] // the last burst's level and SNR, dB
	bursts    atomic.Int64
	bearings  atomic.Int64
	headingOK atomic.Bool
}

func newWatcher(o Options) (*watcher, error) {
	st := o.Station
	if st == nil || o.DB == nil {
		return nil, errors.New("watch: no station file or no database")
	}
	w := &watcher{o: o, st: st, now: o.Now, cur: -1}
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
	case len(st.Channels) != 1:
		return nil, bad("[[channel]]", fmt.Sprintf("watch listens on one channel; the file names %d", len(st.Channels)))
	case st.Heading.Source == station.HeadingLog:
		return nil, bad("heading.source", `watch needs a live heading ("rotator" or "compass"); a heading log is for recordings`)
	case st.Receiver.RTLTCP == "" && st.Receiver.USBIndex < 0 && o.Open == nil:
		return nil, bad("receiver.source", "no rtl_tcp address or USB stick")
	case o.DurationS < 0 || o.DurationS > capture.MaxDurationS || math.IsNaN(o.DurationS):
		return nil, fmt.Errorf("--duration %v s: want 0 (no limit) to %.0f s", o.DurationS, capture.MaxDurationS)
	}
	w.ch = st.Channels[0]
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
	mode, err := morse.ParseMode(w.ch.Mode)
	if err != nil {
		return nil, bad("channel.mode", err.Error())
	}
	idOpts := ident.DefaultOptions()
	idOpts.Mode, idOpts.IDs = mode, w.ch.IDs
	if w.idf, err = ident.New(idOpts); err != nil {
		return nil, bad("channel.ids", err.Error())
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
	if centre == 0 {
		centre = capture.TuningHz(w.ch.FreqHz, r.SampleRateHz)
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
			OnGap: func(g sdr.Gap) {
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
	key := sha256.Sum256([]byte(st.Name + "\x00" + w.info.Name + "\x00" + w.info.Start.UTC().Format(time.RFC3339Nano)))
	capRow := store.Capture{Station: w.stationID, Source: w.info.Name, Format: "cu8", Start: w.info.Start, CentreHz: w.info.CenterHz,
		SampleRateHz: w.info.SampleRate, Samples: -1, FileSHA256: hex.EncodeToString(key[:]), ChannelOffsetHz: w.ch.FreqHz - w.info.CenterHz}
	if w.capture, err = w.o.DB.PutCapture(capRow); err != nil {
		return nil, w.dbErr(err)
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
	w.channelDB.Store(math.Float64bits(math.NaN()))
	w.logf("watching %.4f MHz from %s at %.3f MS/s for %s (ids %v); headings from %s; position from %s", w.ch.FreqHz/1e6, w.info.Name, w.info.SampleRate/1e6, st.Name, w.ch.IDs, w.headingName(), w.pos.name(st))

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
	sopts := survey.Options{Receiver: w.o.Receiver, Ident: w.idf.Options(),
		Bearing: &survey.BearingPlan{Pattern: w.pattern, Fit: bearing.DefaultFit, Headings: w.hs.at}}
	sopts.Receiver.FreqHz = w.ch.FreqHz
	sopts.Receiver.OffsetHz = 0
	_, serr := survey.Stream(sctx, in, sopts, survey.StreamHandler{Piece: w.piece, Record: w.record})
	stopBG()
	bg.Wait()
	if err := w.wr.AddHeadings(w.capture, w.ref.String(), w.hs.take()); err != nil && serr == nil {
		serr = err
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
	sum := &Summary{Capture: w.capture, Samples: w.samples.Load(), Bursts: int(w.bursts.Load()), Bearings: int(w.bearings.Load()), Committed: w.wr.Stats()}
	switch {
	case cerr != nil:
		return sum, w.dbErr(cerr)
	case serr != nil && ctx.Err() == nil:
		return sum, serr
	}
	w.logf("watch ended after %.1f s of samples: %d bursts, %d bearings, %d rows stored", float64(sum.Samples)/w.info.SampleRate, sum.Bursts, sum.Bearings, sum.Committed.Rows())
	return sum, nil
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

// piece gathers the burst's readings (every piece's new ones, thinned as
// they come) and gives the bearing fit the latest headings.
func (w *watcher) piece(p *receiver.Piece) error {
	w.hs.refresh()
	if p.Burst != w.cur {
		w.cur, w.readings, w.raw, w.lastT, w.cutShort = p.Burst, w.readings[:0], w.raw[:0], math.Inf(-1), false
	}
	_, _, level := p.Between(p.OnS, p.OffS)
	for _, l := range level {
		if l.T <= w.lastT {
			continue // the overlap with the previous piece
		}
		w.lastT = l.T
		w.raw = append(w.raw, store.LevelReading{Sample: l.Sample, TimeS: l.T, LevelDBFS: l.LevelDB, Clipped: l.Clipped})
	}
	if n := len(level); n > 0 {
		w.noiseDB.Store(math.Float64bits(p.NoiseDB))
		w.channelDB.Store(math.Float64bits(level[n-1].LevelDB))
	}
	if !p.Last {
		w.thin(false)
	}
	return nil
}

// thin moves the raw readings of complete thinning windows (all of them
// when final) into the burst's stored readings (store.ThinLevels: windows
// aligned on sample 0, so thinning piece by piece gives the rows thinning
// the whole would).
func (w *watcher) thin(final bool) {
	if len(w.raw) == 0 {
		return
	}
	win := int64(math.Round(w.info.SampleRate / store.DefaultReadingsPerS))
	cut := len(w.raw)
	if !final && win > 1 {
		edge := w.raw[len(w.raw)-1].Sample / win * win
		for cut > 0 && w.raw[cut-1].Sample >= edge {
			cut--
		}
	}
	th, err := store.ThinLevels(w.raw[:cut], w.info.SampleRate, store.DefaultReadingsPerS)
	if err == nil {
		room := maxBurstReadings - len(w.readings)
		if len(th) > room {
			th, w.cutShort = th[:max(room, 0)], true
		}
		w.readings = append(w.readings, th...)
	}
	w.raw = append(w.raw[:0], w.raw[cut:]...)
}

// record stores one burst (and its bearing), prints its line and refits
// the slot schedule.
func (w *watcher) record(r survey.Record) error {
	w.channelDB.Store(math.Float64bits(math.NaN()))
	var readings []store.LevelReading
	if r.Index == w.cur {
		w.thin(true)
		for _, l := range w.readings {
			if l.TimeS >= r.StartS && l.TimeS <= r.EndS {
				readings = append(readings, l)
			}
		}
	} else {
		for _, l := range r.Level {
			readings = append(readings, store.LevelReading{Sample: l.Sample, TimeS: l.T, LevelDBFS: l.LevelDB, Clipped: l.Clipped})
		}
	}
	b := logbook.BurstRow(w.capture, r, w.info.SampleRate)
	if err := w.wr.AddBurst(b, readings); err != nil {
		return w.dbErr(err)
	}
	w.bursts.Add(1)
	w.lastBurst.Store(&[2]float64{r.LevelDB, b.SNRDB})
	line := fmt.Sprintf("burst %s  %7.1f s  %-10s %-5s level %6.1f dBFS  SNR %5.1f dB", survey.StartTime(r.Start, r.StartS), r.EndS-r.StartS, identText(r), r.Mode, r.LevelDB, b.SNRDB)
	if w.cutShort && r.Index == w.cur {
		line += fmt.Sprintf("  (readings after the first %d kept out)", maxBurstReadings)
	}
	if br, why := w.bearingRow(r, b); why != "" {
		line += "  no bearing: " + why
	} else {
		if err := w.wr.AddBearing(br); err != nil {
			return w.dbErr(err)
		}
		w.bearings.Add(1)
		line += fmt.Sprintf("  bearing %5.1f° ± %.1f° true", br.TrueDeg, br.SigmaDeg)
		if br.AltTrueDeg != nil {
			line += fmt.Sprintf(" (or %.1f°)", *br.AltTrueDeg)
		}
	}
	w.logf("%s", line)
	if r.Part == 0 || r.Part == r.Parts {
		w.cur = -1
	}
	return w.schedule(r)
}

// identText is the burst's identifier for its line.
func identText(r survey.Record) string {
	if idmatch.Known(r.Ident) {
		return fmt.Sprintf("%s %.2f", r.Ident, r.IdentConfidence)
	}
	if r.Text != "" {
		return fmt.Sprintf("? %q", r.Text)
	}
	return "?"
}

// bearingRow maps the burst's fit to the store's bearing row, or says why
// there is none (logbook.BearingRow).
func (w *watcher) bearingRow(r survey.Record, b store.Burst) (store.Bearing, string) {
	if r.Fit == nil {
		return store.Bearing{}, "not fitted"
	}
	// The line of position is fitted over the whole burst: a moving
	// station took it, to first order, where it was at the burst's middle.
	mid := b.Start.Add(time.Duration((b.EndS - b.StartS) / 2 * float64(time.Second)))
	fix, placed := w.place(mid)
	at := logbook.Fitted{Station: w.stationID, DeclinationDeg: w.declDeg, NoPosition: !placed}
	if placed {
		at.StationLatDeg, at.StationLonDeg, at.StationAltM = fix.LatDeg, fix.LonDeg, fix.AltHAEM
	}
	if w.ref == heading.Magnetic && at.DeclinationDeg == nil {
		if !placed {
			return store.Bearing{}, "no position for the magnetic declination"
		}
		v, _ := geo.Declination(fix.LatDeg, fix.LonDeg, ptrOr(fix.AltHAEM, 0), mid)
		if math.IsNaN(v) {
			return store.Bearing{}, "no magnetic declination at the station's position"
		}
		at.DeclinationDeg = &v
	}
	return logbook.BearingRow(r.Fit.Est, r.Fit.Err, b, at)
}

// dbErr names the database in a store error that does not already.
func (w *watcher) dbErr(err error) error {
	if strings.Contains(err.Error(), w.o.DB.Path()) {
		return err
	}
	return fmt.Errorf("%s: %w", w.o.DB.Path(), err)
}
