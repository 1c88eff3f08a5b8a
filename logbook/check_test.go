package logbook

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"nullseek/internal/testtool"
	"nullseek/store"
)

// TestCheckLeavesNoNewFile: Check on a path with no database finds it
// can be made and leaves nothing (no database, no -wal/-shm/-journal);
// a nullseek database already there is kept; one made by the sqlite3 CLI
// (an outside reference) that is not nullseek's is refused and its table
// and row are still there, read back by sqlite3; a path in a missing
// directory is an error naming --db.
func TestCheckLeavesNoNewFile(t *testing.T) {
	dir := t.TempDir()
	if err := Check(filepath.Join(dir, "new.db")); err != nil {
		t.Fatalf("Check(new.db): %v", err)
	}
	if es, _ := os.ReadDir(dir); len(es) != 0 {
		t.Errorf("Check left %d files, first %s", len(es), es[0].Name())
	}

	bin := testtool.Need(t, "sqlite3", "-version")
	old := filepath.Join(dir, "old.db")
	if out, err := exec.Command(bin, old, "CREATE TABLE mine(x); INSERT INTO mine VALUES (42);").CombinedOutput(); err != nil {
		t.Fatalf("sqlite3: %v\n%s", err, out)
	}
	if err := Check(old); err == nil || !strings.Contains(err.Error(), "not a nullseek database") {
		t.Errorf("Check(sqlite3's own database): %v, want it refused", err)
	}
	out, err := exec.Command(bin, old, "SELECT x FROM mine;").CombinedOutput()
	if err != nil || strings.TrimSpace(string(out)) != "42" {
		t.Errorf("after Check, sqlite3 reads %q (%v), want 42", out, err)
	}

	ours := filepath.Join(dir, "ours.db")
	db, err := store.Open(ours, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if err := db.Close(); err != nil {
		t.Fatal(err)
	}
	if err := Check(ours); err != nil {
		t.Errorf("Check(ours.db): %v", err)
	}
	if _, err := os.Stat(ours); err != nil {
		t.Errorf("Check removed an existing database: %v", err)
	}

	err = Check(filepath.Join(dir, "no", "such", "x.db"))
	if err == nil || !strings.HasPrefix(err.Error(), "--db ") {
		t.Errorf("Check in a missing directory: %v, want an error naming --db", err)
	}
}
