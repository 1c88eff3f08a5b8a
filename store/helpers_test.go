package store

import (
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullseek/internal/testtool"
)

// TestMain runs a child role when the fault tests re-execute the test
// binary (see fault_test.go), and the tests otherwise.
func TestMain(m *testing.M) {
	if role := os.Getenv(childRoleEnv); role != "" {
		os.Exit(runChild(role))
	}
	os.Exit(m.Run())
}

// t0 is the invented scene's capture start.
var t0 = time.Date(2026, 5, 1, 9, 0, 0, 0, time.UTC)

func newDB(t testing.TB) (*DB, string) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "station.db")
	db, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	return db, path
}

func ptr(x float64) *float64 { return &x }

// hash64 is a stable fake SHA-256 for invented captures.
func hash64(n int) string { return fmt.Sprintf("%064x", n) }

// scene writes one invented station and capture and returns their ids.
func scene(t testing.TB, db *DB, name string, lat, lon float64, n int) (StationID, CaptureID) {
	t.Helper()
	st, err := db.PutStation(Station{Name: name, LatDeg: ptr(lat), LonDeg: ptr(lon), AltM: ptr(35),
		PositionSource: PositionFixed, Antenna: "loop", MountOffsetDeg: 12.5})
	if err != nil {
		t.Fatal(err)
	}
	c, err := db.PutCapture(Capture{Station: st, Source: name + ".sigmf-data", Format: "cu8", Start: t0,
		CentreHz: 144.5e6, SampleRateHz: 2.4e6, Samples: 2.4e6 * 600, FileSHA256: hash64(n), ChannelOffsetHz: 25e3})
	if err != nil {
		t.Fatal(err)
	}
	return st, c
}

// burstAt is the k-th invented burst of a capture: 10 s long every 60 s,
// with 200 readings a second of a level that dips once (a loop's null).
func burstAt(c CaptureID, k int, ident string) (Burst, []LevelReading) {
	const rate = 2.4e6
	startS := float64(k) * 60
	b := Burst{Capture: c, StartSample: int64(startS * rate), EndSample: int64((startS + 10) * rate),
		StartS: startS, EndS: startS + 10, Start: t0.Add(time.Duration(startS * float64(time.Second))),
		End: t0.Add(time.Duration((startS + 10) * float64(time.Second))), OffsetHz: 25e3 + 40, FreqHz: 144.525e6,
		LevelDBFS: -40, PeakDBFS: -35, NoiseDBFS: -70, SNRDB: 30, Mode: "fm", Text: ident + " " + ident,
		Ident: ident, IdentConfidence: 0.95, IdentMethod: "text", ToneHz: 800, WPM: 12}
	var lv []LevelReading
	for i := 0; i < 2000; i++ {
		ts := startS + float64(i)/200
		s := int64(math.Round(ts * rate))
		lv = append(lv, LevelReading{Sample: s, TimeS: ts, LevelDBFS: -40 - 20*math.Pow(math.Cos(math.Pi*float64(i)/2000), 40), Clipped: 0})
	}
	return b, lv
}

// sqliteCLI runs Debian's sqlite3 program on path with the given SQL and
// returns its output.
func sqliteCLI(t testing.TB, path string, args ...string) string {
	t.Helper()
	bin := testtool.Need(t, "sqlite3", "-version")
	out, err := exec.Command(bin, append([]string{path}, args...)...).CombinedOutput()
	if err != nil {
		t.Fatalf("sqlite3 %s %s: %v\n%s", path, strings.Join(args, " "), err, out)
	}
	return strings.TrimSpace(string(out))
}

// mustIntegrity checks the database with SQLite's own integrity check,
// through the sqlite3 program (an independent build of SQLite).
func mustIntegrity(t testing.TB, path string) {
	t.Helper()
	// SQLite "PRAGMA integrity_check": a sound database answers the single
	// row "ok".
	if got := sqliteCLI(t, path, "PRAGMA integrity_check"); got != "ok" {
		t.Fatalf("sqlite3 PRAGMA integrity_check on %s: %q, want ok", path, got)
	}
	if got := sqliteCLI(t, path, "PRAGMA foreign_key_check"); got != "" {
		t.Fatalf("sqlite3 PRAGMA foreign_key_check on %s: %q, want no rows", path, got)
	}
}
