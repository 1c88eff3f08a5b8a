package store

import (
	"database/sql"
	"errors"
	"fmt"
	"math"
	"strings"
	"time"
)

// ErrNotFound: the row asked for is not in the database.
var ErrNotFound = errors.New("not in the database")

// Tables lists the store's tables in schema order.
var Tables = []string{"stations", "captures", "transmitters", "bursts", "level_readings", "headings",
	"bearings", "schedules", "fixes", "fix_lines", "open_readings"}

// Counts returns the number of rows of every table in Tables.
func (db *DB) Counts() (map[string]int64, error) {
	out := make(map[string]int64, len(Tables))
	for _, t := range Tables {
		var n int64
		// The names come from Tables, never from input.
		if err := db.sql.QueryRow("SELECT count(*) FROM " + t).Scan(&n); err != nil {
			return nil, db.wrap("count "+t, err)
		}
		out[t] = n
	}
	return out, nil
}

const selectStation = `SELECT id, name, lat_deg, lon_deg, alt_m, position_source, antenna, pattern_file,
	mount_offset_deg, declination_deg FROM stations`

func scanStation(sc interface{ Scan(...any) error }) (Station, error) {
	var s Station
	var lat, lon, alt, decl sql.NullFloat64
	err := sc.Scan(&s.ID, &s.Name, &lat, &lon, &alt, &s.PositionSource, &s.Antenna, &s.PatternFile,
		&s.MountOffsetDeg, &decl)
	s.LatDeg, s.LonDeg, s.AltM, s.DeclinationDeg = ptrOf(lat), ptrOf(lon), ptrOf(alt), ptrOf(decl)
	return s, err
}

// Stations returns every station, by name.
func (db *DB) Stations() ([]Station, error) {
	rows, err := db.sql.Query(selectStation + " ORDER BY name")
	if err != nil {
		return nil, db.wrap("read stations", err)
	}
	defer rows.Close()
	var out []Station
	for rows.Next() {
		s, err := scanStation(rows)
		if err != nil {
			return nil, db.wrap("read stations", err)
		}
		out = append(out, s)
	}
	return out, db.wrap("read stations", rows.Err())
}

// StationByName returns the named station, or an error wrapping
// ErrNotFound.
func (db *DB) StationByName(name string) (Station, error) {
	s, err := scanStation(db.sql.QueryRow(selectStation+" WHERE name = ?", name))
	if errors.Is(err, sql.ErrNoRows) {
		return s, fmt.Errorf("store: %s: station %q: %w", db.path, name, ErrNotFound)
	}
	return s, db.wrap("read station", err)
}

// Capture returns the capture with the given id.
func (db *DB) Capture(id CaptureID) (Capture, error) {
	var c Capture
	var st, start, samples sql.NullInt64
	var centre sql.NullFloat64
	err := db.sql.QueryRow(`SELECT id, station_id, source, format, start_unix_ns, centre_hz, sample_rate_hz,
		samples, file_sha256, channel_offset_hz FROM captures WHERE id = ?`, id).Scan(
		&c.ID, &st, &c.Source, &c.Format, &start, &centre, &c.SampleRateHz, &samples, &c.FileSHA256, &c.ChannelOffsetHz)
	if errors.Is(err, sql.ErrNoRows) {
		return c, fmt.Errorf("store: %s: capture %d: %w", db.path, id, ErrNotFound)
	}
	if err != nil {
		return c, db.wrap("read capture", err)
	}
	c.Station, c.Start, c.CentreHz, c.Samples = StationID(st.Int64), timeOf(start), centre.Float64, -1
	if samples.Valid {
		c.Samples = samples.Int64
	}
	return c, nil
}

const selectBurst = `SELECT b.id, b.capture_id, b.start_sample, b.end_sample, b.start_s, b.end_s, b.start_unix_ns,
	b.end_unix_ns, b.offset_hz, b.freq_hz, b.level_dbfs, b.peak_dbfs, b.noise_dbfs, b.snr_db, b.clipped_fraction,
	b.cut_at_start, b.cut_at_end, b.double_carrier, b.carrier_spread_hz, b.mode, b.text, coalesce(t.ident, ''),
	b.ident_confidence, b.ident_method, b.tone_hz, b.wpm, b.readings_per_s
	FROM bursts b LEFT JOIN transmitters t ON t.id = b.transmitter_id`

