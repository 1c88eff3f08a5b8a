package store

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"strings"
	"sync"
	"time"
)

// DefaultFlushInterval is the longest a row waits in a Writer before its
// batch is committed: a process killed at any moment loses at most the
// rows of about the last second.
const DefaultFlushInterval = time.Second

// DefaultBatchRows is the batch size at which a Writer commits without
// waiting for the interval: about 0.1 s of work at the store's insert
// rate, so a commit never holds the write lock long.
const DefaultBatchRows = 10000

// WriterOptions tune NewWriter; the zero value gives the defaults.
type WriterOptions struct {
	// FlushInterval is the longest a row waits before its batch commits
	// (the commit policy: at least once per interval while rows wait);
	// 0 means DefaultFlushInterval. Range 1 ms…1 s.
	FlushInterval time.Duration
	// BatchRows commits a batch as soon as it holds this many rows (a
	// burst counts one plus its stored readings); 0 means
	// DefaultBatchRows. Range 1…1 000 000. Adds wait while four batches'
	// worth of rows are pending, so memory stays bounded when the disk
	// is slower than the producer.
	BatchRows int
	// ReadingsPerS is the rate level readings are thinned to (ThinLevels);
	// 0 means DefaultReadingsPerS, a negative value keeps every reading.
	// Range up to 100 000.
	ReadingsPerS float64
	// OnCommit, when set, is called on the writer's goroutine after every
	// commit with the totals so far. It must not call the Writer.
	OnCommit func(CommitStats)
}

// Validate checks every field against its documented range.
func (o WriterOptions) Validate() error {
	switch {
	case o.FlushInterval < 0 || (o.FlushInterval > 0 && o.FlushInterval < time.Millisecond) || o.FlushInterval > time.Second:
		return fmt.Errorf("store: writer flush interval %v is outside 1 ms…1 s", o.FlushInterval)
	case o.BatchRows < 0 || o.BatchRows > 1_000_000:
		return fmt.Errorf("store: writer batch of %d rows is outside 1…1000000", o.BatchRows)
	case !finite(o.ReadingsPerS) || o.ReadingsPerS > 100_000:
		return fmt.Errorf("store: writer readings rate %v/s must be a number up to 100000", o.ReadingsPerS)
	}
	return nil
}

// CommitStats are a Writer's totals after a commit.
type CommitStats struct {
	// Batches committed so far and the rows of each kind they held.
	Batches                              int64
	Bursts, Readings, Headings, Bearings int64
	// LastRows and LastDuration describe the latest batch.
	LastRows     int
	LastDuration time.Duration
}

// Rows is the total of rows committed.
func (s CommitStats) Rows() int64 { return s.Bursts + s.Readings + s.Headings + s.Bearings }

// item is one queued write.
type item interface {
	rows() int
	write(b *batchTx) error
}

// Writer batches the high-volume rows — bursts with their level readings,
// headings, bearings — into transactions. Rows are committed in the order
// they were added, at least once per FlushInterval while any wait and as
// soon as BatchRows are pending. A burst and its readings always land in
// the same transaction.
//
// On the first failed commit (disk full, read-only database, …) the
// batch is rolled back, the Writer stops, and every later call returns an
// error wrapping ErrWriterStopped and the cause; what was committed before
// stays. A Writer is safe for concurrent use.
type Writer struct {
	db   *DB
	opts WriterOptions
	conn *sql.Conn

	mu        sync.Mutex
	cond      *sync.Cond
	pend      []item
	pendRows  int
	added     int64 // items ever added
	committed int64 // items committed
	err       error // sticky: why the writer stopped
	closing   bool
	stats     CommitStats
	rates     map[CaptureID]float64
	// bursts added on this writer, so that a bearing of a burst still in
	// the queue is accepted (a few thousand a day: kept for the writer's life)
	bursts map[burstKey]struct{}

	kick chan struct{}
	done chan struct{}

	// used by the writer goroutine only
	txCache map[string]TransmitterID
}

