package store

import (
	"context"
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"fmt"
	"io"
	"os"
	"time"
)

// HashFile returns the lowercase hex SHA-256 (FIPS 180-4) of the file at
// path: the capture key of a recording (hash the IQ data file, not its
// metadata, so that editing a SigMF description keeps the key).
func HashFile(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", fmt.Errorf("store: hash %w", err)
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", fmt.Errorf("store: hash %s: %w", path, err)
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// nsOrNil stores a UTC time as nanoseconds since the epoch, NULL for zero.
func nsOrNil(t time.Time) any {
	if t.IsZero() {
		return nil
	}
	return t.UnixNano()
}

// timeOf reads a *_unix_ns column back.
func timeOf(n sql.NullInt64) time.Time {
	if !n.Valid {
		return time.Time{}
	}
	return time.Unix(0, n.Int64).UTC()
}

// fOrNil stores a nullable float.
func fOrNil(p *float64) any {
	if p == nil {
		return nil
	}
	return *p
}

// zeroNil stores 0 ("unknown" in sdr.Info and receiver.Burst) as NULL.
func zeroNil(x float64) any {
	if x == 0 {
		return nil
	}
	return x
}

// ptrOf reads a nullable REAL column back.
func ptrOf(n sql.NullFloat64) *float64 {
	if !n.Valid {
		return nil
	}
	v := n.Float64
	return &v
}

func idOrNil[T ~int64](id T) any {
	if id <= 0 {
		return nil
	}
	return int64(id)
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

// inTx runs fn in one write transaction (BEGIN IMMEDIATE).
func (db *DB) inTx(what string, fn func(tx *sql.Tx) error) error {
	ctx := context.Background()
	tx, err := db.sql.BeginTx(ctx, nil)
	if err != nil {
		return db.wrap(what, err)
	}
	if err := fn(tx); err != nil {
		tx.Rollback()
		return db.wrap(what, err)
	}
	if err := tx.Commit(); err != nil {
		return db.wrap(what, err)
	}
	return nil
}

const upsertStation = `
INSERT INTO stations (name, lat_deg, lon_deg, alt_m, position_source, antenna, pattern_file, mount_offset_deg, declination_deg)
VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)
ON CONFLICT (name) DO UPDATE SET
	lat_deg = excluded.lat_deg, lon_deg = excluded.lon_deg, alt_m = excluded.alt_m,
	position_source = excluded.position_source, antenna = excluded.antenna,
	pattern_file = excluded.pattern_file, mount_offset_deg = excluded.mount_offset_deg,
	declination_deg = excluded.declination_deg
RETURNING id`

// PutStation writes the station (by name: a second call with the same name
// updates it) and returns its id.
func (db *DB) PutStation(s Station) (StationID, error) {
	if err := s.Validate(); err != nil {
		return 0, err
	}
	var id StationID
	err := db.inTx("write station "+s.Name, func(tx *sql.Tx) error {
		return tx.QueryRow(upsertStation, s.Name, fOrNil(s.LatDeg), fOrNil(s.LonDeg), fOrNil(s.AltM),
			s.PositionSource, s.Antenna, s.PatternFile, s.MountOffsetDeg, fOrNil(s.DeclinationDeg)).Scan(&id)
	})
	return id, err
}

const upsertCapture = `
INSERT INTO captures (station_id, source, format, start_unix_ns, centre_hz, sample_rate_hz, samples, file_sha256, channel_offset_hz, channel_hz)
VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
ON CONFLICT (file_sha256, channel_offset_hz) DO UPDATE SET
	station_id = coalesce(excluded.station_id, station_id), source = excluded.source,
	format = excluded.format, start_unix_ns = excluded.start_unix_ns, centre_hz = excluded.centre_hz,
	sample_rate_hz = excluded.sample_rate_hz, samples = excluded.samples, channel_hz = excluded.channel_hz
RETURNING id`

// PutCapture writes the capture (by file hash and channel offset) and
// returns its id.
func (db *DB) PutCapture(c Capture) (CaptureID, error) {
	if err := c.Validate(); err != nil {
		return 0, err
	}
	var samples any = c.Samples
	if c.Samples < 0 {
		samples = nil
	}
	var id CaptureID
	err := db.inTx("write capture "+c.Source, func(tx *sql.Tx) error {
		return tx.QueryRow(upsertCapture, idOrNil(c.Station), c.Source, c.Format, nsOrNil(c.Start),
			zeroNil(c.CentreHz), c.SampleRateHz, samples, c.FileSHA256, c.ChannelOffsetHz, zeroNil(c.ChannelHz())).Scan(&id)
	})
	return id, err
}

const upsertTransmitter = `
INSERT INTO transmitters (ident, offset_hz, tone_hz) VALUES (?, ?, ?)
ON CONFLICT (ident) DO UPDATE SET
	offset_hz = coalesce(excluded.offset_hz, offset_hz), tone_hz = coalesce(excluded.tone_hz, tone_hz)
RETURNING id`

// PutTransmitter writes the transmitter (by identifier; a nil fingerprint
// field keeps the stored value) and returns its id.
func (db *DB) PutTransmitter(t Transmitter) (TransmitterID, error) {
	if err := t.Validate(); err != nil {
		return 0, err
	}
	var id TransmitterID
	err := db.inTx("write transmitter "+t.Ident, func(tx *sql.Tx) error {
		return tx.QueryRow(upsertTransmitter, t.Ident, fOrNil(t.OffsetHz), fOrNil(t.ToneHz)).Scan(&id)
	})
	return id, err
}

// transmitterID returns the id of ident inside tx, creating the row.
func transmitterID(tx *sql.Tx, ident string) (TransmitterID, error) {
	var id TransmitterID
	err := tx.QueryRow(upsertTransmitter, ident, nil, nil).Scan(&id)
	return id, err
}

const upsertSchedule = `
INSERT INTO schedules (transmitter_id, as_of_unix_ns, order_index, bursts, period_s, period_sigma_s,
	drift_ppm, drift_sigma_ppm, t0_unix_ns, on_s, common_period_s, reason, channel_hz)
VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
ON CONFLICT (transmitter_id, as_of_unix_ns) DO UPDATE SET
	order_index = excluded.order_index, bursts = excluded.bursts, period_s = excluded.period_s,
	period_sigma_s = excluded.period_sigma_s, drift_ppm = excluded.drift_ppm,
	drift_sigma_ppm = excluded.drift_sigma_ppm, t0_unix_ns = excluded.t0_unix_ns, on_s = excluded.on_s,
	common_period_s = excluded.common_period_s, reason = excluded.reason, channel_hz = excluded.channel_hz`

// PutSchedules writes a slot plan — one Schedule per transmitter, usually
// with one AsOf — in one transaction.
func (db *DB) PutSchedules(plan []Schedule) error {
	for _, s := range plan {
		if err := s.Validate(); err != nil {
			return err
		}
	}
	return db.inTx("write schedule", func(tx *sql.Tx) error {
		for _, s := range plan {
			tid, err := transmitterID(tx, s.Ident)
			if err != nil {
				return err
			}
			if _, err := tx.Exec(upsertSchedule, tid, s.AsOf.UnixNano(), s.Order, s.Bursts, fOrNil(s.PeriodS),
				fOrNil(s.PeriodSigmaS), fOrNil(s.DriftPPM), fOrNil(s.DriftSigmaPPM), nsOrNil(s.T0),
				fOrNil(s.OnS), fOrNil(s.CommonPeriodS), s.Reason, zeroNil(s.ChannelHz)); err != nil {
				return err
			}
		}
		return nil
	})
}

const upsertFix = `
INSERT INTO fixes (transmitter_id, from_unix_ns, to_unix_ns, lat_deg, lon_deg, cov_ee_m2, cov_en_m2, cov_nn_m2,
	semi_major_m, semi_minor_m, orientation_deg, probability, chi2, dof, variance_factor, maidenhead, grid_cell,
	computed_unix_ns)
VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)
ON CONFLICT (transmitter_id, from_unix_ns, to_unix_ns) DO UPDATE SET
	lat_deg = excluded.lat_deg, lon_deg = excluded.lon_deg, cov_ee_m2 = excluded.cov_ee_m2,
	cov_en_m2 = excluded.cov_en_m2, cov_nn_m2 = excluded.cov_nn_m2, semi_major_m = excluded.semi_major_m,
	semi_minor_m = excluded.semi_minor_m, orientation_deg = excluded.orientation_deg,
	probability = excluded.probability, chi2 = excluded.chi2, dof = excluded.dof,
	variance_factor = excluded.variance_factor, maidenhead = excluded.maidenhead,
	grid_cell = excluded.grid_cell, computed_unix_ns = excluded.computed_unix_ns
RETURNING id`

const insertFixLine = `
INSERT INTO fix_lines (fix_id, ordinal, station_id, lat_deg, lon_deg, bearing_true_deg, sigma_deg, used,
	residual_deg, dist_m, reason)
VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`

// PutFix writes the fix and its lines (by transmitter and window: the
// lines of an earlier fix of the same window are replaced) in one
// transaction. A zero Computed is set to now.
func (db *DB) PutFix(f Fix) (FixID, error) {
	if f.Computed.IsZero() {
		f.Computed = time.Now().UTC()
	}
	if err := f.Validate(); err != nil {
		return 0, err
	}
	var id FixID
	err := db.inTx("write fix of "+f.Ident, func(tx *sql.Tx) error {
		tid, err := transmitterID(tx, f.Ident)
		if err != nil {
			return err
		}
		if err := tx.QueryRow(upsertFix, tid, f.From.UnixNano(), f.To.UnixNano(), f.LatDeg, f.LonDeg,
			f.CovEEM2, f.CovENM2, f.CovNNM2, f.SemiMajorM, f.SemiMinorM, f.OrientationDeg, f.Probability,
			f.Chi2, f.DOF, f.VarianceFactor, f.Maidenhead, f.GridCell, f.Computed.UnixNano()).Scan(&id); err != nil {
			return err
		}
		if _, err := tx.Exec("DELETE FROM fix_lines WHERE fix_id = ?", id); err != nil {
			return err
		}
		for i, l := range f.Lines {
			if _, err := tx.Exec(insertFixLine, id, i, l.Station, l.LatDeg, l.LonDeg, l.TrueDeg, l.SigmaDeg,
				b2i(l.Used), l.ResidualDeg, l.DistM, l.Reason); err != nil {
				return err
			}
		}
		return nil
	})
	return id, err
}

const ensureStation = `
INSERT INTO stations (name, lat_deg, lon_deg, position_source, antenna, pattern_file, mount_offset_deg)
VALUES (?, ?, ?, 'fixed', '', '', 0)
ON CONFLICT (name) DO NOTHING`

// EnsureStation returns the id of the station named s.Name, writing s
// only when no station of that name is stored yet: a station known only
// from a bearings file (a name and a position) never overwrites what its
// own station file said.
func (db *DB) EnsureStation(s Station) (StationID, error) {
	if s.PositionSource == "" {
		s.PositionSource = PositionFixed
	}
	if err := s.Validate(); err != nil {
		return 0, err
	}
	var id StationID
	err := db.inTx("write station "+s.Name, func(tx *sql.Tx) error {
		if _, err := tx.Exec(ensureStation, s.Name, fOrNil(s.LatDeg), fOrNil(s.LonDeg)); err != nil {
			return err
		}
		return tx.QueryRow("SELECT id FROM stations WHERE name = ?", s.Name).Scan(&id)
	})
	return id, err
}
