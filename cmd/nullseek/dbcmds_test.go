package main

import (
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"nullseek/internal/angle"
	"nullseek/internal/testtool"
	"nullseek/store"
)

// The database round trip's invented scene: one keyed N0CALL beacon and
// two stations with turning Yagis. The bearings are GeographicLib's
// (GeodSolve -i, the inverse geodesic on WGS84), so the recordings GNU
// Radio makes carry the bearings a real pair of stations would measure.
var (
	dbTx       = [2]float64{52.20, 5.90}
	dbStations = []struct {
		name     string
		lat, lon float64
		seed     string
	}{{"ridge-a", 52.24, 5.86, "11"}, {"ridge-b", 52.18, 5.83, "12"}}
)

// geodInverse1 is geodInverse (GeodSolve -i) for one pair of points.
func geodInverse1(t *testing.T, lat1, lon1, lat2, lon2 float64) (azi, distM float64) {
	t.Helper()
	a, d := geodInverse(t, [][4]float64{{lat1, lon1, lat2, lon2}})
	return a[0], d[0]
}

// sqliteCount is `SELECT count(*) FROM table` through the sqlite3 CLI.
func sqliteCount(t *testing.T, db, table string) int64 {
	t.Helper()
	n, err := strconv.ParseInt(sqlite(t, db, "SELECT count(*) FROM "+table+";"), 10, 64)
	if err != nil {
		t.Fatal(err)
	}
	return n
}

// sqlite runs one statement through the sqlite3 CLI and returns its
// output, trimmed.
func sqlite(t *testing.T, db, sql string) string {
	t.Helper()
	bin := testtool.Need(t, "sqlite3", "-version")
	out, err := exec.Command(bin, db, sql).CombinedOutput()
	if err != nil {
		t.Fatalf("sqlite3 %s %q: %v\n%s", db, sql, err, out)
	}
	return strings.TrimSpace(string(out))
}