// NewWriter starts a Writer on its own connection.
func (db *DB) NewWriter(opts WriterOptions) (*Writer, error) {
	if err := opts.Validate(); err != nil {
		return nil, err
	}
	if db.opts.ReadOnly {
		return nil, fmt.Errorf("store: %s: %w: it was opened for reading only", db.path, ErrReadOnly)
	}
	if opts.FlushInterval == 0 {
		opts.FlushInterval = DefaultFlushInterval
	}
	if opts.BatchRows == 0 {
		opts.BatchRows = DefaultBatchRows
	}
	if opts.ReadingsPerS == 0 {
		opts.ReadingsPerS = DefaultReadingsPerS
	}
	conn, err := db.sql.Conn(context.Background())
	if err != nil {
		return nil, db.wrap("start writer", err)
	}
	w := &Writer{
		db: db, opts: opts, conn: conn,
		rates:   map[CaptureID]float64{},
		bursts:  map[burstKey]struct{}{},
		kick:    make(chan struct{}, 1),
		done:    make(chan struct{}),
		txCache: map[string]TransmitterID{},
	}
	w.cond = sync.NewCond(&w.mu)
	go w.loop()
	return w, nil
}

// AddBurst queues a burst with its level readings, thinned to
// WriterOptions.ReadingsPerS on the capture's sample clock. Writing a
// burst that is already stored (same capture and start sample) updates it
// and replaces its readings, so a re-run leaves one copy. The capture must
// exist (PutCapture).
func (w *Writer) AddBurst(b Burst, readings []LevelReading) error {
	if err := b.Validate(); err != nil {
		return err
	}
	rate, err := w.sampleRate(b.Capture)
	if err != nil {
		return err
	}
	lv := readings
	if w.opts.ReadingsPerS > 0 {
		if lv, err = ThinLevels(readings, rate, w.opts.ReadingsPerS); err != nil {
			return fmt.Errorf("burst at sample %d: %w", b.StartSample, err)
		}
	} else if _, err = ThinLevels(readings, rate, rate); err != nil { // checks only
		return fmt.Errorf("burst at sample %d: %w", b.StartSample, err)
	}
	b.ReadingsPerS = readingRate(lv)
	if lv != nil && len(lv) == len(readings) && &lv[0] == &readings[0] {
		lv = append([]LevelReading(nil), readings...) // the caller may reuse its slice
	}
	return w.add(&burstItem{b: b, readings: lv})
}

// burstKey is a burst's natural key.
type burstKey struct {
	capture CaptureID
	start   int64
}

// readingRate is the mean rate of a reading track, 0 for fewer than two.
func readingRate(lv []LevelReading) float64 {
	if len(lv) < 2 || !(lv[len(lv)-1].TimeS > lv[0].TimeS) {
		return 0
	}
	return float64(len(lv)-1) / (lv[len(lv)-1].TimeS - lv[0].TimeS)
}

// AddHeadings queues heading samples of a capture, all measured from the
// north named by ref (RefTrue or RefMagnetic). Samples already stored at
// the same capture time are updated.
func (w *Writer) AddHeadings(capture CaptureID, ref string, samples []HeadingSample) error {
	if ref != RefTrue && ref != RefMagnetic {
		return fmt.Errorf("%w: heading reference %q: want %q or %q", ErrBadRow, ref, RefTrue, RefMagnetic)
	}
	if capture <= 0 {
		return fmt.Errorf("%w: headings without a capture", ErrBadRow)
	}
	for i, s := range samples {
		if !finite(s.TimeS) || !(s.Deg >= 0 && s.Deg < 360) {
			return fmt.Errorf("%w: heading sample %d: time %v s, %v° (want a finite time and [0, 360))", ErrBadRow, i, s.TimeS, s.Deg)
		}
	}
	if len(samples) == 0 {
		return nil
	}
	return w.add(&headingItem{capture: capture, ref: ref, samples: append([]HeadingSample(nil), samples...)})
}

// AddBearing queues a bearing. Its burst must have been written before or
// be queued earlier on this Writer. A second bearing of the same burst and
// station replaces the first.
func (w *Writer) AddBearing(b Bearing) error {
	if err := b.Validate(); err != nil {
		return err
	}
	if err := w.knowBurst(burstKey{b.Capture, b.BurstStartSample}); err != nil {
		return err
	}
	b.Warnings = append([]string(nil), b.Warnings...)
	return w.add(&bearingItem{b: b})
}

