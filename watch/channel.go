package watch

import (
	"fmt"
	"math"
	"strings"
	"sync/atomic"
	"time"

	"nullseek/bearing"
	"nullseek/geo"
	"nullseek/heading"
	"nullseek/ident"
	"nullseek/ident/idmatch"
	"nullseek/ident/morse"
	"nullseek/logbook"
	"nullseek/receiver"
	"nullseek/station"
	"nullseek/store"
	"nullseek/survey"
)

// listener is one channel of the station file: its own scan (channel
// filter, burst detector, identification and bearing fit, run by
// survey.Stream on the shared stream), its expected identifiers, its own
// capture row (the stream's, with the channel's offset: the store keys a
// capture by stream and channel) and its own slot schedule. The heading
// source, rotator, position and store Writer are the watcher's, shared by
// every channel.
type listener struct {
	w   *watcher
	ch  station.Channel
	idf *ident.Identifier
	// capture is the channel's capture row.
	capture store.CaptureID
	// view is the headings the current piece's readings are joined with.
	view heading.Track

	// The channel's scan goroutine only.
	readings []store.LevelReading // thinned, not yet handed to the store
	raw      []store.LevelReading // not yet thinned (an incomplete window)
	lastT    float64
	noise    float64         // the noise readings carry, dBFS (receiver.ChannelState.NoiseDB)
	held     bool            // readings came since the open readings were last dropped
	obs      []survey.Record // the latest bursts, for the schedule

	open      atomic.Bool                // a burst is open (receiver.ChannelState.Open)
	channelDB atomic.Uint64              // the newest reading while the carrier is up, dBFS; NaN otherwise
	snrDB     atomic.Uint64              // its SNR (receiver.ChannelState.SNRDB)
	lastBurst atomic.Pointer[[2]float64] // the last burst's level and SNR, dB
	bursts    atomic.Int64
	bearings  atomic.Int64
}

func newListener(w *watcher, n int, ch station.Channel) (*listener, error) {
	key := fmt.Sprintf("channel[%d]", n+1)
	mode, err := morse.ParseMode(ch.Mode)
	if err != nil {
		return nil, fmt.Errorf("%s: %s.mode: %v", w.st.Path, key, err)
	}
	idOpts := ident.DefaultOptions()
	idOpts.Mode, idOpts.IDs = mode, ch.IDs
	l := &listener{w: w, ch: ch, lastT: math.Inf(-1), noise: math.NaN()}
	if l.idf, err = ident.New(idOpts); err != nil {
		return nil, fmt.Errorf("%s: %s.ids: %v", w.st.Path, key, err)
	}
	l.channelDB.Store(math.Float64bits(math.NaN()))
	return l, nil
}

// name is how lines name the channel.
func (l *listener) name() string { return fmt.Sprintf("%.4f MHz", l.ch.FreqHz/1e6) }

// options is the channel's scan.
func (l *listener) options() survey.Options {
	w := l.w
	o := survey.Options{Receiver: w.o.Receiver, Ident: l.idf.Options(),
		Bearing: &survey.BearingPlan{Pattern: w.pattern, Fit: bearing.DefaultFit, Headings: l.view.At}}
	o.Receiver.FreqHz = l.ch.FreqHz
	o.Receiver.OffsetHz = 0
	return o
}

// handler is what the channel's survey.Stream hands its findings to.
func (l *listener) handler() survey.StreamHandler {
	return survey.StreamHandler{Piece: l.piece, Record: l.record, Reading: l.reading, Channel: l.channel}
}

// piece gives the bearing fit the latest headings.
func (l *listener) piece(*receiver.Piece) error {
	l.w.hs.refresh(&l.view)
	return nil
}

// reading keeps one reading of an open burst (receiver.Handler.Reading):
// every reading the detector keeps goes to the store within about a
// second (channel), so a run that dies in a transmission that lasts hours
// loses no more of its level track than that.
func (l *listener) reading(lv receiver.LevelSample) error {
	if lv.T <= l.lastT {
		return nil // a reading that ended one group and opens the next
	}
	l.lastT, l.held = lv.T, true
	l.raw = append(l.raw, store.LevelReading{Sample: lv.Sample, TimeS: lv.T, LevelDBFS: lv.LevelDB, Clipped: lv.Clipped})
	return nil
}

