package store

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"time"
)

// TestOpenSettings: the connection settings Open promises, read back from
// SQLite itself.
func TestOpenSettings(t *testing.T) {
	db, _ := newDB(t)
	conn, err := db.sql.Conn(t.Context())
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	// SQLite PRAGMA documentation: journal_mode answers "wal"; synchronous
	// 1 is NORMAL; foreign_keys 1 is on; busy_timeout in milliseconds.
	for pragma, want := range map[string]string{
		"journal_mode": "wal", "synchronous": "1", "foreign_keys": "1",
		"busy_timeout": strconv.Itoa(int(DefaultBusyTimeout.Milliseconds())),
		"user_version": strconv.Itoa(SchemaVersion), "application_id": strconv.Itoa(ApplicationID),
	} {
		var got string
		if err := conn.QueryRowContext(t.Context(), "PRAGMA "+pragma).Scan(&got); err != nil {
			t.Fatal(err)
		}
		if got != want {
			t.Errorf("PRAGMA %s = %s, want %s", pragma, got, want)
		}
	}
	// FULL on request (synchronous 2).
	path := filepath.Join(t.TempDir(), "full.db")
	full, err := Open(path, Options{Synchronous: "full"})
	if err != nil {
		t.Fatal(err)
	}
	defer full.Close()
	var s int
	if err := full.sql.QueryRow("PRAGMA synchronous").Scan(&s); err != nil || s != 2 {
		t.Errorf("Synchronous FULL: PRAGMA synchronous = %d (%v), want 2", s, err)
	}
}

func TestOptionsValidate(t *testing.T) {
	for _, o := range []Options{
		{BusyTimeout: -time.Second}, {BusyTimeout: time.Hour}, {Synchronous: "OFF"}, {MaxBytes: -1}, {MaxBytes: 1000},
	} {
		if err := o.Validate(); err == nil {
			t.Errorf("%+v: no error", o)
		} else if _, err2 := Open(filepath.Join(t.TempDir(), "x.db"), o); err2 == nil || strings.Count(err2.Error(), "\n") > 0 {
			t.Errorf("%+v: Open gave %v, want one line", o, err2)
		}
	}
	for _, o := range []WriterOptions{
		{FlushInterval: -1}, {FlushInterval: 2 * time.Second}, {FlushInterval: time.Microsecond},
		{BatchRows: -1}, {BatchRows: 2_000_000}, {ReadingsPerS: math.NaN()}, {ReadingsPerS: 1e6},
	} {
		if err := o.Validate(); err == nil {
			t.Errorf("%+v: no error", o)
		}
	}
	if err := (WriterOptions{}).Validate(); err != nil {
		t.Errorf("zero WriterOptions: %v", err)
	}
}