// knowBurst checks that a bearing's burst is queued or stored, so that a
// bearing of a burst that was never written is refused at once instead
// of failing a whole batch later.
func (w *Writer) knowBurst(k burstKey) error {
	w.mu.Lock()
	_, ok := w.bursts[k]
	w.mu.Unlock()
	if ok {
		return nil
	}
	var id int64
	err := w.db.sql.QueryRow(findBurst, k.capture, k.start).Scan(&id)
	if errors.Is(err, sql.ErrNoRows) {
		return fmt.Errorf("%w: bearing of capture %d, burst at sample %d: the burst is not stored (add the burst first)", ErrBadRow, k.capture, k.start)
	}
	if err != nil {
		return w.db.wrap("look up a bearing's burst", err)
	}
	return nil
}

// sampleRate returns a capture's sample rate, cached.
func (w *Writer) sampleRate(c CaptureID) (float64, error) {
	w.mu.Lock()
	r, ok := w.rates[c]
	w.mu.Unlock()
	if ok {
		return r, nil
	}
	err := w.db.sql.QueryRow("SELECT sample_rate_hz FROM captures WHERE id = ?", c).Scan(&r)
	if errors.Is(err, sql.ErrNoRows) {
		return 0, fmt.Errorf("%w: capture %d is not in the database (write it with PutCapture first)", ErrBadRow, c)
	}
	if err != nil {
		return 0, w.db.wrap("read capture", err)
	}
	w.mu.Lock()
	w.rates[c] = r
	w.mu.Unlock()
	return r, nil
}

// add queues it, waiting while four batches are pending.
func (w *Writer) add(it item) error {
	w.mu.Lock()
	defer w.mu.Unlock()
	for w.err == nil && !w.closing && w.pendRows >= 4*w.opts.BatchRows {
		w.cond.Wait()
	}
	if err := w.stoppedErr(); err != nil {
		return err
	}
	switch bi := it.(type) {
	case *burstItem:
		w.bursts[burstKey{bi.b.Capture, bi.b.StartSample}] = struct{}{}
	case *fromOpenItem:
		w.bursts[burstKey{bi.b.Capture, bi.b.StartSample}] = struct{}{}
	}
	w.pend = append(w.pend, it)
	w.pendRows += it.rows()
	w.added++
	if w.pendRows >= w.opts.BatchRows {
		select {
		case w.kick <- struct{}{}:
		default:
		}
	}
	return nil
}

// stoppedErr is the error of a stopped writer; call with mu held.
func (w *Writer) stoppedErr() error {
	switch {
	case w.err != nil:
		return fmt.Errorf("%w: %w", ErrWriterStopped, w.err)
	case w.closing:
		return fmt.Errorf("%w: it was closed", ErrWriterStopped)
	}
	return nil
}

// Flush commits everything added so far and returns when it is committed
// (or the writer has stopped, returning why).
func (w *Writer) Flush() error {
	w.mu.Lock()
	defer w.mu.Unlock()
	target := w.added
	select {
	case w.kick <- struct{}{}:
	default:
	}
	for w.err == nil && w.committed < target {
		w.cond.Wait()
	}
	if w.err != nil {
		return fmt.Errorf("%w: %w", ErrWriterStopped, w.err)
	}
	return nil
}

// Stats returns the totals committed so far.
func (w *Writer) Stats() CommitStats {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.stats
}

// Close commits what is pending, stops the writer and releases its
// connection. It returns the error that stopped the writer, if any; a
// second Close returns nil.
func (w *Writer) Close() error {
	w.mu.Lock()
	if w.closing {
		w.mu.Unlock()
		<-w.done
		return nil
	}
	w.closing = true
	w.cond.Broadcast()
	w.mu.Unlock()
	select {
	case w.kick <- struct{}{}:
	default:
	}
	<-w.done
	cerr := w.conn.Close()
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.err != nil {
		return w.err
	}
	if cerr != nil {
		return w.db.wrap("close writer", cerr)
	}
	return nil
}

// loop commits batches until the writer closes or a commit fails.
func (w *Writer) loop() {
	defer close(w.done)
	tick := time.NewTicker(w.opts.FlushInterval)
	defer tick.Stop()
	var spare []item
	for {
		select {
		case <-tick.C:
		case <-w.kick:
		}
		for {
			w.mu.Lock()
			if len(w.pend) == 0 {
				closing := w.closing
				w.mu.Unlock()
				if closing {
					return
				}
				break
			}
			batch, rows := w.pend, w.pendRows
			w.pend, w.pendRows = spare[:0], 0
			w.cond.Broadcast() // room for waiting adders
			w.mu.Unlock()
			if !w.commitBatch(batch, rows) {
				return
			}
			clear(batch)
			spare = batch
			w.mu.Lock()
			again := w.closing || w.pendRows >= w.opts.BatchRows
			w.mu.Unlock()
			if !again {
				break
			}
		}
	}
}

