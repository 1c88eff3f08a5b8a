package store

import (
	"database/sql"
	"fmt"
	"math"
	"strings"
	"time"
)

// A transmission that has not ended yet — a carrier that stays on for
// hours — keeps its level readings in open_readings (schema step 5) as
// they are handed over, instead of in the memory of the process that will
// write its burst: memory stays flat with transmission length, and a
// process killed in the middle of it loses only what it had not yet
// handed over (the watch hands readings over after every block the
// receiver reads) and the last uncommitted batch (about a second), as it
// does for everything else.
//
// The life of an open transmission's readings:
//   - AddOpenReadings queues them as they come, already thinned;
//   - AddBurstFromOpen writes the burst when it has ended, moves the open
//     readings inside it to level_readings and drops every open reading
//     of the capture up to a sample (the burst's end);
//   - DropOpenReadings drops what is left once the transmission's bursts
//     are all written (its pre-roll, the quiet that closed it);
//   - RecoverOpen, run before a new session, turns what a process that
//     died left in open_readings into one burst per capture, cut at its
//     end and unidentified.

// AddOpenReadings queues level readings of a transmission that is still
// on the air, measured against a noise of noiseDBFS (the receiver's noise
// under them). The caller thins them (ThinLevels on whole windows, so
// that thinning piece by piece gives the rows thinning the whole would);
// they are stored as they are. Readings already stored at the same sample
// are updated.
func (w *Writer) AddOpenReadings(capture CaptureID, noiseDBFS float64, readings []LevelReading) error {
	if len(readings) == 0 {
		return nil
	}
	rate, err := w.sampleRate(capture)
	if err != nil {
		return err
	}
	if !finite(noiseDBFS) {
		return fmt.Errorf("%w: open readings of capture %d: noise %v dBFS is not a number", ErrBadRow, capture, noiseDBFS)
	}
	if _, err := ThinLevels(readings, rate, rate); err != nil { // checks order and values only
		return fmt.Errorf("open readings of capture %d: %w", capture, err)
	}
	return w.add(&openItem{capture: capture, noise: noiseDBFS, readings: append([]LevelReading(nil), readings...)})
}

// AddBurstFromOpen queues a burst whose readings are the capture's open
// readings with from ≤ sample ≤ through (a caller that thins in windows
// passes the bounds of the windows wholly inside the burst, so that no
// reading averaged across its edges is kept; StartSample and EndSample
// for all of it), and then drops every open reading of the capture at or
// before releaseThrough (a sample index). Like AddBurst, writing a burst
// that is already stored replaces it and its readings.
func (w *Writer) AddBurstFromOpen(b Burst, from, through, releaseThrough int64) error {
	if err := b.Validate(); err != nil {
		return err
	}
	if _, err := w.sampleRate(b.Capture); err != nil {
		return err
	}
	return w.add(&fromOpenItem{b: b, from: from, through: through, release: releaseThrough})
}

// DropOpenReadings queues the deletion of every open reading of the
// capture: what is left of a transmission after its bursts were written
// (the pre-roll and the quiet that closed it) or of one that turned out to
// be no burst.
func (w *Writer) DropOpenReadings(capture CaptureID) error {
	if _, err := w.sampleRate(capture); err != nil {
		return err
	}
	return w.add(&dropOpenItem{capture: capture})
}

type dropOpenItem struct{ capture CaptureID }

func (it *dropOpenItem) rows() int { return 0 }

func (it *dropOpenItem) write(b *batchTx) error {
	return b.exec("DELETE FROM open_readings WHERE capture_id = ?", it.capture)
}

type openItem struct {
	capture  CaptureID
	noise    float64
	readings []LevelReading
}

func (it *openItem) rows() int { return len(it.readings) }

// openPerStmt is how many open readings one INSERT carries (6 parameters
// each).
const openPerStmt = 100

func (it *openItem) write(b *batchTx) error {
	for rest := it.readings; len(rest) > 0; {
		n := min(len(rest), openPerStmt)
		s, err := b.stmt(upsertOpen(n))
		if err != nil {
			return err
		}
		args := b.args[:0]
		for _, r := range rest[:n] {
			args = append(args, it.capture, r.Sample, r.TimeS, r.LevelDBFS, it.noise, r.Clipped)
		}
		b.args = args
		if _, err := s.Exec(args...); err != nil {
			return err
		}
		rest = rest[n:]
	}
	b.kinds[1] += int64(len(it.readings))
	return nil
}

// upsertOpen returns the statement inserting n open readings, cached.
func upsertOpen(n int) string {
	key := -n // beside upsertReadings' statements in the same cache
	readingSQL.Lock()
	defer readingSQL.Unlock()
	if q, ok := readingSQL.m[key]; ok {
		return q
	}
	q := "INSERT INTO open_readings (capture_id, sample, t_s, level_dbfs, noise_dbfs, clipped) VALUES " +
		strings.TrimSuffix(strings.Repeat("(?, ?, ?, ?, ?, ?), ", n), ", ")
	q += ` ON CONFLICT (capture_id, sample) DO UPDATE SET
	t_s = excluded.t_s, level_dbfs = excluded.level_dbfs, noise_dbfs = excluded.noise_dbfs, clipped = excluded.clipped`
	readingSQL.m[key] = q
	return q
}

type fromOpenItem struct {
	b                      Burst
	from, through, release int64
}

func (it *fromOpenItem) rows() int { return 1 }

