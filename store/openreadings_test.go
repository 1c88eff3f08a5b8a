package store

import (
	"fmt"
	"math"
	"path/filepath"
	"testing"
)

// openTrack is n readings at 40 a second of a carrier at -40 dBFS on a
// 2.4 MS/s capture, from startS (the rate ThinLevels keeps, so they are
// stored as they are).
func openTrack(startS float64, n int) []LevelReading {
	const rate = 2.4e6
	lv := make([]LevelReading, n)
	for i := range lv {
		ts := startS + float64(i)/40
		lv[i] = LevelReading{Sample: int64(math.Round(ts * rate)), TimeS: ts, LevelDBFS: -40 + float64(i%2)}
	}
	return lv
}

// TestOpenReadingsMoveToBurst: a long transmission's readings, written in
// pieces while it is on, are in open_readings (read with the sqlite3
// program) after the flush; writing its burst moves the ones inside it to
// the burst with its readings rate, and drops the capture's open readings
// up to the release sample — also those outside the burst — but not later
// ones. SQLite's integrity check passes.
func TestOpenReadingsMoveToBurst(t *testing.T) {
	db, path := newDB(t)
	_, c := scene(t, db, "Open", 45, 6, 1)
	w, err := db.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	track := openTrack(100, 1200) // 30 s from 100 s
	for i := 0; i < len(track); i += 400 {
		if err := w.AddOpenReadings(c, -70, track[i:i+400]); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	if got := sqliteCLI(t, path, "SELECT count(*), min(t_s), max(noise_dbfs) FROM open_readings"); got != "1200|100.0|-70.0" {
		t.Fatalf("sqlite3: open readings %q, want 1200|100.0|-70.0", got)
	}
	// The burst is 101…125 s; release through 126 s.
	b, _ := burstAt(c, 0, "N0CALL/1")
	b.StartS, b.EndS = 101, 125
	b.StartSample, b.EndSample = int64(101*2.4e6), int64(125*2.4e6)
	b.Start, b.End = t0.Add(101e9), t0.Add(125e9)
	if err := w.AddBurstFromOpen(b, b.StartSample, b.EndSample, int64(126*2.4e6)); err != nil {
		t.Fatal(err)
	}
	if err := w.AddBearing(Bearing{Capture: c, BurstStartSample: b.StartSample, Station: 1, TrueDeg: 10, SigmaDeg: 3,
		StationLatDeg: 45, StationLonDeg: 6}); err != nil {
		t.Fatalf("a bearing of the burst written from open readings: %v", err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	// 24 s at 40/s, both ends included: 961 readings.
	if got := sqliteCLI(t, path, "SELECT count(*), min(r.t_s), max(r.t_s), round(b.readings_per_s, 3) FROM level_readings r JOIN bursts b ON b.id = r.burst_id"); got != "961|101.0|125.0|40.0" {
		t.Errorf("sqlite3: the burst's readings %q, want 961|101.0|125.0|40.0", got)
	}
	// Open readings after 126 s stay: 126.025 … 129.975 s, 159 of them.
	if got := sqliteCLI(t, path, "SELECT count(*), min(t_s) FROM open_readings"); got != "159|126.025" {
		t.Errorf("sqlite3: open readings left %q, want 159|126.025", got)
	}
	mustIntegrity(t, path)
}

// TestOpenReadingsMoveBounds: the readings moved are those between the
// bounds given, not the burst's edges (a caller passes the windows wholly
// inside the burst); DropOpenReadings then leaves none of the capture's,
// and another capture's stay.
func TestOpenReadingsMoveBounds(t *testing.T) {
	db, path := newDB(t)
	_, c := scene(t, db, "Bounds", 45, 6, 1)
	_, c2 := scene(t, db, "Other", 45.1, 6, 2)
	w, err := db.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.AddOpenReadings(c, -70, openTrack(100, 400)); err != nil { // 100 … 109.975 s
		t.Fatal(err)
	}
	if err := w.AddOpenReadings(c2, -70, openTrack(0, 10)); err != nil {
		t.Fatal(err)
	}
	b, _ := burstAt(c, 0, "N0CALL/1")
	b.StartS, b.EndS = 101, 105
	b.StartSample, b.EndSample = int64(101*2.4e6), int64(105*2.4e6)
	b.Start, b.End = t0.Add(101e9), t0.Add(105e9)
	// Moved: 101.025 … 104.975 s (the edge readings are left out), 159.
	if err := w.AddBurstFromOpen(b, int64(101.01*2.4e6), int64(104.99*2.4e6), b.EndSample); err != nil {
		t.Fatal(err)
	}
	if err := w.DropOpenReadings(c); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if got := sqliteCLI(t, path, "SELECT count(*), min(t_s), max(t_s) FROM level_readings"); got != "159|101.025|104.975" {
		t.Errorf("sqlite3: the burst's readings %q, want 159|101.025|104.975", got)
	}
	if got := sqliteCLI(t, path, fmt.Sprintf("SELECT count(*) FROM open_readings WHERE capture_id = %d", c)); got != "0" {
		t.Errorf("sqlite3: %s open readings of the capture left after DropOpenReadings", got)
	}
	if got := sqliteCLI(t, path, fmt.Sprintf("SELECT count(*) FROM open_readings WHERE capture_id = %d", c2)); got != "10" {
		t.Errorf("sqlite3: %s open readings of the other capture, want its 10", got)
	}
	mustIntegrity(t, path)
}

// TestRecoverOpen: what a run that died left in open_readings becomes one
// burst per capture, cut at its end, unidentified, with the power-mean
// level (two readings of -40 and -39 dBFS average 10·log10((10^-4 +
// 10^-3.9)/2) = -39.471 dBFS) and the noise under it; its readings move to
// level_readings. A database without open readings is left alone.
func TestRecoverOpen(t *testing.T) {
	db, path := newDB(t)
	_, c := scene(t, db, "Died", 45, 6, 1)
	w, err := db.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.AddOpenReadings(c, -70, openTrack(10, 800)); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	n, err := db.RecoverOpen()
	if err != nil || n != 1 {
		t.Fatalf("RecoverOpen = %d, %v; want 1 burst", n, err)
	}
	bs, err := db.BurstsOfCapture(c)
	if err != nil || len(bs) != 1 {
		t.Fatalf("bursts %+v, %v", bs, err)
	}
	x := bs[0]
	if !x.CutAtEnd || x.Ident != "" || x.StartS != 10 || math.Abs(x.EndS-29.975) > 1e-9 ||
		math.Abs(x.LevelDBFS-(-39.4713)) > 1e-3 || x.PeakDBFS != -39 || math.Abs(x.NoiseDBFS+70) > 1e-9 ||
		!x.Start.Equal(t0.Add(10e9)) || math.Abs(x.ReadingsPerS-40) > 1e-9 {
		t.Errorf("recovered burst %+v", x)
	}
	if got := sqliteCLI(t, path, "SELECT (SELECT count(*) FROM level_readings), (SELECT count(*) FROM open_readings)"); got != "800|0" {
		t.Errorf("sqlite3: level and open readings %q, want 800|0", got)
	}
	if n, err := db.RecoverOpen(); err != nil || n != 0 {
		t.Errorf("a second RecoverOpen = %d, %v; want nothing to do", n, err)
	}
	mustIntegrity(t, path)
}

// TestMigrateV5OpenReadings: a version-4 database gains the empty
// open_readings table (sqlite3 lists it) and keeps its rows.
func TestMigrateV5OpenReadings(t *testing.T) {
	path := filepath.Join(t.TempDir(), "v4.db")
	old, err := open(path, Options{BusyTimeout: DefaultBusyTimeout}, migrations[:4])
	if err != nil {
		t.Fatal(err)
	}
	old.Close()
	sqliteCLI(t, path, "INSERT INTO transmitters (ident) VALUES ('N0CALL/1')")
	db, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if v, _ := db.Version(); v != SchemaVersion || SchemaVersion < 5 {
		t.Errorf("after Open: version %d (SchemaVersion %d), want every step (5 or later)", v, SchemaVersion)
	}
	if got := sqliteCLI(t, path, "SELECT (SELECT count(*) FROM sqlite_schema WHERE name = 'open_readings'), (SELECT count(*) FROM open_readings), (SELECT count(*) FROM transmitters)"); got != "1|0|1" {
		t.Errorf("sqlite3: %q, want the table, empty, and the transmitter kept (1|0|1)", got)
	}
	mustIntegrity(t, path)
}
