package store

import (
	"math"
	"path/filepath"
	"testing"
)

// TestMigrateV3NoPosition: a version-2 database holding a bearing (written
// by this package with the first two steps) is rebuilt by step 3 without
// losing it, and then keeps a bearing with no station position as NULLs —
// checked with the sqlite3 program, an outside reader of the file — and
// reads it back as NoPosition with NaN coordinates. A half-given position
// is refused by the table's CHECK.
func TestMigrateV3NoPosition(t *testing.T) {
	path := filepath.Join(t.TempDir(), "v2.db")
	old, err := open(path, Options{BusyTimeout: DefaultBusyTimeout}, migrations[:2])
	if err != nil {
		t.Fatal(err)
	}
	st, c := scene(t, old, "Kestrel Ridge", 45.1, 6.1, 1)
	w, err := old.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	b0, lv0 := burstAt(c, 0, "N0CALL/1")
	b1, lv1 := burstAt(c, 1, "N0CALL/1")
	for _, x := range []struct {
		b  Burst
		lv []LevelReading
	}{{b0, lv0}, {b1, lv1}} {
		if err := w.AddBurst(x.b, x.lv); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.AddBearing(Bearing{Capture: c, BurstStartSample: b0.StartSample, Station: st, TrueDeg: 12, SigmaDeg: 2,
		StationLatDeg: 45.1, StationLonDeg: 6.1, StationAltM: ptr(35)}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	old.Close()
	if got := sqliteCLI(t, path, "PRAGMA user_version"); got != "2" {
		t.Fatalf("sqlite3: user_version %s, want 2", got)
	}

	db, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if v, _ := db.Version(); v != SchemaVersion || SchemaVersion < 3 {
		t.Errorf("after Open: version %d (SchemaVersion %d), want every step (3 or later)", v, SchemaVersion)
	}
	w, err = db.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.AddBearing(Bearing{Capture: c, BurstStartSample: b1.StartSample, Station: st, TrueDeg: 14, SigmaDeg: 2,
		NoPosition: true, StationLatDeg: 99}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	bs, err := db.Bearings(BearingQuery{Station: "Kestrel Ridge"})
	if err != nil || len(bs) != 2 {
		t.Fatalf("bearings: %v %v", bs, err)
	}
	if bs[0].NoPosition || bs[0].StationLatDeg != 45.1 || bs[0].StationLonDeg != 6.1 || bs[0].StationAltM == nil || *bs[0].StationAltM != 35 {
		t.Errorf("the migrated bearing lost its position: %+v", bs[0])
	}
	if !bs[1].NoPosition || !math.IsNaN(bs[1].StationLatDeg) || !math.IsNaN(bs[1].StationLonDeg) || bs[1].StationAltM != nil {
		t.Errorf("bearing without position read back as %+v", bs[1])
	}
	if got := sqliteCLI(t, path, "SELECT count(*) FROM bearings WHERE station_lat_deg IS NULL AND station_lon_deg IS NULL AND station_alt_m IS NULL"); got != "1" {
		t.Errorf("sqlite3: %s bearings without position, want 1", got)
	}
	if got := sqliteCLI(t, path, "SELECT count(*) FROM sqlite_schema WHERE type = 'index' AND name LIKE 'bearings_%'"); got != "2" {
		t.Errorf("sqlite3: %s bearing indexes after the rebuild, want 2", got)
	}
	if _, err := db.sql.Exec("UPDATE bearings SET station_lat_deg = 1 WHERE station_lon_deg IS NULL"); err == nil {
		t.Error("a latitude without a longitude was accepted")
	}
	mustIntegrity(t, path)
}
