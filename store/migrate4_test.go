package store

import (
	"errors"
	"fmt"
	"path/filepath"
	"testing"
	"time"
)

// TestMigrateV4ScheduleChannel: a version-3 database (made by this package
// with the first three steps) holding a schedule row written by the
// sqlite3 program keeps it
// through step 4 with channel_hz NULL — checked with the sqlite3 program,
// an outside reader of the file — and then stores each channel's schedule
// with its frequency; ScheduleAt reads both back, the old row as 0
// (unknown). PRAGMA integrity_check (SQLite's own) passes after.
func TestMigrateV4ScheduleChannel(t *testing.T) {
	path := filepath.Join(t.TempDir(), "v3.db")
	old, err := open(path, Options{BusyTimeout: DefaultBusyTimeout}, migrations[:3])
	if err != nil {
		t.Fatal(err)
	}
	old.Close()
	asOf := t0.Add(10 * time.Minute)
	sqliteCLI(t, path, fmt.Sprintf("INSERT INTO transmitters (ident) VALUES ('N0CALL/1'); "+
		"INSERT INTO schedules (transmitter_id, as_of_unix_ns, order_index, bursts, period_s) VALUES (1, %d, 0, 4, 60)", asOf.UnixNano()))
	if got := sqliteCLI(t, path, "PRAGMA user_version"); got != "3" {
		t.Fatalf("sqlite3: user_version %s, want 3", got)
	}

	db, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if v, _ := db.Version(); v != SchemaVersion || SchemaVersion < 4 {
		t.Errorf("after Open: version %d (SchemaVersion %d), want every step (4 or later)", v, SchemaVersion)
	}
	if err := db.PutSchedules([]Schedule{
		{Ident: "N0CALL/2", AsOf: asOf, Bursts: 3, PeriodS: ptr(60), ChannelHz: 144.525e6},
		{Ident: "N0CALL/3", AsOf: asOf, Bursts: 5, PeriodS: ptr(90), Order: 1, ChannelHz: 144.975e6},
	}); err != nil {
		t.Fatal(err)
	}
	got, err := db.ScheduleAt(asOf)
	if err != nil || len(got) != 3 {
		t.Fatalf("schedule: %+v %v", got, err)
	}
	want := map[string]float64{"N0CALL/1": 0, "N0CALL/2": 144.525e6, "N0CALL/3": 144.975e6}
	for _, s := range got {
		if s.ChannelHz != want[s.Ident] {
			t.Errorf("%s: channel %v Hz, want %v", s.Ident, s.ChannelHz, want[s.Ident])
		}
	}
	if got := sqliteCLI(t, path, "SELECT count(*) FROM schedules WHERE channel_hz IS NULL"); got != "1" {
		t.Errorf("sqlite3: %s schedule rows without a channel, want the 1 written before step 4", got)
	}
	if got := sqliteCLI(t, path, "SELECT channel_hz FROM schedules s JOIN transmitters t ON t.id = s.transmitter_id WHERE t.ident = 'N0CALL/3'"); got != "144975000.0" {
		t.Errorf("sqlite3: N0CALL/3's channel %s, want 144975000.0", got)
	}
	if err := db.PutSchedules([]Schedule{{Ident: "N0CALL/4", AsOf: asOf, ChannelHz: -1}}); !errors.Is(err, ErrBadRow) {
		t.Errorf("a negative channel frequency: %v, want ErrBadRow", err)
	}
	if got := sqliteCLI(t, path, "PRAGMA integrity_check"); got != "ok" {
		t.Errorf("sqlite3 integrity_check: %s", got)
	}
}
