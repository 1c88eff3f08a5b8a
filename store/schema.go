package store

// migration is one step of the schema. Steps are applied in order, each in
// its own transaction together with the PRAGMA user_version that records
// it; a step is never edited once released — a change is a new step.
type migration struct {
	// version is the user_version the database has after this step.
	version int
	name    string
	sql     string
}

// migrations is the schema's history. SchemaVersion is the last one.
var migrations = []migration{
	{1, "stations, captures, transmitters, bursts, level readings, headings", schemaV1},
	{2, "bearings, schedules, fixes and the indexes of the queries", schemaV2},
	{3, "a bearing of a moving station may have no position", schemaV3},
	{4, "a schedule row names its channel", schemaV4},
	{5, "level readings of a transmission still on the air", schemaV5},
}

// SchemaVersion is the schema version this build writes (PRAGMA
// user_version after all migrations).
var SchemaVersion = migrations[len(migrations)-1].version

// ApplicationID is stored in PRAGMA application_id (SQLite file format,
// database header offset 68) so that a database of another program is
// refused rather than migrated: the bytes "NuLs".
const ApplicationID = 0x4e754c73

// schemaV1: the listening record.
//
// Natural keys (each UNIQUE, written with ON CONFLICT … DO UPDATE):
// stations by name; captures by file hash and channel offset; transmitters
// by identifier; bursts by capture and start sample; level readings by
// burst and sample; headings by capture and time.
const schemaV1 = `
CREATE TABLE stations (
	id                INTEGER PRIMARY KEY,
	name              TEXT    NOT NULL UNIQUE CHECK (name <> ''),
	-- NULL position: a moving station (each bearing carries its own).
	lat_deg           REAL CHECK (lat_deg BETWEEN -90 AND 90),
	lon_deg           REAL CHECK (lon_deg BETWEEN -180 AND 180),
	alt_m             REAL,
	position_source   TEXT    NOT NULL CHECK (position_source IN ('fixed', 'gpsd', 'nmea')),
	antenna           TEXT    NOT NULL DEFAULT '',
	pattern_file      TEXT    NOT NULL DEFAULT '',
	-- degrees clockwise from the heading sensor's reference to the antenna's
	mount_offset_deg  REAL    NOT NULL DEFAULT 0,
	-- east positive; NULL: from the magnetic model at each bearing
	declination_deg   REAL,
	CHECK ((lat_deg IS NULL) = (lon_deg IS NULL))
);

CREATE TABLE captures (
	id                 INTEGER PRIMARY KEY,
	station_id         INTEGER REFERENCES stations(id),
	source             TEXT    NOT NULL,
	format             TEXT    NOT NULL DEFAULT '',
	start_unix_ns      INTEGER,
	centre_hz          REAL,
	sample_rate_hz     REAL    NOT NULL CHECK (sample_rate_hz > 0),
	samples            INTEGER,
	file_sha256        TEXT    NOT NULL CHECK (length(file_sha256) = 64),
	channel_offset_hz  REAL    NOT NULL,
	channel_hz         REAL,
	UNIQUE (file_sha256, channel_offset_hz)
);

CREATE TABLE transmitters (
	id               INTEGER PRIMARY KEY,
	ident            TEXT    NOT NULL UNIQUE CHECK (ident <> ''),
	-- fingerprint: carrier offset from the channel and keying tone
	offset_hz        REAL,
	tone_hz          REAL
);

CREATE TABLE bursts (
	id                 INTEGER PRIMARY KEY,
	capture_id         INTEGER NOT NULL REFERENCES captures(id) ON DELETE CASCADE,
	start_sample       INTEGER NOT NULL,
	end_sample         INTEGER NOT NULL CHECK (end_sample >= start_sample),
	start_s            REAL    NOT NULL,
	end_s              REAL    NOT NULL,
	start_unix_ns      INTEGER,
	end_unix_ns        INTEGER,
	offset_hz          REAL    NOT NULL,
	freq_hz            REAL,
	level_dbfs         REAL    NOT NULL,
	peak_dbfs          REAL    NOT NULL,
	noise_dbfs         REAL    NOT NULL,
	snr_db             REAL    NOT NULL,
	clipped_fraction   REAL    NOT NULL DEFAULT 0,
	cut_at_start       INTEGER NOT NULL DEFAULT 0,
	cut_at_end         INTEGER NOT NULL DEFAULT 0,
	double_carrier     INTEGER NOT NULL DEFAULT 0,
	carrier_spread_hz  REAL    NOT NULL DEFAULT 0,
	mode               TEXT    NOT NULL DEFAULT '',
	text               TEXT    NOT NULL DEFAULT '',
	transmitter_id     INTEGER REFERENCES transmitters(id),
	ident_confidence   REAL    NOT NULL DEFAULT 0,
	ident_method       TEXT    NOT NULL DEFAULT '',
	tone_hz            REAL    NOT NULL DEFAULT 0,
	wpm                REAL    NOT NULL DEFAULT 0,
	-- rate of the stored level readings after thinning
	readings_per_s     REAL    NOT NULL DEFAULT 0,
	UNIQUE (capture_id, start_sample)
);

CREATE TABLE level_readings (
	burst_id    INTEGER NOT NULL REFERENCES bursts(id) ON DELETE CASCADE,
	sample      INTEGER NOT NULL,
	t_s         REAL    NOT NULL,
	level_dbfs  REAL    NOT NULL,
	clipped     INTEGER NOT NULL DEFAULT 0,
	PRIMARY KEY (burst_id, sample)
) WITHOUT ROWID;

CREATE TABLE headings (
	capture_id   INTEGER NOT NULL REFERENCES captures(id) ON DELETE CASCADE,
	t_s          REAL    NOT NULL,
	heading_deg  REAL    NOT NULL CHECK (heading_deg >= 0 AND heading_deg < 360),
	reference    TEXT    NOT NULL CHECK (reference IN ('true', 'magnetic')),
	PRIMARY KEY (capture_id, t_s)
) WITHOUT ROWID;
`