func scanBursts(rows *sql.Rows) ([]Burst, error) {
	defer rows.Close()
	var out []Burst
	for rows.Next() {
		var b Burst
		var start, end sql.NullInt64
		var freq sql.NullFloat64
		if err := rows.Scan(&b.ID, &b.Capture, &b.StartSample, &b.EndSample, &b.StartS, &b.EndS, &start, &end,
			&b.OffsetHz, &freq, &b.LevelDBFS, &b.PeakDBFS, &b.NoiseDBFS, &b.SNRDB, &b.ClippedFraction,
			&b.CutAtStart, &b.CutAtEnd, &b.DoubleCarrier, &b.CarrierSpreadHz, &b.Mode, &b.Text, &b.Ident,
			&b.IdentConfidence, &b.IdentMethod, &b.ToneHz, &b.WPM, &b.ReadingsPerS); err != nil {
			return nil, err
		}
		b.Start, b.End, b.FreqHz = timeOf(start), timeOf(end), freq.Float64
		out = append(out, b)
	}
	return out, rows.Err()
}

// BurstsOfCapture returns a capture's bursts in start order.
func (db *DB) BurstsOfCapture(c CaptureID) ([]Burst, error) {
	rows, err := db.sql.Query(selectBurst+" WHERE b.capture_id = ? ORDER BY b.start_sample", c)
	if err != nil {
		return nil, db.wrap("read bursts", err)
	}
	out, err := scanBursts(rows)
	return out, db.wrap("read bursts", err)
}

// Window is a closed interval of UTC times [From, To]; a zero end is
// open on that side.
type Window struct{ From, To time.Time }

// bounds returns the window as nanoseconds, open ends as the int64 limits.
func (w Window) bounds() (int64, int64) {
	lo, hi := int64(math.MinInt64), int64(math.MaxInt64)
	if !w.From.IsZero() {
		lo = w.From.UnixNano()
	}
	if !w.To.IsZero() {
		hi = w.To.UnixNano()
	}
	return lo, hi
}

// BurstsOf returns the bursts attributed to the transmitter ident that
// started inside the window (bursts without a UTC start are left out), in
// time order: the input of a slot schedule from the database.
func (db *DB) BurstsOf(ident string, w Window) ([]Burst, error) {
	lo, hi := w.bounds()
	rows, err := db.sql.Query(selectBurst+` WHERE t.ident = ? AND b.start_unix_ns BETWEEN ? AND ?
		ORDER BY b.start_unix_ns, b.capture_id, b.start_sample`, ident, lo, hi)
	if err != nil {
		return nil, db.wrap("read bursts", err)
	}
	out, err := scanBursts(rows)
	return out, db.wrap("read bursts", err)
}

// Readings returns a burst's stored level readings in sample order.
func (db *DB) Readings(b BurstID) ([]LevelReading, error) {
	rows, err := db.sql.Query("SELECT sample, t_s, level_dbfs, clipped FROM level_readings WHERE burst_id = ? ORDER BY sample", b)
	if err != nil {
		return nil, db.wrap("read level readings", err)
	}
	defer rows.Close()
	var out []LevelReading
	for rows.Next() {
		var r LevelReading
		if err := rows.Scan(&r.Sample, &r.TimeS, &r.LevelDBFS, &r.Clipped); err != nil {
			return nil, db.wrap("read level readings", err)
		}
		out = append(out, r)
	}
	return out, db.wrap("read level readings", rows.Err())
}

// Headings returns a capture's heading samples in time order and the north
// they are measured from. A capture whose samples name two references is
// refused (a heading source has one north).
func (db *DB) Headings(c CaptureID) ([]HeadingSample, string, error) {
	rows, err := db.sql.Query("SELECT t_s, heading_deg, reference FROM headings WHERE capture_id = ? ORDER BY t_s", c)
	if err != nil {
		return nil, "", db.wrap("read headings", err)
	}
	defer rows.Close()
	var out []HeadingSample
	ref := ""
	for rows.Next() {
		var h HeadingSample
		var r string
		if err := rows.Scan(&h.TimeS, &h.Deg, &r); err != nil {
			return nil, "", db.wrap("read headings", err)
		}
		if ref != "" && r != ref {
			return nil, "", fmt.Errorf("store: %s: capture %d has headings from both true and magnetic north", db.path, c)
		}
		ref = r
		out = append(out, h)
	}
	return out, ref, db.wrap("read headings", rows.Err())
}

// BearingQuery selects bearings: of one station and one transmitter when
// named ("" for all), taken inside the window. Bearings without a UTC
// time are never selected.
type BearingQuery struct {
	Station, Ident string
	Window
}