// commitBatch commits one batch and updates the totals; false when the
// commit failed and the writer has stopped.
func (w *Writer) commitBatch(batch []item, rows int) bool {
	t0 := time.Now()
	kinds, err := w.commit(batch)
	w.mu.Lock()
	if err != nil {
		w.err = fmt.Errorf("%w; %d rows not stored (this batch and %d queued after it), everything committed before is kept", err, rows+w.pendRows, w.pendRows)
		w.pend, w.pendRows = nil, 0
		w.cond.Broadcast()
		w.mu.Unlock()
		return false
	}
	w.committed += int64(len(batch))
	w.stats.Batches++
	w.stats.Bursts += kinds[0]
	w.stats.Readings += kinds[1]
	w.stats.Headings += kinds[2]
	w.stats.Bearings += kinds[3]
	w.stats.LastRows = rows
	w.stats.LastDuration = time.Since(t0)
	st := w.stats
	w.cond.Broadcast()
	w.mu.Unlock()
	if w.opts.OnCommit != nil {
		w.opts.OnCommit(st)
	}
	return true
}

// batchTx is one batch's transaction with its statements.
type batchTx struct {
	tx    *sql.Tx
	stmts map[string]*sql.Stmt
	w     *Writer
	// transmitters created in this transaction (merged on commit)
	newTx map[string]TransmitterID
	kinds [4]int64 // bursts, readings, headings, bearings
	args  []any    // reused argument list
}

func (b *batchTx) stmt(q string) (*sql.Stmt, error) {
	if s, ok := b.stmts[q]; ok {
		return s, nil
	}
	s, err := b.tx.Prepare(q)
	if err != nil {
		return nil, err
	}
	b.stmts[q] = s
	return s, nil
}

func (b *batchTx) exec(q string, args ...any) error {
	s, err := b.stmt(q)
	if err != nil {
		return err
	}
	_, err = s.Exec(args...)
	return err
}

func (b *batchTx) queryRow(q string, args ...any) (*sql.Row, error) {
	s, err := b.stmt(q)
	if err != nil {
		return nil, err
	}
	return s.QueryRow(args...), nil
}

// transmitter returns ident's id, creating the row ("" → NULL).
func (b *batchTx) transmitter(ident string) (any, error) {
	if strings.TrimSpace(ident) == "" {
		return nil, nil
	}
	if id, ok := b.w.txCache[ident]; ok {
		return int64(id), nil
	}
	if id, ok := b.newTx[ident]; ok {
		return int64(id), nil
	}
	row, err := b.queryRow(upsertTransmitter, ident, nil, nil)
	if err != nil {
		return nil, err
	}
	var id TransmitterID
	if err := row.Scan(&id); err != nil {
		return nil, err
	}
	b.newTx[ident] = id
	return int64(id), nil
}

// commit writes one batch in one transaction.
func (w *Writer) commit(batch []item) ([4]int64, error) {
	ctx := context.Background()
	rows := 0
	for _, it := range batch {
		rows += it.rows()
	}
	what := fmt.Sprintf("commit a batch of %d rows", rows)
	tx, err := w.conn.BeginTx(ctx, nil)
	if err != nil {
		return [4]int64{}, w.db.wrap(what, err)
	}
	b := &batchTx{tx: tx, stmts: map[string]*sql.Stmt{}, w: w, newTx: map[string]TransmitterID{}}
	for _, it := range batch {
		if err := it.write(b); err != nil {
			tx.Rollback()
			return [4]int64{}, w.db.wrap(what, err)
		}
	}
	if err := tx.Commit(); err != nil {
		return [4]int64{}, w.db.wrap(what, err)
	}
	for k, v := range b.newTx {
		w.txCache[k] = v
	}
	return b.kinds, nil
}

type burstItem struct {
	b        Burst
	readings []LevelReading
}

func (it *burstItem) rows() int { return 1 + len(it.readings) }

const findBurst = `SELECT id FROM bursts WHERE capture_id = ? AND start_sample = ?`

