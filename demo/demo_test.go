package demo

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"nullseek/geo"
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
	var out bytes.Buffer
	if err := Run(context.Background(), &out, nil, dir, false, ""); err != nil {
		t.Fatal(err)
	}
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