const selectBearing = `SELECT g.id, b.capture_id, b.start_sample, g.station_id, s.name, coalesce(t.ident, ''),
	g.time_unix_ns, g.bearing_true_deg, g.bearing_magnetic_deg, g.declination_deg, g.sigma_deg,
	g.alt_bearing_true_deg, g.flags, g.station_lat_deg, g.station_lon_deg, g.station_alt_m, g.null_depth_db,
	g.coverage_deg, g.residual_db, g.points, g.warnings
	FROM bearings g
	JOIN bursts b ON b.id = g.burst_id
	JOIN stations s ON s.id = g.station_id
	LEFT JOIN transmitters t ON t.id = g.transmitter_id`

// Bearings returns the bearings q selects, by time then station name.
// With both a station and a transmitter named it is one range scan of the
// index bearings_station_tx_time, with only the transmitter one of
// bearings_tx_time. A station or transmitter that is not in the database
// is an error wrapping ErrNotFound.
func (db *DB) Bearings(q BearingQuery) ([]Bearing, error) {
	query, args, err := db.bearingsQuery(q)
	if err != nil {
		return nil, err
	}
	rows, err := db.sql.Query(query, args...)
	if err != nil {
		return nil, db.wrap("read bearings", err)
	}
	defer rows.Close()
	var out []Bearing
	for rows.Next() {
		var g Bearing
		var when sql.NullInt64
		var mag, decl, alt, salt, slat, slon sql.NullFloat64
		var warn string
		if err := rows.Scan(&g.ID, &g.Capture, &g.BurstStartSample, &g.Station, &g.StationName, &g.Ident, &when,
			&g.TrueDeg, &mag, &decl, &g.SigmaDeg, &alt, &g.Flags, &slat, &slon, &salt,
			&g.NullDepthDB, &g.CoverageDeg, &g.ResidualDB, &g.Points, &warn); err != nil {
			return nil, db.wrap("read bearings", err)
		}
		g.Time, g.MagneticDeg, g.DeclinationDeg, g.AltTrueDeg, g.StationAltM = timeOf(when), ptrOf(mag), ptrOf(decl), ptrOf(alt), ptrOf(salt)
		g.StationLatDeg, g.StationLonDeg, g.NoPosition = slat.Float64, slon.Float64, !slat.Valid
		if g.NoPosition {
			g.StationLatDeg, g.StationLonDeg = math.NaN(), math.NaN()
		}
		if warn != "" {
			g.Warnings = strings.Split(warn, warningSep)
		}
		out = append(out, g)
	}
	return out, db.wrap("read bearings", rows.Err())
}

// lookup finds the id of the row of table whose column equals v; the
// table and column names are constants of this file.
func (db *DB) lookup(table, column, v string, id *int64) error {
	err := db.sql.QueryRow("SELECT id FROM "+table+" WHERE "+column+" = ?", v).Scan(id)
	if errors.Is(err, sql.ErrNoRows) {
		return fmt.Errorf("store: %s: no %s with %s %q: %w", db.path, strings.TrimSuffix(table, "s"), column, v, ErrNotFound)
	}
	return db.wrap("look up "+v, err)
}

// bearingsQuery builds the SQL of Bearings.
func (db *DB) bearingsQuery(q BearingQuery) (string, []any, error) {
	lo, hi := q.bounds()
	var where []string
	args := []any{}
	if q.Station != "" {
		var id int64
		if err := db.lookup("stations", "name", q.Station, &id); err != nil {
			return "", nil, err
		}
		where = append(where, "g.station_id = ?")
		args = append(args, id)
	}
	if q.Ident != "" {
		var id int64
		if err := db.lookup("transmitters", "ident", q.Ident, &id); err != nil {
			return "", nil, err
		}
		where = append(where, "g.transmitter_id = ?")
		args = append(args, id)
	}
	where = append(where, "g.time_unix_ns BETWEEN ? AND ?")
	args = append(args, lo, hi)
	return selectBearing + " WHERE " + strings.Join(where, " AND ") + " ORDER BY g.time_unix_ns, s.name, g.id", args, nil
}

// StationBearings are one station's bearings of one transmitter.
type StationBearings struct {
	Station  Station
	Bearings []Bearing
}