// channel follows the detector after every block: the status line's
// state (a burst is shown while it is on, not only when a piece of it
// arrives), and the open burst's readings, thinned and handed to the
// store; once the detector holds no burst, whatever of the last one was
// not inside a burst (its pre-roll, the quiet that closed it, or all of a
// group that made no burst) is dropped.
func (l *listener) channel(st receiver.ChannelState) error {
	lv, snr := math.NaN(), math.NaN()
	if st.Carrier {
		lv, snr = st.LevelDB, st.SNRDB
	}
	l.open.Store(st.Open)
	l.channelDB.Store(math.Float64bits(lv))
	l.snrDB.Store(math.Float64bits(snr))
	if !math.IsNaN(st.NoiseDB) {
		l.noise = st.NoiseDB
	}
	if st.Open {
		l.thin(false)
		return l.flushOpen()
	}
	if l.held {
		l.held = false
		l.raw, l.readings = l.raw[:0], l.readings[:0]
		if err := l.w.wr.DropOpenReadings(l.capture); err != nil {
			return l.w.dbErr(err)
		}
	}
	return nil
}

// flushOpen hands the thinned readings to the store as open readings
// (store.Writer.AddOpenReadings): a transmission that lasts hours is not
// held in memory, and a run that dies loses the readings of the last
// block and what the store had not committed (about a second).
func (l *listener) flushOpen() error {
	if len(l.readings) == 0 {
		return nil
	}
	noise := l.noise
	if math.IsNaN(noise) || math.IsInf(noise, 0) {
		noise = logbook.NoCarrierSNRDB
	}
	if err := l.w.wr.AddOpenReadings(l.capture, noise, l.readings); err != nil {
		return l.w.dbErr(err)
	}
	l.readings = l.readings[:0]
	return nil
}

// thin moves the raw readings of complete thinning windows (all of them
// when final) into the burst's stored readings (store.ThinLevels: windows
// aligned on sample 0, so thinning piece by piece gives the rows thinning
// the whole would).
func (l *listener) thin(final bool) {
	if len(l.raw) == 0 {
		return
	}
	win := store.ThinWindow(l.w.info.SampleRate, store.DefaultReadingsPerS)
	cut := len(l.raw)
	if !final && win > 1 {
		edge := l.raw[len(l.raw)-1].Sample / win * win
		for cut > 0 && l.raw[cut-1].Sample >= edge {
			cut--
		}
	}
	if th, err := store.ThinLevels(l.raw[:cut], l.w.info.SampleRate, store.DefaultReadingsPerS); err == nil {
		l.readings = append(l.readings, th...)
	}
	l.raw = append(l.raw[:0], l.raw[cut:]...)
}

// record stores one burst (and its bearing) under the channel's capture,
// prints its line and refits the channel's slot schedule.
func (l *listener) record(r survey.Record) error {
	w := l.w
	b := logbook.BurstRow(l.capture, r, w.info.SampleRate)
	// The burst's readings are in the store's open readings: those of the
	// thinning windows wholly inside it move under it (a window across an
	// edge averages the carrier with the noise beside it).
	l.thin(true)
	if err := l.flushOpen(); err != nil {
		return err
	}
	from, through := store.WholeWindows(b.StartSample, b.EndSample, w.info.SampleRate, store.DefaultReadingsPerS)
	if err := w.wr.AddBurstFromOpen(b, from, through, b.EndSample); err != nil {
		return w.dbErr(err)
	}
	l.bursts.Add(1)
	w.bursts.Add(1)
	l.lastBurst.Store(&[2]float64{r.LevelDB, b.SNRDB})
	line := fmt.Sprintf("burst %s  %s  %7.1f s  %-10s %-5s level %6.1f dBFS  SNR %5.1f dB", survey.StartTime(r.Start, r.StartS), l.name(), r.EndS-r.StartS, identText(r), r.Mode, r.LevelDB, b.SNRDB)
	if br, why := l.bearingRow(r, b); why != "" {
		line += "  no bearing: " + why
	} else {
		if err := w.wr.AddBearing(br); err != nil {
			return w.dbErr(err)
		}
		l.bearings.Add(1)
		w.bearings.Add(1)
		line += fmt.Sprintf("  bearing %5.1f° ± %.1f° true", br.TrueDeg, br.SigmaDeg)
		if br.AltTrueDeg != nil {
			line += fmt.Sprintf(" (or %.1f°)", *br.AltTrueDeg)
		}
		if fs := r.Fit.Est.Flags; len(fs) > 0 {
			line += ", flags: " + strings.Join(bearing.FlagNames(fs), ", ")
		}
	}
	w.logf("%s", line)
	return l.schedule(r)
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
func (l *listener) bearingRow(r survey.Record, b store.Burst) (store.Bearing, string) {
	w := l.w
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
