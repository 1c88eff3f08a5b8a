//go:build unix

package watch

import (
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullseek/internal/testtool"
	"nullseek/station"
	"nullseek/store"
)

// TestWatchDiskFull: the station's database fills up mid-watch (the store's
// size cap, Options.MaxBytes: SQLite's PRAGMA max_page_count, which makes
// SQLite answer SQLITE_FULL as a full disk does — store's
// TestDiskFullSizeCap and TestDiskFullFileSizeLimit check that it is the
// same fault). The watch stops long before the recording ends with one
// error line wrapping store.ErrDiskFull and naming the file once, and the
// sqlite3 program finds the database sound, holding what was committed.
func TestWatchDiskFull(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	meta := makeRecording(t, dir)
	rot, _ := testtool.Rotctld(t)
	sp := writeStation(t, dir, serve(t, meta), rot)
	st, err := station.Load(sp)
	if err != nil {
		t.Fatal(err)
	}
	db, err := store.Open(st.Database, store.Options{}) // the schema, then the cap above it
	if err != nil {
		t.Fatal(err)
	}
	db.Close()
	fi, err := os.Stat(st.Database)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("the database with its schema: %d bytes", fi.Size())
	db, err = store.Open(st.Database, store.Options{MaxBytes: fi.Size() + 8<<10})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	var log syncBuffer
	began := time.Now()
	sum, runErr := Run(t.Context(), Options{Station: st, DB: db, Log: &log, DurationS: recSeconds})
	took := time.Since(began)
	t.Logf("after %v: %v\nlog:\n%s", took.Round(time.Millisecond), runErr, log.String())
	if !errors.Is(runErr, store.ErrDiskFull) || strings.Contains(runErr.Error(), "\n") ||
		strings.Count(runErr.Error(), st.Database) != 1 {
		t.Fatalf("watch on a full database: %v; want one line naming %s once, wrapping store.ErrDiskFull", runErr, st.Database)
	}
	if took > (recSeconds-5)*time.Second {
		t.Errorf("the watch went on for %v after the database filled", took)
	}
	if sum == nil || sum.Committed.Rows() == 0 {
		t.Errorf("summary %+v: want the rows committed before the disk filled", sum)
	}
	db.Close()
	integrityCheck(t, st.Database)
}

// TestWatchReadOnly: the database becomes write-protected while the watch
// runs (the immutable attribute, chattr(1) of e2fsprogs, which the kernel
// enforces even against root — as store's TestReadOnly does; not the -shm
// file, which SQLite maps into memory). The watch stops with one error
// line wrapping store.ErrReadOnly, and once writable again the sqlite3
// program finds the file sound, with the first burst committed.
func TestWatchReadOnly(t *testing.T) {
	t.Parallel()
	chattr := testtool.Need(t, "chattr")
	dir := t.TempDir()
	meta := makeRecording(t, dir)
	rot, _ := testtool.Rotctld(t)
	sp := writeStation(t, dir, serve(t, meta), rot)
	db, log, wait := watchInBackground(t, sp, Options{DurationS: recSeconds})
	path := db.Path()
	files := []string{path, path + "-wal"}
	attr := func(flag string) error {
		out, err := exec.Command(chattr, append([]string{flag}, files...)...).CombinedOutput()
		if err != nil {
			return errors.New(strings.TrimSpace(string(out)))
		}
		return nil
	}
	t.Cleanup(func() { attr("-i") })
	for deadline := time.Now().Add(40 * time.Second); !strings.Contains(log.String(), "\nburst "); time.Sleep(50 * time.Millisecond) {
		if time.Now().After(deadline) {
			t.Fatalf("no burst logged:\n%s", log.String())
		}
	}
	time.Sleep(1500 * time.Millisecond) // committed
	if err := attr("+i"); err != nil {
		testtool.Unavailable(t, "the immutable attribute in "+filepath.Dir(path), err)
	}
	sum, runErr := wait()
	t.Logf("%v\nlog:\n%s", runErr, log.String())
	if !errors.Is(runErr, store.ErrReadOnly) || strings.Contains(runErr.Error(), "\n") || strings.Count(runErr.Error(), path) != 1 {
		t.Fatalf("watch on a write-protected database: %v; want one line naming %s once, wrapping store.ErrReadOnly", runErr, path)
	}
	if sum == nil || sum.Committed.Bursts < 1 {
		t.Errorf("summary %+v: want the first burst committed", sum)
	}
	db.Close()
	if err := attr("-i"); err != nil {
		t.Fatal(err)
	}
	integrityCheck(t, path)
	db, err := store.Open(path, store.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if c, err := db.Counts(); err != nil || c["bursts"] < 1 {
		t.Errorf("after the fault the database holds %v (%v); want the first burst", c, err)
	}
}