// schemaV2: what is worked out from the listening record, and the indexes
// of the queries in query.go.
//
// Natural keys: bearings by burst and station; schedules by transmitter and
// as-of time; fixes by transmitter and bearing window; a fix's lines by fix
// and input order.
const schemaV2 = `
CREATE TABLE bearings (
	id                    INTEGER PRIMARY KEY,
	burst_id              INTEGER NOT NULL REFERENCES bursts(id) ON DELETE CASCADE,
	station_id            INTEGER NOT NULL REFERENCES stations(id),
	transmitter_id        INTEGER REFERENCES transmitters(id),
	-- the burst's start, UTC
	time_unix_ns          INTEGER,
	bearing_true_deg      REAL    NOT NULL CHECK (bearing_true_deg >= 0 AND bearing_true_deg < 360),
	bearing_magnetic_deg  REAL CHECK (bearing_magnetic_deg >= 0 AND bearing_magnetic_deg < 360),
	declination_deg       REAL,
	sigma_deg             REAL    NOT NULL CHECK (sigma_deg > 0),
	alt_bearing_true_deg  REAL CHECK (alt_bearing_true_deg >= 0 AND alt_bearing_true_deg < 360),
	flags                 INTEGER NOT NULL DEFAULT 0,
	-- where the station was when the bearing was taken
	station_lat_deg       REAL    NOT NULL CHECK (station_lat_deg BETWEEN -90 AND 90),
	station_lon_deg       REAL    NOT NULL CHECK (station_lon_deg BETWEEN -180 AND 180),
	station_alt_m         REAL,
	null_depth_db         REAL    NOT NULL DEFAULT 0,
	coverage_deg          REAL    NOT NULL DEFAULT 0,
	residual_db           REAL    NOT NULL DEFAULT 0,
	points                INTEGER NOT NULL DEFAULT 0,
	warnings              TEXT    NOT NULL DEFAULT '',
	UNIQUE (burst_id, station_id)
);
CREATE INDEX bearings_station_tx_time ON bearings (station_id, transmitter_id, time_unix_ns);
CREATE INDEX bearings_tx_time ON bearings (transmitter_id, time_unix_ns);

CREATE TABLE schedules (
	transmitter_id   INTEGER NOT NULL REFERENCES transmitters(id),
	as_of_unix_ns    INTEGER NOT NULL,
	order_index      INTEGER NOT NULL CHECK (order_index >= 0),
	bursts           INTEGER NOT NULL DEFAULT 0,
	period_s         REAL CHECK (period_s > 0),
	period_sigma_s   REAL,
	drift_ppm        REAL,
	drift_sigma_ppm  REAL,
	t0_unix_ns       INTEGER,
	on_s             REAL,
	common_period_s  REAL,
	reason           TEXT    NOT NULL DEFAULT '',
	PRIMARY KEY (transmitter_id, as_of_unix_ns)
) WITHOUT ROWID;

CREATE TABLE fixes (
	id                INTEGER PRIMARY KEY,
	transmitter_id    INTEGER NOT NULL REFERENCES transmitters(id),
	-- the window of bearing times the fix was made from
	from_unix_ns      INTEGER NOT NULL,
	to_unix_ns        INTEGER NOT NULL CHECK (to_unix_ns >= from_unix_ns),
	lat_deg           REAL    NOT NULL CHECK (lat_deg BETWEEN -90 AND 90),
	lon_deg           REAL    NOT NULL CHECK (lon_deg BETWEEN -180 AND 180),
	cov_ee_m2         REAL    NOT NULL,
	cov_en_m2         REAL    NOT NULL,
	cov_nn_m2         REAL    NOT NULL,
	semi_major_m      REAL    NOT NULL,
	semi_minor_m      REAL    NOT NULL,
	orientation_deg   REAL    NOT NULL,
	probability       REAL    NOT NULL CHECK (probability > 0 AND probability < 1),
	chi2              REAL    NOT NULL,
	dof               INTEGER NOT NULL,
	variance_factor   REAL    NOT NULL,
	maidenhead        TEXT    NOT NULL DEFAULT '',
	grid_cell         TEXT    NOT NULL DEFAULT '',
	computed_unix_ns  INTEGER NOT NULL,
	UNIQUE (transmitter_id, from_unix_ns, to_unix_ns)
);
CREATE INDEX fixes_tx_to ON fixes (transmitter_id, to_unix_ns);

CREATE TABLE fix_lines (
	fix_id            INTEGER NOT NULL REFERENCES fixes(id) ON DELETE CASCADE,
	ordinal           INTEGER NOT NULL,
	station_id        INTEGER NOT NULL REFERENCES stations(id),
	lat_deg           REAL    NOT NULL,
	lon_deg           REAL    NOT NULL,
	bearing_true_deg  REAL    NOT NULL,
	sigma_deg         REAL    NOT NULL,
	used              INTEGER NOT NULL,
	residual_deg      REAL    NOT NULL DEFAULT 0,
	dist_m            REAL    NOT NULL DEFAULT 0,
	reason            TEXT    NOT NULL DEFAULT '',
	PRIMARY KEY (fix_id, ordinal)
) WITHOUT ROWID;

CREATE INDEX bursts_tx_time ON bursts (transmitter_id, start_unix_ns);
`