// writeRecording stores an invented recording: a station, a capture, n
// bursts of two transmitters with readings, headings, a bearing per burst,
// a schedule and a fix. It is what a re-run writes again.
func writeRecording(t testing.TB, db *DB, n int) (StationID, CaptureID) {
	t.Helper()
	st, c := scene(t, db, "Kestrel Ridge", 45.1, 6.1, 1)
	if _, err := db.PutTransmitter(Transmitter{Ident: "N0CALL/1", OffsetHz: ptr(40), ToneHz: ptr(800)}); err != nil {
		t.Fatal(err)
	}
	w, err := db.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var hs []HeadingSample
	for i := 0; i < 600*10; i++ { // 10 Hz for 600 s, 6°/s
		hs = append(hs, HeadingSample{TimeS: float64(i) / 10, Deg: math.Mod(float64(i)*0.6, 360)})
	}
	if err := w.AddHeadings(c, RefMagnetic, hs); err != nil {
		t.Fatal(err)
	}
	for k := 0; k < n; k++ {
		id := []string{"N0CALL/1", "N0CALL/2"}[k%2]
		b, lv := burstAt(c, k, id)
		if err := w.AddBurst(b, lv); err != nil {
			t.Fatal(err)
		}
		mag := math.Mod(100+float64(k), 360)
		if err := w.AddBearing(Bearing{Capture: c, BurstStartSample: b.StartSample, Station: st,
			TrueDeg: math.Mod(mag+2.5, 360), MagneticDeg: ptr(mag), DeclinationDeg: ptr(2.5), SigmaDeg: 3,
			AltTrueDeg: ptr(math.Mod(mag+182.5, 360)), Flags: FlagAmbiguous, StationLatDeg: 45.1, StationLonDeg: 6.1,
			StationAltM: ptr(35), NullDepthDB: 20, CoverageDeg: 360, ResidualDB: 0.5, Points: 400,
			Warnings: []string{"first warning", "second"}}); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	asOf := t0.Add(10 * time.Minute)
	if err := db.PutSchedules([]Schedule{
		{Ident: "N0CALL/1", AsOf: asOf, Order: 0, Bursts: 5, PeriodS: ptr(120), PeriodSigmaS: ptr(0.01), DriftPPM: ptr(3), DriftSigmaPPM: ptr(1), T0: t0, OnS: ptr(10), CommonPeriodS: ptr(120)},
		{Ident: "N0CALL/2", AsOf: asOf, Order: 1, Bursts: 5, PeriodS: ptr(120), T0: t0.Add(time.Minute), OnS: ptr(10), CommonPeriodS: ptr(120)},
	}); err != nil {
		t.Fatal(err)
	}
	if _, err := db.PutFix(Fix{Ident: "N0CALL/1", From: t0, To: asOf, LatDeg: 45.2, LonDeg: 6.2, CovEEM2: 100,
		CovNNM2: 400, SemiMajorM: 49, SemiMinorM: 24.5, OrientationDeg: 0, Probability: 0.95, Chi2: 0.3, DOF: 1,
		VarianceFactor: 1, Maidenhead: "JN35cf", Computed: asOf,
		Lines: []FixLine{{Station: st, LatDeg: 45.1, LonDeg: 6.1, TrueDeg: 35, SigmaDeg: 3, Used: true}}}); err != nil {
		t.Fatal(err)
	}
	return st, c
}

// TestRerunIdempotent: writing the same recording twice leaves the same
// rows, counted by SQLite itself (the sqlite3 program).
func TestRerunIdempotent(t *testing.T) {
	db, path := newDB(t)
	writeRecording(t, db, 10)
	first, err := db.Counts()
	if err != nil {
		t.Fatal(err)
	}
	bursts1, _ := db.BurstsOfCapture(1)
	writeRecording(t, db, 10)
	second, err := db.Counts()
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(first, second) {
		t.Errorf("counts after a re-run %v, want %v", second, first)
	}
	bursts2, _ := db.BurstsOfCapture(1)
	if !reflect.DeepEqual(bursts1, bursts2) {
		t.Errorf("bursts changed on a re-run")
	}
	// 10 bursts of 2000 readings at 200/s thinned to 40/s: 400 each.
	want := map[string]int64{"stations": 1, "captures": 1, "transmitters": 2, "bursts": 10,
		"level_readings": 10 * 400, "headings": 6000, "bearings": 10, "schedules": 2, "fixes": 1, "fix_lines": 1, "open_readings": 0}
	if !reflect.DeepEqual(second, want) {
		t.Errorf("counts %v, want %v", second, want)
	}
	db.Close()
	for table, n := range want {
		// sqlite3 (Debian 3.40) counts the rows our build of SQLite wrote.
		if got := sqliteCLI(t, path, "SELECT count(*) FROM "+table); got != strconv.FormatInt(n, 10) {
			t.Errorf("sqlite3: %s has %s rows, want %d", table, got, n)
		}
	}
	mustIntegrity(t, path)
}

// TestRerunOtherThinning: a re-run with another reading rate replaces the
// burst's readings instead of adding the new ones beside the old.
func TestRerunOtherThinning(t *testing.T) {
	db, _ := newDB(t)
	_, c := scene(t, db, "Kestrel Ridge", 45.1, 6.1, 1)
	b, lv := burstAt(c, 0, "N0CALL/1")
	for _, rate := range []float64{40, 20, 40} {
		w, err := db.NewWriter(WriterOptions{ReadingsPerS: rate})
		if err != nil {
			t.Fatal(err)
		}
		if err := w.AddBurst(b, lv); err != nil {
			t.Fatal(err)
		}
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
		got, err := db.Readings(1)
		if err != nil {
			t.Fatal(err)
		}
		if want := int(10 * rate); len(got) != want {
			t.Errorf("at %v/s: %d readings stored, want %d", rate, len(got), want)
		}
	}
}

// TestSQLiteCLIReadsSchema: the sqlite3 program sees the schema, version
// and indexes the package documents.
func TestSQLiteCLIReadsSchema(t *testing.T) {
	db, path := newDB(t)
	writeRecording(t, db, 4)
	db.Close()
	if got := sqliteCLI(t, path, "PRAGMA user_version"); got != strconv.Itoa(SchemaVersion) {
		t.Errorf("sqlite3: user_version %s, want %d", got, SchemaVersion)
	}
	if got := sqliteCLI(t, path, "PRAGMA application_id"); got != strconv.Itoa(ApplicationID) {
		t.Errorf("sqlite3: application_id %s, want %d", got, ApplicationID)
	}
	if got := sqliteCLI(t, path, "PRAGMA journal_mode"); got != "wal" {
		t.Errorf("sqlite3: journal_mode %s, want wal (persistent in the file)", got)
	}
	tables := strings.Fields(sqliteCLI(t, path, "SELECT name FROM sqlite_schema WHERE type = 'table' ORDER BY name"))
	wantTables := append([]string(nil), Tables...)
	sortStrings(wantTables)
	if !reflect.DeepEqual(tables, wantTables) {
		t.Errorf("sqlite3: tables %v, want %v", tables, wantTables)
	}
	idx := sqliteCLI(t, path, "SELECT name FROM sqlite_schema WHERE type = 'index' AND name NOT LIKE 'sqlite_%' ORDER BY name")
	for _, want := range []string{"bearings_station_tx_time", "bearings_tx_time", "bursts_tx_time", "fixes_tx_to"} {
		if !strings.Contains(idx, want) {
			t.Errorf("sqlite3: index %s missing from %q", want, idx)
		}
	}
	// Every numeric column name carries a unit or is a count, index,
	// flag or text: a guard on the naming rule.
	for _, table := range Tables {
		cols := sqliteCLI(t, path, "SELECT name || ' ' || type FROM pragma_table_info('"+table+"')")
		for _, line := range strings.Split(cols, "\n") {
			name, typ, _ := strings.Cut(line, " ")
			if typ == "REAL" && !hasUnit(name) {
				t.Errorf("%s.%s is REAL without a unit in its name", table, name)
			}
		}
	}
	// A value written through the package, read by sqlite3.
	got := sqliteCLI(t, path, "SELECT printf('%.1f %.1f %s', bearing_true_deg, bearing_magnetic_deg, warnings) FROM bearings ORDER BY time_unix_ns LIMIT 1")
	if want := "102.5 100.0 first warning\nsecond"; got != want {
		t.Errorf("sqlite3: first bearing %q, want %q", got, want)
	}
	mustIntegrity(t, path)
}

func hasUnit(col string) bool {
	for _, u := range []string{"_deg", "_m", "_hz", "_s", "_dbfs", "_db", "_m2", "_ppm", "_fraction", "confidence", "probability", "chi2", "variance_factor", "wpm", "readings_per_s"} {
		if strings.HasSuffix(col, u) {
			return true
		}
	}
	return false
}

func sortStrings(s []string) {
	for i := 1; i < len(s); i++ {
		for j := i; j > 0 && s[j] < s[j-1]; j-- {
			s[j], s[j-1] = s[j-1], s[j]
		}
	}
}

// TestMigrateOlder: a database at schema version 1 — written by this
// package with only the first step, checked by the sqlite3 program — is
// migrated on Open and keeps its rows.
func TestMigrateOlder(t *testing.T) {
	path := filepath.Join(t.TempDir(), "old.db")
	old, err := open(path, Options{BusyTimeout: DefaultBusyTimeout}, migrations[:1])
	if err != nil {
		t.Fatal(err)
	}
	_, c := scene(t, old, "Kestrel Ridge", 45.1, 6.1, 1)
	w, err := old.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	b, lv := burstAt(c, 0, "N0CALL/1")
	if err := w.AddBurst(b, lv); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	old.Close()
	if got := sqliteCLI(t, path, "PRAGMA user_version"); got != "1" {
		t.Fatalf("sqlite3: old database has user_version %s, want 1", got)
	}
	if got := sqliteCLI(t, path, "SELECT count(*) FROM sqlite_schema WHERE name = 'bearings'"); got != "0" {
		t.Fatalf("old database already has bearings")
	}
	db, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if v, _ := db.Version(); v != SchemaVersion {
		t.Errorf("after Open: version %d, want %d", v, SchemaVersion)
	}
	bs, err := db.BurstsOfCapture(c)
	if err != nil || len(bs) != 1 || bs[0].Ident != "N0CALL/1" {
		t.Errorf("bursts after migration: %v %v", bs, err)
	}
	db.Close()
	if got := sqliteCLI(t, path, "SELECT count(*) FROM level_readings"); got != "400" {
		t.Errorf("sqlite3: %s readings after migration, want 400", got)
	}
	mustIntegrity(t, path)
}

// TestMigrationStepAtomic: a failing step leaves the database at the
// previous version with nothing of the step applied.
func TestMigrationStepAtomic(t *testing.T) {
	path := filepath.Join(t.TempDir(), "m.db")
	steps := []migration{migrations[0], {2, "broken", "CREATE TABLE half_done (a); CREATE TABLE half_done (a);"}}
	_, err := open(path, Options{BusyTimeout: DefaultBusyTimeout}, steps)
	if err == nil || !strings.Contains(err.Error(), "schema step 2 (broken)") {
		t.Fatalf("broken step: %v", err)
	}
	if got := sqliteCLI(t, path, "PRAGMA user_version"); got != "1" {
		t.Errorf("sqlite3: user_version %s after a failed step 2, want 1", got)
	}
	if got := sqliteCLI(t, path, "SELECT count(*) FROM sqlite_schema WHERE name = 'half_done'"); got != "0" {
		t.Errorf("the failed step left its table behind")
	}
	mustIntegrity(t, path)
}

// TestRefuseNewerAndForeign: a database from a newer nullseek, and an
// SQLite database of another program, are refused and left untouched.
func TestRefuseNewerAndForeign(t *testing.T) {
	db, path := newDB(t)
	db.Close()
	newer := SchemaVersion + 5
	sqliteCLI(t, path, fmt.Sprintf("PRAGMA user_version = %d", newer))
	_, err := Open(path, Options{})
	if !errors.Is(err, ErrSchemaNewer) || !strings.Contains(err.Error(), fmt.Sprintf("schema version %d", newer)) {
		t.Errorf("newer database: %v", err)
	}
	if got := sqliteCLI(t, path, "PRAGMA user_version"); got != strconv.Itoa(newer) {
		t.Errorf("refused database was changed: user_version %s", got)
	}
	foreign := filepath.Join(t.TempDir(), "other.db")
	sqliteCLI(t, foreign, "CREATE TABLE recipes (name TEXT); INSERT INTO recipes VALUES ('soup')")
	if _, err := Open(foreign, Options{}); !errors.Is(err, ErrNotStore) {
		t.Errorf("foreign database: %v", err)
	}
	if got := sqliteCLI(t, foreign, "SELECT count(*) FROM sqlite_schema"); got != "1" {
		t.Errorf("foreign database was changed: %s schema rows", got)
	}
	junk := filepath.Join(t.TempDir(), "junk.db")
	os.WriteFile(junk, []byte(strings.Repeat("not a database ", 400)), 0o644)
	if _, err := Open(junk, Options{}); !errors.Is(err, ErrNotStore) {
		t.Errorf("a text file: %v", err)
	}
	if _, err := Open(filepath.Join(t.TempDir(), "absent.db"), Options{ReadOnly: true}); err == nil {
		t.Errorf("read-only open of a missing file succeeded")
	}
}

// TestBadRowsRefused: NaN, out-of-range and dangling rows are refused at
// once with ErrBadRow, and the writer carries on with the good rows.
func TestBadRowsRefused(t *testing.T) {
	db, _ := newDB(t)
	st, c := scene(t, db, "Kestrel Ridge", 45.1, 6.1, 1)
	w, err := db.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	b, lv := burstAt(c, 0, "N0CALL/1")
	nan := b
	nan.LevelDBFS = math.NaN()
	badLv := append([]LevelReading(nil), lv...)
	badLv[7].LevelDBFS = math.Inf(-1)
	unsorted := append([]LevelReading(nil), lv...)
	unsorted[3], unsorted[4] = unsorted[4], unsorted[3]
	noCap := b
	noCap.Capture = 99
	for name, err := range map[string]error{
		"NaN level":       w.AddBurst(nan, lv),
		"-Inf reading":    w.AddBurst(b, badLv),
		"unsorted":        w.AddBurst(b, unsorted),
		"no capture":      w.AddBurst(noCap, lv),
		"heading 360":     w.AddHeadings(c, RefTrue, []HeadingSample{{TimeS: 1, Deg: 360}}),
		"heading ref":     w.AddHeadings(c, "grid", []HeadingSample{{TimeS: 1, Deg: 3}}),
		"bearing NaN":     w.AddBearing(Bearing{Capture: c, BurstStartSample: b.StartSample, Station: st, TrueDeg: math.NaN(), SigmaDeg: 3}),
		"bearing sigma 0": w.AddBearing(Bearing{Capture: c, BurstStartSample: b.StartSample, Station: st, TrueDeg: 3, SigmaDeg: 0}),
		"no burst":        w.AddBearing(Bearing{Capture: c, BurstStartSample: 12345, Station: st, TrueDeg: 3, SigmaDeg: 3, StationLatDeg: 1, StationLonDeg: 1}),
	} {
		if !errors.Is(err, ErrBadRow) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: %v, want one line wrapping ErrBadRow", name, err)
		}
	}
	if err := w.AddBurst(b, lv); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if n, _ := db.Counts(); n["bursts"] != 1 || n["level_readings"] != 400 || n["headings"] != 0 || n["bearings"] != 0 {
		t.Errorf("after bad rows: %v", n)
	}
	for name, err := range map[string]error{
		"station no name": func() error { _, err := db.PutStation(Station{PositionSource: PositionFixed}); return err }(),
		"fixed no pos":    func() error { _, err := db.PutStation(Station{Name: "x", PositionSource: PositionFixed}); return err }(),
		"lat 91": func() error {
			_, err := db.PutStation(Station{Name: "x", LatDeg: ptr(91), LonDeg: ptr(0), PositionSource: PositionFixed})
			return err
		}(),
		"capture hash": func() error { _, err := db.PutCapture(Capture{SampleRateHz: 1, FileSHA256: "abc"}); return err }(),
		"schedule NaN": db.PutSchedules([]Schedule{{Ident: "N0CALL/1", AsOf: t0, PeriodS: ptr(math.NaN())}}),
		"fix prob 1": func() error {
			_, err := db.PutFix(Fix{Ident: "N0CALL/1", From: t0, To: t0, Probability: 1})
			return err
		}(),
	} {
		if !errors.Is(err, ErrBadRow) {
			t.Errorf("%s: %v, want ErrBadRow", name, err)
		}
	}
}