const upsertBurst = `
INSERT INTO bursts (capture_id, start_sample, end_sample, start_s, end_s, start_unix_ns, end_unix_ns,
	offset_hz, freq_hz, level_dbfs, peak_dbfs, noise_dbfs, snr_db, clipped_fraction, cut_at_start, cut_at_end,
	double_carrier, carrier_spread_hz, mode, text, transmitter_id, ident_confidence, ident_method, tone_hz, wpm,
	readings_per_s)
VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
ON CONFLICT (capture_id, start_sample) DO UPDATE SET
	end_sample = excluded.end_sample, start_s = excluded.start_s, end_s = excluded.end_s,
	start_unix_ns = excluded.start_unix_ns, end_unix_ns = excluded.end_unix_ns, offset_hz = excluded.offset_hz,
	freq_hz = excluded.freq_hz, level_dbfs = excluded.level_dbfs, peak_dbfs = excluded.peak_dbfs,
	noise_dbfs = excluded.noise_dbfs, snr_db = excluded.snr_db, clipped_fraction = excluded.clipped_fraction,
	cut_at_start = excluded.cut_at_start, cut_at_end = excluded.cut_at_end,
	double_carrier = excluded.double_carrier, carrier_spread_hz = excluded.carrier_spread_hz,
	mode = excluded.mode, text = excluded.text, transmitter_id = excluded.transmitter_id,
	ident_confidence = excluded.ident_confidence, ident_method = excluded.ident_method,
	tone_hz = excluded.tone_hz, wpm = excluded.wpm, readings_per_s = excluded.readings_per_s
RETURNING id`

// readingsPerStmt is how many readings one INSERT carries (5 parameters
// each, far below SQLite's limit of 32766 host parameters).
const readingsPerStmt = 100

// upsertReadings returns the statement inserting n readings, cached.
func upsertReadings(n int) string {
	readingSQL.Lock()
	defer readingSQL.Unlock()
	if q, ok := readingSQL.m[n]; ok {
		return q
	}
	q := "INSERT INTO level_readings (burst_id, sample, t_s, level_dbfs, clipped) VALUES " +
		strings.TrimSuffix(strings.Repeat("(?, ?, ?, ?, ?), ", n), ", ") +
		` ON CONFLICT (burst_id, sample) DO UPDATE SET
	t_s = excluded.t_s, level_dbfs = excluded.level_dbfs, clipped = excluded.clipped`
	readingSQL.m[n] = q
	return q
}

var readingSQL = struct {
	sync.Mutex
	m map[int]string
}{m: map[int]string{}}

func (it *burstItem) write(b *batchTx) error {
	id, err := b.upsertBurst(it.b)
	if err != nil {
		return err
	}
	// Many rows per statement: one call into SQLite per chunk instead of
	// per reading is what takes the insert rate past 100 000 a second.
	var bid any = id
	for rest := it.readings; len(rest) > 0; {
		n := min(len(rest), readingsPerStmt)
		s, err := b.stmt(upsertReadings(n))
		if err != nil {
			return err
		}
		args := b.args[:0]
		for _, r := range rest[:n] {
			args = append(args, bid, r.Sample, r.TimeS, r.LevelDBFS, r.Clipped)
		}
		b.args = args
		if _, err := s.Exec(args...); err != nil {
			return err
		}
		rest = rest[n:]
	}
	b.kinds[0]++
	b.kinds[1] += int64(len(it.readings))
	return nil
}

// upsertBurst writes a burst's row by its natural key and returns its id.
// When the row existed its readings are deleted: a re-run replaces the
// burst's readings as a whole, so a different thinning rate cannot leave
// old readings beside the new ones.
func (b *batchTx) upsertBurst(x Burst) (int64, error) {
	row, err := b.queryRow(findBurst, x.Capture, x.StartSample)
	if err != nil {
		return 0, err
	}
	var old int64
	existed := true
	if err := row.Scan(&old); errors.Is(err, sql.ErrNoRows) {
		existed = false
	} else if err != nil {
		return 0, err
	}
	tid, err := b.transmitter(x.Ident)
	if err != nil {
		return 0, err
	}
	row, err = b.queryRow(upsertBurst, x.Capture, x.StartSample, x.EndSample, x.StartS, x.EndS,
		nsOrNil(x.Start), nsOrNil(x.End), x.OffsetHz, zeroNil(x.FreqHz), x.LevelDBFS, x.PeakDBFS, x.NoiseDBFS,
		x.SNRDB, x.ClippedFraction, b2i(x.CutAtStart), b2i(x.CutAtEnd), b2i(x.DoubleCarrier), x.CarrierSpreadHz,
		x.Mode, x.Text, tid, x.IdentConfidence, x.IdentMethod, x.ToneHz, x.WPM, x.ReadingsPerS)
	if err != nil {
		return 0, err
	}
	var id int64
	if err := row.Scan(&id); err != nil {
		return 0, err
	}
	if existed {
		if err := b.exec("DELETE FROM level_readings WHERE burst_id = ?", id); err != nil {
			return 0, err
		}
	}
	return id, nil
}