// schemaV3: a moving station's bearing is kept when its position source
// had no fix near the burst's time (station_lat_deg and station_lon_deg
// both NULL) rather than stamped with a guess. SQLite cannot relax a NOT
// NULL column in place, so the table is rebuilt the documented way
// (SQLite documentation, ALTER TABLE, "Making Other Kinds Of Table Schema
// Changes": create, copy, drop, rename, re-index); no table refers to
// bearings, so its ids and every reference to bursts and stations carry
// over unchanged.
const schemaV3 = `
CREATE TABLE bearings_v3 (
	id                    INTEGER PRIMARY KEY,
	burst_id              INTEGER NOT NULL REFERENCES bursts(id) ON DELETE CASCADE,
	station_id            INTEGER NOT NULL REFERENCES stations(id),
	transmitter_id        INTEGER REFERENCES transmitters(id),
	time_unix_ns          INTEGER,
	bearing_true_deg      REAL    NOT NULL CHECK (bearing_true_deg >= 0 AND bearing_true_deg < 360),
	bearing_magnetic_deg  REAL CHECK (bearing_magnetic_deg >= 0 AND bearing_magnetic_deg < 360),
	declination_deg       REAL,
	sigma_deg             REAL    NOT NULL CHECK (sigma_deg > 0),
	alt_bearing_true_deg  REAL CHECK (alt_bearing_true_deg >= 0 AND alt_bearing_true_deg < 360),
	flags                 INTEGER NOT NULL DEFAULT 0,
	-- where the station was when the bearing was taken; NULL: unknown
	station_lat_deg       REAL CHECK (station_lat_deg BETWEEN -90 AND 90),
	station_lon_deg       REAL CHECK (station_lon_deg BETWEEN -180 AND 180),
	station_alt_m         REAL,
	null_depth_db         REAL    NOT NULL DEFAULT 0,
	coverage_deg          REAL    NOT NULL DEFAULT 0,
	residual_db           REAL    NOT NULL DEFAULT 0,
	points                INTEGER NOT NULL DEFAULT 0,
	warnings              TEXT    NOT NULL DEFAULT '',
	UNIQUE (burst_id, station_id),
	CHECK ((station_lat_deg IS NULL) = (station_lon_deg IS NULL))
);
INSERT INTO bearings_v3 SELECT id, burst_id, station_id, transmitter_id, time_unix_ns, bearing_true_deg,
	bearing_magnetic_deg, declination_deg, sigma_deg, alt_bearing_true_deg, flags, station_lat_deg,
	station_lon_deg, station_alt_m, null_depth_db, coverage_deg, residual_db, points, warnings FROM bearings;
DROP TABLE bearings;
ALTER TABLE bearings_v3 RENAME TO bearings;
CREATE INDEX bearings_station_tx_time ON bearings (station_id, transmitter_id, time_unix_ns);
CREATE INDEX bearings_tx_time ON bearings (transmitter_id, time_unix_ns);
`