// storeCounts are the rows per table as the store counts them.
func storeCounts(t *testing.T, path string) map[string]int64 {
	t.Helper()
	db, err := store.Open(path, store.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	c, err := db.Counts()
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// checkStore checks the database with SQLite's own PRAGMA integrity_check
// and that the sqlite3 CLI counts the rows the store does.
func checkStore(t *testing.T, path string) map[string]int64 {
	t.Helper()
	if got := sqlite(t, path, "PRAGMA integrity_check;"); got != "ok" {
		t.Fatalf("PRAGMA integrity_check of %s: %s", path, got)
	}
	c := storeCounts(t, path)
	for _, tab := range store.Tables {
		if n := sqliteCount(t, path, tab); n != c[tab] {
			t.Errorf("%s: sqlite3 counts %d rows, store.Counts %d", tab, n, c[tab])
		}
	}
	return c
}

// dbLines decodes the JSON lines of out, checking each has a "type".
func dbLines(t *testing.T, out string) []map[string]any {
	t.Helper()
	var lines []map[string]any
	for _, l := range strings.Split(strings.TrimSpace(out), "\n") {
		if l == "" {
			continue
		}
		var m map[string]any
		if err := json.Unmarshal([]byte(l), &m); err != nil {
			t.Fatalf("not a JSON line: %q: %v", l, err)
		}
		if m["type"] == nil {
			t.Errorf("JSON line without a type: %s", l)
		}
		lines = append(lines, m)
	}
	return lines
}

// TestCLIDatabaseRoundTrip: two stations' recordings, made by GNU Radio
// 3.10 (make_rotating.py: N0CALL keyed at 18 WPM in 10 s bursts every
// 19 s, a Yagi swept 12 °/s back and forth over 120° about the beacon), are surveyed with --station-file and
// --db; the same runs again add no row (store.Counts and the sqlite3 CLI
// agree, PRAGMA integrity_check says ok); the stored bearings are
// GeodSolve's azimuths from each station; `fix --db` puts the beacon where
// it is; `slots` from the database finds the 19 s cycle the script keyed;
// `query schedule` gives the schedule as it stood before and after.
func TestCLIDatabaseRoundTrip(t *testing.T) {
	dir := t.TempDir()
	for _, st := range dbStations {
		azi, _ := geodInverse1(t, st.lat, st.lon, dbTx[0], dbTx[1])
		makeRotating(t, filepath.Join(dir, st.name), "--rate", "96000", "--seconds", "62", "--bursts", "10:9", "--first-on", "1",
			"--keyed", "18", "--pattern", "yagi", "--sweep", "backforth", "--arc", "120", "--turn-rate", "12",
			"--start-heading", strconv.FormatFloat(angle.Wrap360(azi-60), 'f', 3, 64), "--bearing", strconv.FormatFloat(azi, 'f', 3, 64),
			"--snr", "30", "--seed", st.seed)
		toml := fmt.Sprintf(`name = %q
database = "log.db"
[position]
source = "fixed"
lat_lon = "%v, %v"
[antenna]
kind = "yagi"
[receiver]
source = "rtl_tcp://127.0.0.1:1234"
sample_rate = "2.4M"
gain_db = 30
[[channel]]
freq = "144.825MHz"
ids = ["N0CALL"]
[heading]
source = "log"
reference = "true"
log = "%s/rotating_loop_heading.csv"
`, st.name, st.lat, st.lon, st.name)
		if err := os.WriteFile(filepath.Join(dir, st.name+".toml"), []byte(toml), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	db := filepath.Join(dir, "log.db")
	rec := func(st string) string { return filepath.Join(dir, st, "rotating_loop.sigmf-meta") }
	run := func(args ...string) cliResult {
		t.Helper()
		r := cliRun(t, dir, args...)
		if r.code != 0 {
			t.Fatalf("%s: exit %d\n%s", strings.Join(args, " "), r.code, r.stderr)
		}
		return r
	}
	survey := func() {
		for _, st := range dbStations {
			sf := st.name + ".toml"
			run("bearing", rec(st.name), "--station-file", sf, "--bearings-csv", st.name+".csv")
			run("slots", rec(st.name), "--station-file", sf)
		}
	}
	survey()
	first := checkStore(t, db)
	survey()
	again := checkStore(t, db)
	for _, tab := range store.Tables {
		if first[tab] != again[tab] {
			t.Errorf("%s: %d rows after one run, %d after the same runs again", tab, first[tab], again[tab])
		}
	}
	t.Logf("rows after each run: %v", again)
	for tab, min := range map[string]int64{"stations": 2, "captures": 2, "transmitters": 1, "bursts": 6, "level_readings": 1000, "headings": 100, "bearings": 6, "schedules": 1} {
		if again[tab] < min {
			t.Errorf("%s: %d rows, want at least %d", tab, again[tab], min)
		}
	}
	// The flag given wins over the file's database, and the CSV names the station.
	other := filepath.Join(dir, "other.db")
	run("scan", rec("ridge-a"), "--station-file", "ridge-a.toml", "--db", other)
	if c := checkStore(t, other); c["bursts"] == 0 || c["bearings"] != 0 {
		t.Errorf("scan --db other.db: %v (want bursts and no bearings)", c)
	}
	if b, err := os.ReadFile(filepath.Join(dir, "ridge-a.csv")); err != nil || !strings.Contains(string(b), "N0CALL,ridge-a,") {
		t.Errorf("bearings CSV does not name the station: %s %v", b, err)
	}

	// Stored bearings against GeographicLib's azimuths.
	r := run("query", "bearings", "--db", db, "--json", "--ident", "N0CALL")
	seen := map[string]int{}
	for _, l := range dbLines(t, r.stdout) {
		name, _ := l["station"].(string)
		var want float64
		for _, st := range dbStations {
			if st.name == name {
				want, _ = geodInverse1(t, st.lat, st.lon, dbTx[0], dbTx[1])
			}
		}
		got, _ := l["bearing_deg"].(float64)
		if e := angle.Wrap180(got - want); e > 2 || e < -2 {
			t.Errorf("stored bearing at %s: %.1f°, GeodSolve azimuth %.2f° (error %.1f°)", name, got, want, e)
		}
		if ts, _ := l["time"].(string); !strings.HasPrefix(ts, "2025-01-01T00:") || !strings.HasSuffix(ts, "Z") {
			t.Errorf("bearing time %q: want UTC RFC 3339 on the recording's clock", ts)
		}
		if ty, _ := l["type"].(string); ty != "stored_bearing" || l["reference"] != "true" || l["lat"] == nil {
			t.Errorf("stored bearing line: type %v, reference %v, lat %v; want stored_bearing, true and the station's latitude", l["type"], l["reference"], l["lat"])
		}
		seen[name]++
	}
	if seen["ridge-a"] < 3 || seen["ridge-b"] < 3 {
		t.Errorf("bearings per station: %v, want at least 3 each", seen)
	}
	// A window selects: the first 10 s hold one burst per station.
	r = run("query", "bearings", "--db", db, "--from", "2025-01-01T00:00:00Z", "--to", "2025-01-01T00:00:10Z", "--station-name", "ridge-b")
	if !strings.Contains(r.stdout, "ridge-b") || strings.Contains(r.stdout, "ridge-a") || !strings.Contains(r.stdout, "1 bearings") {
		t.Errorf("query of ridge-b's first 10 s:\n%s", r.stdout)
	}

	// The fix from the database, against where the beacon is.
	r = run("fix", "--db", db, "--json")
	var fixed bool
	for _, l := range dbLines(t, r.stdout) {
		if l["type"] != "fix" {
			continue
		}
		lat, _ := l["lat"].(float64)
		lon, _ := l["lon"].(float64)
		_, d := geodInverse1(t, lat, lon, dbTx[0], dbTx[1])
		if d > 300 {
			t.Errorf("fix from the database %.5f, %.5f is %.0f m from the beacon", lat, lon, d)
		}
		fixed = true
	}
	if !fixed || !strings.Contains(r.stderr, "1 fixes") {
		t.Errorf("fix --db: no fix stored\n%s\n%s", r.stdout, r.stderr)
	}
	if c := checkStore(t, db); c["fixes"] != 1 || c["fix_lines"] != 2 {
		t.Errorf("after fix --db: %d fixes, %d lines (want one, with a line per station)", c["fixes"], c["fix_lines"])
	}

	// The slot schedule from the stored bursts: the script keys a 19 s cycle.
	r = run("slots", "--db", db, "--station-name", "ridge-a", "--json")
	var plan struct {
		Transmitters []struct {
			Ident   string  `json:"ident"`
			PeriodS float64 `json:"period_s"`
		} `json:"transmitters"`
	}
	if err := json.Unmarshal([]byte(r.stdout), &plan); err != nil || len(plan.Transmitters) != 1 {
		t.Fatalf("slots --db: %v\n%s", err, r.stdout)
	}
	if p := plan.Transmitters[0].PeriodS; p < 18.95 || p > 19.05 {
		t.Errorf("slots --db: period %.3f s, the recording keys one every 19 s", p)
	}
	if r := cliRun(t, dir, "slots", "--db", db); r.code != 1 || !strings.Contains(r.stderr, "--station-name") {
		t.Errorf("slots --db over two stations: exit %d, %s (want a refusal naming --station-name)", r.code, r.stderr)
	}
	// The stored schedule as it stood: nothing before the recordings, 19 s after.
	r = run("query", "schedule", "--db", db, "--at", "2024-12-31T23:00:00Z", "--json")
	if strings.TrimSpace(r.stdout) != "" {
		t.Errorf("schedule before the recordings: %s", r.stdout)
	}
	r = run("query", "schedule", "--db", db, "--at", "2025-01-01T01:00:00Z", "--json")
	ls := dbLines(t, r.stdout)
	if len(ls) != 1 || ls[0]["type"] != "stored_schedule" || ls[0]["order"] != 1.0 || ls[0]["ident"] != "N0CALL" {
		t.Fatalf("schedule after the recordings: %s", r.stdout)
	}
	if p, _ := ls[0]["period_s"].(float64); p < 18.95 || p > 19.05 {
		t.Errorf("stored schedule: period %v s, want 19", ls[0]["period_s"])
	}
}

// TestCLIDatabaseBadInput: a bad database, time or station file is one
// error line naming it, and no database is left behind by a refused run.
func TestCLIDatabaseBadInput(t *testing.T) {
	dir := t.TempDir()
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"query", "bearings", "--db", "missing.db"}, "missing.db"},
		{[]string{"query"}, "bearings or schedule"},
		{[]string{"query", "fixes"}, "bearings or schedule"},
		{[]string{"query", "bearings"}, "--db"},
		{[]string{"query", "bearings", "--db", "x.db", "--from", "yesterday"}, "--from"},
		{[]string{"query", "schedule", "--db", "x.db", "--at", "2025-01-01 00:00"}, "--at"},
		{[]string{"fix"}, "--db"},
		{[]string{"slots", "--db", "missing.db"}, "missing.db"},
		{[]string{"scan", abs(t, stepsMeta), "--offset", stepsOffset, "--db", filepath.Join(dir, "no", "dir", "x.db")}, "--db"},
		{[]string{"scan", abs(t, stepsMeta), "--station-file", "nope.toml"}, "nope.toml"},
		// A good --db with a run that fails after it was checked: the
		// database is not created (the check removes what it made).
		{[]string{"scan", "missing.sigmf-meta", "--db", "fresh.db"}, "missing.sigmf-meta"},
		{[]string{"scan", abs(t, stepsMeta), "--offset", "NaN", "--db", "fresh.db"}, "--offset"},
		{[]string{"slots", abs(t, stepsMeta), "--offset", stepsOffset, "--ids", "@nope.txt", "--db", "fresh.db"}, "--ids"},
		{[]string{"fix", "missing.csv", "--db", "fresh.db"}, "missing.csv"},
	} {
		r := cliRun(t, dir, c.args...)
		lines := strings.Split(strings.TrimSpace(r.stderr), "\n")
		if r.code != 1 || !strings.HasPrefix(lines[len(lines)-1], "nullseek: ") || !strings.Contains(r.stderr, c.want) {
			t.Errorf("%s: exit %d, stderr %q (want one error naming %s)", strings.Join(c.args, " "), r.code, r.stderr, c.want)
		}
	}
	if names := cliFiles(t, dir); len(names) != 0 {
		t.Errorf("refused runs left %v", names)
	}
}

// TestCLIScanDatabaseIdempotent: scan --db on the committed steps96k
// recording (testdata/bursts, made by make_bursts.py) twice: the same
// rows, and as many bursts as scan printed.
func TestCLIScanDatabaseIdempotent(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "s.db")
	var counts []map[string]int64
	for i := 0; i < 2; i++ {
		r := cliRun(t, dir, "scan", abs(t, stepsMeta), "--offset", stepsOffset, "--db", db, "--json")
		if r.code != 0 {
			t.Fatalf("scan --db: %s", r.stderr)
		}
		bursts := 0
		for _, l := range dbLines(t, r.stdout) {
			if l["type"] == "burst" {
				bursts++
			}
		}
		c := checkStore(t, db)
		if c["bursts"] != int64(bursts) || c["captures"] != 1 || c["level_readings"] == 0 {
			t.Errorf("run %d: scan printed %d bursts, the store holds %v", i+1, bursts, c)
		}
		counts = append(counts, c)
	}
	for _, tab := range store.Tables {
		if counts[0][tab] != counts[1][tab] {
			t.Errorf("%s: %d rows, then %d after the same scan again", tab, counts[0][tab], counts[1][tab])
		}
	}
}