type headingItem struct {
	capture CaptureID
	ref     string
	samples []HeadingSample
}

func (it *headingItem) rows() int { return len(it.samples) }

const upsertHeading = `
INSERT INTO headings (capture_id, t_s, heading_deg, reference) VALUES (?, ?, ?, ?)
ON CONFLICT (capture_id, t_s) DO UPDATE SET heading_deg = excluded.heading_deg, reference = excluded.reference`

func (it *headingItem) write(b *batchTx) error {
	s, err := b.stmt(upsertHeading)
	if err != nil {
		return err
	}
	for _, h := range it.samples {
		if _, err := s.Exec(it.capture, h.TimeS, h.Deg, it.ref); err != nil {
			return err
		}
	}
	b.kinds[2] += int64(len(it.samples))
	return nil
}

type bearingItem struct{ b Bearing }

func (it *bearingItem) rows() int { return 1 }

const burstForBearing = `SELECT id, transmitter_id, start_unix_ns FROM bursts WHERE capture_id = ? AND start_sample = ?`

const upsertBearing = `
INSERT INTO bearings (burst_id, station_id, transmitter_id, time_unix_ns, bearing_true_deg, bearing_magnetic_deg,
	declination_deg, sigma_deg, alt_bearing_true_deg, flags, station_lat_deg, station_lon_deg, station_alt_m,
	null_depth_db, coverage_deg, residual_db, points, warnings)
VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
ON CONFLICT (burst_id, station_id) DO UPDATE SET
	transmitter_id = excluded.transmitter_id, time_unix_ns = excluded.time_unix_ns,
	bearing_true_deg = excluded.bearing_true_deg, bearing_magnetic_deg = excluded.bearing_magnetic_deg,
	declination_deg = excluded.declination_deg, sigma_deg = excluded.sigma_deg,
	alt_bearing_true_deg = excluded.alt_bearing_true_deg, flags = excluded.flags,
	station_lat_deg = excluded.station_lat_deg, station_lon_deg = excluded.station_lon_deg,
	station_alt_m = excluded.station_alt_m, null_depth_db = excluded.null_depth_db,
	coverage_deg = excluded.coverage_deg, residual_db = excluded.residual_db, points = excluded.points,
	warnings = excluded.warnings`

// warningSep joins a bearing's warnings in one column.
const warningSep = "\n"

func (it *bearingItem) write(b *batchTx) error {
	x := it.b
	row, err := b.queryRow(burstForBearing, x.Capture, x.BurstStartSample)
	if err != nil {
		return err
	}
	var burst int64
	var tid, startNS sql.NullInt64
	if err := row.Scan(&burst, &tid, &startNS); errors.Is(err, sql.ErrNoRows) {
		return fmt.Errorf("%w: bearing of capture %d burst at sample %d: the burst is not stored (add it before its bearing)", ErrBadRow, x.Capture, x.BurstStartSample)
	} else if err != nil {
		return err
	}
	var txArg any
	if tid.Valid {
		txArg = tid.Int64
	}
	if x.Ident != "" {
		if txArg, err = b.transmitter(x.Ident); err != nil {
			return err
		}
	}
	when := nsOrNil(x.Time)
	if when == nil && startNS.Valid {
		when = startNS.Int64
	}
	var lat, lon, alt any = x.StationLatDeg, x.StationLonDeg, fOrNil(x.StationAltM)
	if x.NoPosition {
		lat, lon, alt = nil, nil, nil
	}
	if err := b.exec(upsertBearing, burst, x.Station, txArg, when, x.TrueDeg, fOrNil(x.MagneticDeg),
		fOrNil(x.DeclinationDeg), x.SigmaDeg, fOrNil(x.AltTrueDeg), x.Flags, lat, lon, alt, x.NullDepthDB, x.CoverageDeg, x.ResidualDB, x.Points,
		strings.Join(x.Warnings, warningSep)); err != nil {
		return err
	}
	b.kinds[3]++
	return nil
}
