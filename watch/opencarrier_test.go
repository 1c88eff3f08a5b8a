package watch

import (
	"context"
	"io"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"nullseek/internal/testtool"
	"nullseek/sdr"
	"nullseek/store"
)

// snapshotSource is a carrierMix that, once the stream passes atS
// seconds, waits for the store's next commit and takes a consistent copy
// of what is committed (sqlite3's VACUUM INTO, an outside reader): the
// database a kill -9 or a power cut at that moment leaves behind.
type snapshotSource struct {
	*carrierMix
	t        *testing.T
	db, snap string
	at       int64
	taken    bool
}

func (s *snapshotSource) Read(dst []complex64) (int, error) {
	if !s.taken && s.n >= s.at {
		s.taken = true
		time.Sleep(1500 * time.Millisecond) // the Writer commits at least every second
		if out, err := exec.Command(testtool.Need(s.t, "sqlite3"), s.db, "VACUUM INTO '"+s.snap+"'").CombinedOutput(); err != nil {
			s.t.Errorf("sqlite3 VACUUM INTO: %v: %s", err, out)
		}
	}
	return s.carrierMix.Read(dst)
}

// TestOpenCarrierSurvivesKill: a carrier that never goes off, 60 s into
// it: the committed database already holds its level readings (open
// readings, up to the last second), although its burst has not ended; sqlite3 finds the copy sound, and a new watch on
// it (RecoverOpen) turns them into one burst cut at its end. The live
// run then ends with the stream (90 s): its burst is stored whole and no
// open reading is left.
func TestOpenCarrierSurvivesKill(t *testing.T) {
	const rate = 240000
	st, db := loadStation(t, strings.Replace(baseStation, `name = "Opt"`, `name = "Carrier"`, 1))
	dir := t.TempDir()
	src := &snapshotSource{carrierMix: newCarrierMix(rate, 90*rate, 25000, -50000, 0, 60, nil), t: t,
		db: st.Database, snap: filepath.Join(dir, "snap.db"), at: 60 * rate}
	if _, err := Run(context.Background(), Options{Station: st, DB: db, Log: io.Discard,
		Open: func(context.Context, sdr.RTLConfig) (sdr.Source, error) { return src, nil }}); err != nil {
		t.Fatal(err)
	}
	if !src.taken {
		t.Fatal("no snapshot taken")
	}
	integrityCheck(t, src.snap)
	q := func(path, sql string) string {
		out, err := exec.Command(testtool.Need(t, "sqlite3"), path, sql).CombinedOutput()
		if err != nil {
			t.Fatalf("sqlite3 %s: %v: %s", sql, err, out)
		}
		return strings.TrimSpace(string(out))
	}
	got := strings.Split(q(src.snap, "SELECT (SELECT count(*) FROM bursts), count(*), coalesce(max(t_s), 0) FROM open_readings"), "|")
	lastS, _ := strconv.ParseFloat(got[2], 64)
	t.Logf("at 60 s of carrier the committed database holds %s bursts and %s open readings up to %.1f s", got[0], got[1], lastS)
	// At most a second lost (the bound): the readings of the
	// blocks read before the snapshot are handed to the store after every
	// block, and the Writer commits at least once a second.
	if got[0] != "0" || lastS < 59 {
		t.Errorf("at 60 s of carrier: %s bursts and open readings up to %.1f s; want none and readings past 59 s", got[0], lastS)
	}
	// A new run on what the kill left recovers the transmission.
	sdb, err := store.Open(src.snap, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	n, err := sdb.RecoverOpen()
	sdb.Close()
	if err != nil || n != 1 {
		t.Fatalf("RecoverOpen on the snapshot = %d, %v; want 1", n, err)
	}
	if got := q(src.snap, "SELECT count(*), max(cut_at_end), (SELECT count(*) FROM open_readings), (SELECT count(*) FROM level_readings) > 1000 FROM bursts"); got != "1|1|0|1" {
		t.Errorf("after recovery: %q, want one burst cut at its end holding the readings (1|1|0|1)", got)
	}
	integrityCheck(t, src.snap)
	// The live run's own end.
	db.Close()
	if got := q(st.Database, "SELECT count(*), (SELECT count(*) FROM open_readings), (SELECT max(t_s) - min(t_s) FROM level_readings) > 85 FROM bursts"); got != "1|0|1" {
		t.Errorf("after the run: %q, want one burst over the 90 s and no open readings (1|0|1)", got)
	}
}