const moveOpen = `
INSERT INTO level_readings (burst_id, sample, t_s, level_dbfs, clipped)
SELECT ?, sample, t_s, level_dbfs, clipped FROM open_readings
WHERE capture_id = ? AND sample BETWEEN ? AND ? ORDER BY sample
ON CONFLICT (burst_id, sample) DO UPDATE SET
	t_s = excluded.t_s, level_dbfs = excluded.level_dbfs, clipped = excluded.clipped`

// setReadingRate sets a burst's readings_per_s from its stored readings
// (readingRate's rule: 0 for fewer than two).
const setReadingRate = `
UPDATE bursts SET readings_per_s = coalesce((SELECT CASE WHEN count(*) > 1 AND max(t_s) > min(t_s)
	THEN (count(*) - 1) / (max(t_s) - min(t_s)) ELSE 0 END FROM level_readings WHERE burst_id = ?), 0)
WHERE id = ?`

func (it *fromOpenItem) write(b *batchTx) error {
	x := it.b
	id, err := b.upsertBurst(x)
	if err != nil {
		return err
	}
	if err := b.exec(moveOpen, id, x.Capture, it.from, it.through); err != nil {
		return err
	}
	if err := b.exec(setReadingRate, id, id); err != nil {
		return err
	}
	if err := b.exec("DELETE FROM open_readings WHERE capture_id = ? AND sample <= ?", x.Capture, it.release); err != nil {
		return err
	}
	b.kinds[0]++
	return nil
}

// RecoverOpen turns the open readings a process that died left behind
// into bursts: one per capture, from its first open reading to its last,
// cut at its end (the transmission was still on when the record stops),
// unidentified, at the capture's channel; level and noise are the mean
// linear power of the readings (dBFS), peak their highest. It returns how
// many bursts it wrote. A database without open readings is not changed.
func (db *DB) RecoverOpen() (int, error) {
	tx, err := db.sql.Begin()
	if err != nil {
		return 0, db.wrap("recover open readings", err)
	}
	defer tx.Rollback()
	rows, err := tx.Query(`SELECT o.capture_id, c.sample_rate_hz, c.start_unix_ns, c.channel_offset_hz, c.channel_hz,
	o.sample, o.t_s, o.level_dbfs, o.noise_dbfs, o.clipped
FROM open_readings o JOIN captures c ON c.id = o.capture_id ORDER BY o.capture_id, o.sample`)
	if err != nil {
		return 0, db.wrap("recover open readings", err)
	}
	type acc struct {
		b          Burst
		start      sql.NullInt64
		n          int
		pow, noise float64
	}
	var found []*acc
	for rows.Next() {
		var (
			c             CaptureID
			rate, off     float64
			start         sql.NullInt64
			ch            sql.NullFloat64
			sample        int64
			ts, lv, noise float64
			clipped       int
		)
		if err := rows.Scan(&c, &rate, &start, &off, &ch, &sample, &ts, &lv, &noise, &clipped); err != nil {
			rows.Close()
			return 0, db.wrap("recover open readings", err)
		}
		if len(found) == 0 || found[len(found)-1].b.Capture != c {
			found = append(found, &acc{b: Burst{Capture: c, StartSample: sample, StartS: ts, OffsetHz: off,
				FreqHz: ch.Float64, PeakDBFS: lv, CutAtEnd: true}, start: start})
		}
		a := found[len(found)-1]
		a.b.EndSample, a.b.EndS = sample, ts
		a.b.PeakDBFS = max(a.b.PeakDBFS, lv)
		a.pow += math.Pow(10, lv/10)
		a.noise += math.Pow(10, noise/10)
		a.n++
	}
	if err := rows.Err(); err != nil {
		return 0, db.wrap("recover open readings", err)
	}
	rows.Close()
	// The same burst upsert as a Writer's batch (an unidentified burst
	// needs no transmitter row, so no Writer is involved).
	b := &batchTx{tx: tx, stmts: map[string]*sql.Stmt{}, newTx: map[string]TransmitterID{}}
	for _, a := range found {
		x := &a.b
		x.LevelDBFS = 10 * math.Log10(a.pow/float64(a.n))
		x.NoiseDBFS = 10 * math.Log10(a.noise/float64(a.n))
		x.SNRDB = x.LevelDBFS - x.NoiseDBFS
		if a.start.Valid {
			t0 := time.Unix(0, a.start.Int64).UTC()
			x.Start = t0.Add(time.Duration(x.StartS * 1e9))
			x.End = t0.Add(time.Duration(x.EndS * 1e9))
		}
		if err := x.Validate(); err != nil {
			return 0, fmt.Errorf("recover the open readings of capture %d: %w", x.Capture, err)
		}
		id, err := b.upsertBurst(*x)
		if err != nil {
			return 0, db.wrap("recover open readings", err)
		}
		if err := b.exec(moveOpen, id, x.Capture, x.StartSample, x.EndSample); err != nil {
			return 0, db.wrap("recover open readings", err)
		}
		if err := b.exec(setReadingRate, id, id); err != nil {
			return 0, db.wrap("recover open readings", err)
		}
		if _, err := tx.Exec("DELETE FROM open_readings WHERE capture_id = ?", x.Capture); err != nil {
			return 0, db.wrap("recover open readings", err)
		}
	}
	if err := tx.Commit(); err != nil {
		return 0, db.wrap("recover open readings", err)
	}
	return len(found), nil
}