// FixInput returns what a fix of ident needs from the database: per
// station (by name), the station and its bearings of ident inside the
// window, in time order. Each bearing carries the position it was taken
// from, so a moving station's bearings are usable as they are.
func (db *DB) FixInput(ident string, w Window) ([]StationBearings, error) {
	if ident == "" {
		return nil, errors.New("store: a fix needs the transmitter's identifier")
	}
	bs, err := db.Bearings(BearingQuery{Ident: ident, Window: w})
	if err != nil {
		return nil, err
	}
	byStation := map[StationID]int{}
	var out []StationBearings
	for _, b := range bs {
		i, ok := byStation[b.Station]
		if !ok {
			st, err := scanStation(db.sql.QueryRow(selectStation+" WHERE id = ?", b.Station))
			if err != nil {
				return nil, db.wrap("read station", err)
			}
			i = len(out)
			byStation[b.Station] = i
			out = append(out, StationBearings{Station: st})
		}
		out[i].Bearings = append(out[i].Bearings, b)
	}
	// by station name, so the order does not depend on who was heard first
	for i := 1; i < len(out); i++ {
		for j := i; j > 0 && out[j].Station.Name < out[j-1].Station.Name; j-- {
			out[j], out[j-1] = out[j-1], out[j]
		}
	}
	return out, nil
}

// ScheduleAt returns the slot schedule as it stood at t: for every
// transmitter, its latest schedule row with AsOf ≤ t, by Order then
// identifier. A transmitter first scheduled after t is absent.
func (db *DB) ScheduleAt(t time.Time) ([]Schedule, error) {
	rows, err := db.sql.Query(`SELECT t.ident, s.as_of_unix_ns, s.order_index, s.bursts, s.period_s,
		s.period_sigma_s, s.drift_ppm, s.drift_sigma_ppm, s.t0_unix_ns, s.on_s, s.common_period_s, s.reason, s.channel_hz
		FROM schedules s JOIN transmitters t ON t.id = s.transmitter_id
		WHERE s.as_of_unix_ns = (SELECT max(s2.as_of_unix_ns) FROM schedules s2
			WHERE s2.transmitter_id = s.transmitter_id AND s2.as_of_unix_ns <= ?)
		ORDER BY s.order_index, t.ident`, t.UnixNano())
	if err != nil {
		return nil, db.wrap("read schedule", err)
	}
	defer rows.Close()
	var out []Schedule
	for rows.Next() {
		var s Schedule
		var asOf int64
		var t0 sql.NullInt64
		var p, ps, d, ds, on, cp, ch sql.NullFloat64
		if err := rows.Scan(&s.Ident, &asOf, &s.Order, &s.Bursts, &p, &ps, &d, &ds, &t0, &on, &cp, &s.Reason, &ch); err != nil {
			return nil, db.wrap("read schedule", err)
		}
		s.AsOf, s.T0, s.ChannelHz = time.Unix(0, asOf).UTC(), timeOf(t0), ch.Float64
		s.PeriodS, s.PeriodSigmaS, s.DriftPPM, s.DriftSigmaPPM, s.OnS, s.CommonPeriodS = ptrOf(p), ptrOf(ps), ptrOf(d), ptrOf(ds), ptrOf(on), ptrOf(cp)
		out = append(out, s)
	}
	return out, db.wrap("read schedule", rows.Err())
}

// LatestFixes returns, for every transmitter with a fix, the fix of the
// latest bearing window (greatest To; of equal windows the last computed),
// with its lines, by identifier.
func (db *DB) LatestFixes() ([]Fix, error) {
	rows, err := db.sql.Query(`SELECT f.id, t.ident, f.from_unix_ns, f.to_unix_ns, f.lat_deg, f.lon_deg,
		f.cov_ee_m2, f.cov_en_m2, f.cov_nn_m2, f.semi_major_m, f.semi_minor_m, f.orientation_deg, f.probability,
		f.chi2, f.dof, f.variance_factor, f.maidenhead, f.grid_cell, f.computed_unix_ns
		FROM fixes f JOIN transmitters t ON t.id = f.transmitter_id
		WHERE f.id = (SELECT f2.id FROM fixes f2 WHERE f2.transmitter_id = f.transmitter_id
			ORDER BY f2.to_unix_ns DESC, f2.computed_unix_ns DESC, f2.id DESC LIMIT 1)
		ORDER BY t.ident`)
	if err != nil {
		return nil, db.wrap("read fixes", err)
	}
	var out []Fix
	for rows.Next() {
		var f Fix
		var from, to, comp int64
		if err := rows.Scan(&f.ID, &f.Ident, &from, &to, &f.LatDeg, &f.LonDeg, &f.CovEEM2, &f.CovENM2, &f.CovNNM2,
			&f.SemiMajorM, &f.SemiMinorM, &f.OrientationDeg, &f.Probability, &f.Chi2, &f.DOF, &f.VarianceFactor,
			&f.Maidenhead, &f.GridCell, &comp); err != nil {
			rows.Close()
			return nil, db.wrap("read fixes", err)
		}
		f.From, f.To, f.Computed = time.Unix(0, from).UTC(), time.Unix(0, to).UTC(), time.Unix(0, comp).UTC()
		out = append(out, f)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, db.wrap("read fixes", err)
	}
	for i := range out {
		if out[i].Lines, err = db.fixLines(out[i].ID); err != nil {
			return nil, err
		}
	}
	return out, nil
}

