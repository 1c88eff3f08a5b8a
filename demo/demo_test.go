package demo

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"nullseek/geo"
	"nullseek/internal/testtool"
)

// TestRunFiles: the demo writes every file its report names, a bearings
// CSV that the fix input reader (geo.ReadBearingsCSV, the same reader
// `nullseek fix` uses) reads back, and its report only once all are
// written; a cancelled run leaves no folder and prints nothing. (The
// scene is invented: its numbers are not a reference; the outside checks
// of each stage are in the packages that own them.)
func TestRunFiles(t *testing.T) {
	if testing.Short() {
		t.Skip("renders three stations' recordings")
	}
	dir := filepath.Join(t.TempDir(), "demo")
	db := filepath.Join(t.TempDir(), "demo.db")
	var out bytes.Buffer
	if err := Run(context.Background(), &out, nil, dir, false, db); err != nil {
		t.Fatal(err)
	}
	checkDB(t, db, out.String())
	for _, n := range []string{"bearings.csv", "fixes.geojson", "map.png"} {
		if fi, err := os.Stat(filepath.Join(dir, n)); err != nil || fi.Size() == 0 {
			t.Errorf("%s: %v", n, err)
		}
	}
	for _, pat := range []string{"polar-*.png", "headings-*.csv"} {
		if m, _ := filepath.Glob(filepath.Join(dir, pat)); len(m) == 0 {
			t.Errorf("no %s", pat)
		}
	}
	fh, err := os.Open(filepath.Join(dir, "bearings.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	recs, err := geo.ReadBearingsCSV(fh)
	if err != nil || len(recs) < 2 {
		t.Errorf("bearings.csv: %d rows, %v", len(recs), err)
	}
	if r := out.String(); !strings.Contains(r, "Fixes (95% ellipses") || !strings.Contains(r, "Try: nullseek fix") {
		t.Errorf("report:\n%s", r)
	}

	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	gone := filepath.Join(t.TempDir(), "demo")
	out.Reset()
	if err := Run(ctx, &out, nil, gone, false, ""); err == nil {
		t.Fatal("a cancelled demo succeeded")
	}
	if _, err := os.Stat(gone); !os.IsNotExist(err) || out.Len() != 0 {
		t.Errorf("a cancelled demo left %s (%v) or printed %q", gone, err, out.String())
	}
}

// checkDB: the database the demo logged to passes SQLite's own PRAGMA
// integrity_check (the sqlite3 CLI) and holds what the report printed:
// its stations, and a fix per transmitter the report fixed.
func checkDB(t *testing.T, db, report string) {
	t.Helper()
	bin := testtool.Need(t, "sqlite3", "-version")
	q := func(sql string) string {
		out, err := exec.Command(bin, db, sql).CombinedOutput()
		if err != nil {
			t.Fatalf("sqlite3 %q: %v\n%s", sql, err, out)
		}
		return strings.TrimSpace(string(out))
	}
	if got := q("PRAGMA integrity_check;"); got != "ok" {
		t.Fatalf("integrity_check: %s", got)
	}
	for _, name := range strings.Split(q("SELECT name FROM stations ORDER BY name;"), "\n") {
		if !strings.Contains(report, "Station "+name+" (") {
			t.Errorf("station %q stored but not in the report", name)
		}
	}
	fixed := strings.Count(report, "m from truth")
	if n := q("SELECT count(*) FROM fixes;"); n != strconv.Itoa(fixed) || fixed == 0 {
		t.Errorf("%s fixes stored, the report fixed %d", n, fixed)
	}
	if n := q("SELECT count(*) FROM bearings;"); n == "0" {
		t.Error("no bearings stored")
	}
}