// schemaV4: a watch listening on several channels of one receiver fits a
// slot schedule per channel, so a schedule row says which channel (RF
// frequency, Hz) it was fitted on; NULL for rows written before, or when
// the channel is unknown. A nullable column without a default is added in
// place (SQLite documentation, ALTER TABLE, "ALTER TABLE ADD COLUMN").
const schemaV4 = `
ALTER TABLE schedules ADD COLUMN channel_hz REAL CHECK (channel_hz > 0);
`

// schemaV5: the level readings of a transmission that has not ended yet
// (a carrier that stays on for hours), written as they are handed over so
// that a long transmission is neither held in memory nor lost when the
// process dies; when its burst is written they move to level_readings
// (Writer.AddBurstFromOpen), and a run that died leaves them here for
// DB.RecoverOpen. noise_dbfs is the noise the reading's piece was measured
// against. Keyed like level_readings, by capture instead of burst.
const schemaV5 = `
CREATE TABLE open_readings (
	capture_id  INTEGER NOT NULL REFERENCES captures(id) ON DELETE CASCADE,
	sample      INTEGER NOT NULL,
	t_s         REAL    NOT NULL,
	level_dbfs  REAL    NOT NULL,
	noise_dbfs  REAL    NOT NULL,
	clipped     INTEGER NOT NULL DEFAULT 0,
	PRIMARY KEY (capture_id, sample)
) WITHOUT ROWID;
`