func (db *DB) fixLines(id FixID) ([]FixLine, error) {
	rows, err := db.sql.Query(`SELECT l.station_id, s.name, l.lat_deg, l.lon_deg, l.bearing_true_deg, l.sigma_deg,
		l.used, l.residual_deg, l.dist_m, l.reason
		FROM fix_lines l JOIN stations s ON s.id = l.station_id WHERE l.fix_id = ? ORDER BY l.ordinal`, id)
	if err != nil {
		return nil, db.wrap("read fix lines", err)
	}
	defer rows.Close()
	var out []FixLine
	for rows.Next() {
		var l FixLine
		if err := rows.Scan(&l.Station, &l.StationName, &l.LatDeg, &l.LonDeg, &l.TrueDeg, &l.SigmaDeg, &l.Used,
			&l.ResidualDeg, &l.DistM, &l.Reason); err != nil {
			return nil, db.wrap("read fix lines", err)
		}
		out = append(out, l)
	}
	return out, db.wrap("read fix lines", rows.Err())
}

// BurstQuery selects bursts: of one station (its captures) and one
// transmitter when named ("" for all), started inside the window. Bursts
// without a UTC start are never selected.
type BurstQuery struct {
	Station, Ident string
	Window
}

// StationBurst is a burst with the name of the station whose capture
// holds it ("" for a capture tied to no station).
type StationBurst struct {
	Burst
	StationName string
}

// Bursts returns the bursts q selects in time order (then capture and
// start sample): the input of a slot schedule from the database. A
// station or transmitter that is not in the database is an error
// wrapping ErrNotFound.
func (db *DB) Bursts(q BurstQuery) ([]StationBurst, error) {
	lo, hi := q.bounds()
	where := []string{"b.start_unix_ns BETWEEN ? AND ?"}
	args := []any{lo, hi}
	if q.Station != "" {
		var id int64
		if err := db.lookup("stations", "name", q.Station, &id); err != nil {
			return nil, err
		}
		where, args = append(where, "c.station_id = ?"), append(args, id)
	}
	if q.Ident != "" {
		var id int64
		if err := db.lookup("transmitters", "ident", q.Ident, &id); err != nil {
			return nil, err
		}
		where, args = append(where, "b.transmitter_id = ?"), append(args, id)
	}
	query := strings.Replace(selectBurst, "SELECT ", "SELECT coalesce(s.name, ''), ", 1) +
		` JOIN captures c ON c.id = b.capture_id LEFT JOIN stations s ON s.id = c.station_id
		WHERE ` + strings.Join(where, " AND ") + " ORDER BY b.start_unix_ns, b.capture_id, b.start_sample"
	rows, err := db.sql.Query(query, args...)
	if err != nil {
		return nil, db.wrap("read bursts", err)
	}
	defer rows.Close()
	var out []StationBurst
	for rows.Next() {
		var b StationBurst
		var start, end sql.NullInt64
		var freq sql.NullFloat64
		if err := rows.Scan(&b.StationName, &b.ID, &b.Capture, &b.StartSample, &b.EndSample, &b.StartS, &b.EndS, &start, &end,
			&b.OffsetHz, &freq, &b.LevelDBFS, &b.PeakDBFS, &b.NoiseDBFS, &b.SNRDB, &b.ClippedFraction,
			&b.CutAtStart, &b.CutAtEnd, &b.DoubleCarrier, &b.CarrierSpreadHz, &b.Mode, &b.Text, &b.Ident,
			&b.IdentConfidence, &b.IdentMethod, &b.ToneHz, &b.WPM, &b.ReadingsPerS); err != nil {
			return nil, db.wrap("read bursts", err)
		}
		b.Start, b.End, b.FreqHz = timeOf(start), timeOf(end), freq.Float64
		out = append(out, b)
	}
	return out, db.wrap("read bursts", rows.Err())
}
