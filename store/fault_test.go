package store

import (
	"bufio"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"nullseek/internal/testtool"
)

// The fault tests re-execute this test binary as a child that writes to a
// database (TestMain dispatches on childRoleEnv), so that the child can be
// killed, or run under a file size limit, while the parent survives to
// inspect the database with SQLite's own tools.
const (
	childRoleEnv = "NULLSEEK_STORE_CHILD"
	childDBEnv   = "NULLSEEK_STORE_DB"
	// childFSizeEnv is the RLIMIT_FSIZE, in bytes, the "fsize" child sets.
	childFSizeEnv = "NULLSEEK_STORE_FSIZE"
)

// childBurst is the k-th burst of the children: 1 s long, one a burst
// slot of 1 s on the capture clock, stamped with the wall-clock time it was
// added so that the parent can tell how much was lost.
func childBurst(c CaptureID, k int, added time.Time) (Burst, []LevelReading) {
	const rate = 2.4e6
	b := Burst{Capture: c, StartSample: int64(k) * rate, EndSample: int64(k)*rate + rate - 1,
		StartS: float64(k), EndS: float64(k) + 1, Start: added, End: added.Add(time.Second),
		OffsetHz: 25e3, LevelDBFS: -40, PeakDBFS: -38, NoiseDBFS: -70, SNRDB: 30, Ident: "N0CALL/1"}
	lv := make([]LevelReading, 200)
	for i := range lv {
		ts := float64(k) + float64(i)/200
		lv[i] = LevelReading{Sample: int64(k)*rate + int64(i)*rate/200, TimeS: ts, LevelDBFS: -40 - float64(i%7)}
	}
	return b, lv
}

// runChild is the child side. Roles:
//   - "write": writes a burst every 5 ms until killed, printing "add K NS"
//     after each add and "commit N" after each commit (N bursts in all);
//   - "fsize": the same under RLIMIT_FSIZE, until the writer stops; prints
//     "error MSG" and exits 3.
func runChild(role string) int {
	path := os.Getenv(childDBEnv)
	out := bufio.NewWriter(os.Stdout)
	var mu sync.Mutex
	say := func(format string, args ...any) {
		mu.Lock()
		fmt.Fprintf(out, format+"\n", args...)
		out.Flush()
		mu.Unlock()
	}
	db, err := Open(path, Options{})
	if err != nil {
		say("error %v", err)
		return 2
	}
	c, err := childCapture(db)
	if err != nil {
		say("error %v", err)
		return 2
	}
	var start int64
	if err := db.sql.QueryRow("SELECT count(*) FROM bursts WHERE capture_id = ?", c).Scan(&start); err != nil {
		say("error %v", err)
		return 2
	}
	if role == "fsize" {
		// The kernel's own limit on file growth (setrlimit(2)
		// RLIMIT_FSIZE): write(2) fails with EFBIG past it, as on a full
		// disk. SIGXFSZ, which would kill the process first, is ignored so
		// that the write error reaches SQLite.
		limit, _ := strconv.ParseUint(os.Getenv(childFSizeEnv), 10, 64)
		signal.Ignore(syscall.SIGXFSZ)
		if err := syscall.Setrlimit(syscall.RLIMIT_FSIZE, &syscall.Rlimit{Cur: limit, Max: limit}); err != nil {
			say("error setrlimit: %v", err)
			return 2
		}
	}
	w, err := db.NewWriter(WriterOptions{OnCommit: func(s CommitStats) { say("commit %d", s.Bursts) }})
	if err != nil {
		say("error %v", err)
		return 2
	}
	for k := int(start); k < int(start)+100000; k++ {
		now := time.Now()
		b, lv := childBurst(c, k, now)
		if err := w.AddBurst(b, lv); err != nil {
			break
		}
		say("add %d %d", k, now.UnixNano())
		if role == "write" { // paced like a receiver; the fsize child only needs to fill the file
			time.Sleep(5 * time.Millisecond)
		}
	}
	err = w.Close()
	st := w.Stats()
	say("committed %d", st.Bursts)
	if err != nil {
		say("error %s", strings.ReplaceAll(err.Error(), "\n", " | "))
		return 3
	}
	return 0
}

func childCapture(db *DB) (CaptureID, error) {
	st, err := db.PutStation(Station{Name: "Kestrel Ridge", LatDeg: ptr(45.1), LonDeg: ptr(6.1), PositionSource: PositionFixed})
	if err != nil {
		return 0, err
	}
	return db.PutCapture(Capture{Station: st, Source: "live", SampleRateHz: 2.4e6, Samples: -1, FileSHA256: hash64(7)})
}

// childOutput collects a child's lines.
type childOutput struct {
	mu      sync.Mutex
	adds    map[int]time.Time
	commits []int64
	lines   []string
	done    chan struct{}
}

func startChild(t *testing.T, role, path string, env ...string) (*exec.Cmd, *childOutput) {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), append([]string{childRoleEnv + "=" + role, childDBEnv + "=" + path}, env...)...)
	pipe, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	cmd.Stderr = os.Stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	o := &childOutput{adds: map[int]time.Time{}, done: make(chan struct{})}
	go func() {
		defer close(o.done)
		sc := bufio.NewScanner(pipe)
		for sc.Scan() {
			line := sc.Text()
			o.mu.Lock()
			o.lines = append(o.lines, line)
			f := strings.Fields(line)
			switch {
			case len(f) == 3 && f[0] == "add":
				k, _ := strconv.Atoi(f[1])
				ns, _ := strconv.ParseInt(f[2], 10, 64)
				o.adds[k] = time.Unix(0, ns)
			case len(f) == 2 && f[0] == "commit":
				n, _ := strconv.ParseInt(f[1], 10, 64)
				o.commits = append(o.commits, n)
			}
			o.mu.Unlock()
		}
	}()
	return cmd, o
}

// checkPrefix checks that the database holds bursts 0…n-1 of the child's
// capture, each with all of its thinned readings, and nothing else; it
// returns n.
func checkPrefix(t *testing.T, db *DB) int {
	t.Helper()
	bs, err := db.BurstsOfCapture(1)
	if err != nil {
		t.Fatal(err)
	}
	for k, b := range bs {
		if b.StartSample != int64(k)*2.4e6 {
			t.Fatalf("burst %d starts at sample %d: the stored bursts are not a prefix of what was written", k, b.StartSample)
		}
	}
	var bad int
	if err := db.sql.QueryRow("SELECT count(*) FROM (SELECT burst_id, count(*) AS n FROM level_readings GROUP BY burst_id) WHERE n <> 40").Scan(&bad); err != nil {
		t.Fatal(err)
	}
	var orphans int
	db.sql.QueryRow("SELECT count(*) FROM bursts b WHERE NOT EXISTS (SELECT 1 FROM level_readings r WHERE r.burst_id = b.id)").Scan(&orphans)
	if bad != 0 || orphans != 0 {
		t.Fatalf("%d bursts with a partial set of readings, %d without any: a burst and its readings must commit together", bad, orphans)
	}
	return len(bs)
}

// TestKill9 is the power-cut-of-the-process fault: a child writes bursts
// continuously and is killed with SIGKILL at a moment of the parent's
// choosing. The database must pass SQLite's integrity check, hold every
// burst up to the last committed batch the child reported (and only whole
// batches), have lost at most about the flush interval (1 s) of bursts,
// and take a new writer that carries on.
func TestKill9(t *testing.T) {
	testtool.Need(t, "sqlite3", "-version")
	path := filepath.Join(t.TempDir(), "kill.db")
	cmd, out := startChild(t, "write", path)
	// Let it commit a few batches, then kill it 0.9 s after one: rows
	// have waited almost a whole flush interval, the most a kill can lose.
	deadline := time.Now().Add(20 * time.Second)
	for {
		out.mu.Lock()
		n := len(out.commits)
		out.mu.Unlock()
		if n >= 3 {
			break
		}
		if time.Now().After(deadline) {
			cmd.Process.Kill()
			t.Fatalf("the child reported %d commits in 20 s", n)
		}
		time.Sleep(10 * time.Millisecond)
	}
	time.Sleep(900 * time.Millisecond)
	killed := time.Now()
	if err := cmd.Process.Signal(syscall.SIGKILL); err != nil {
		t.Fatal(err)
	}
	<-out.done
	err := cmd.Wait()
	var ee *exec.ExitError
	if !errors.As(err, &ee) || ee.Sys().(syscall.WaitStatus).Signal() != syscall.SIGKILL {
		t.Fatalf("child did not die of SIGKILL: %v", err)
	}
	out.mu.Lock()
	lastCommit := out.commits[len(out.commits)-1]
	adds := out.adds
	out.mu.Unlock()

	// SQLite's own check, by the sqlite3 program, on the file as the kill
	// left it (with its WAL).
	if _, err := os.Stat(path + "-wal"); err != nil {
		t.Logf("no WAL file after the kill: %v", err)
	}
	mustIntegrity(t, path)
	db, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if got, err := db.IntegrityCheck(); err != nil || got != "ok" {
		t.Fatalf("integrity_check after the kill: %q %v", got, err)
	}
	n := checkPrefix(t, db)
	if int64(n) < lastCommit {
		t.Fatalf("%d bursts stored, but the child had reported %d committed", n, lastCommit)
	}
	// What was lost: bursts the child added that are not stored. The
	// first of them was added at most one flush interval before the kill
	// (plus the time a commit takes and scheduling on a shared machine:
	// 1 s of slack).
	var lostFrom time.Time
	lost := 0
	for k, at := range adds {
		if k >= n {
			lost++
			if lostFrom.IsZero() || at.Before(lostFrom) {
				lostFrom = at
			}
		}
	}
	lostS := 0.0
	if lost > 0 {
		lostS = killed.Sub(lostFrom).Seconds()
	}
	t.Logf("killed after %d bursts added; %d stored (last reported commit %d); %d lost, spanning %.3f s before the kill", len(adds), n, lastCommit, lost, lostS)
	if limit := DefaultFlushInterval.Seconds() + 1; lostS > limit {
		t.Errorf("the kill lost %.3f s of bursts, more than the %.0f s flush interval + 1 s", lostS, DefaultFlushInterval.Seconds())
	}
	if lost > 0 && lostS <= 0 {
		t.Errorf("lost bursts were added after the kill?")
	}
	// A new writer carries on where the stored data ends.
	c, err := childCapture(db)
	if err != nil || c != 1 {
		t.Fatalf("capture %d %v", c, err)
	}
	w, err := db.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for k := n; k < n+10; k++ {
		b, lv := childBurst(c, k, time.Now())
		if err := w.AddBurst(b, lv); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if m := checkPrefix(t, db); m != n+10 {
		t.Errorf("after carrying on: %d bursts, want %d", m, n+10)
	}
	db.Close()
	mustIntegrity(t, path)
}

// TestDiskFullSizeCap: the database reaches Options.MaxBytes (SQLite's
// PRAGMA max_page_count, which makes SQLite answer SQLITE_FULL exactly as
// on a full disk). The writer stops with one clear error wrapping
// ErrDiskFull, what it committed stays, the file passes SQLite's integrity
// check, and once there is room again writing carries on.
func TestDiskFullSizeCap(t *testing.T) {
	path := filepath.Join(t.TempDir(), "full.db")
	db, err := Open(path, Options{MaxBytes: 512 << 10})
	if err != nil {
		t.Fatal(err)
	}
	c, err := childCapture(db)
	if err != nil {
		t.Fatal(err)
	}
	w, err := db.NewWriter(WriterOptions{BatchRows: 2000})
	if err != nil {
		t.Fatal(err)
	}
	var addErr error
	k := 0
	for ; k < 20000; k++ {
		b, lv := childBurst(c, k, t0.Add(time.Duration(k)*time.Second))
		if addErr = w.AddBurst(b, lv); addErr != nil {
			break
		}
	}
	if addErr == nil {
		addErr = w.Flush()
	}
	closeErr := w.Close()
	st := w.Stats()
	t.Logf("stopped after %d bursts added, %d committed in %d batches: %v", k, st.Bursts, st.Batches, closeErr)
	if !errors.Is(addErr, ErrWriterStopped) || !errors.Is(addErr, ErrDiskFull) {
		t.Errorf("add after the disk filled: %v, want ErrWriterStopped wrapping ErrDiskFull", addErr)
	}
	if !errors.Is(closeErr, ErrDiskFull) || strings.Contains(closeErr.Error(), "\n") || !strings.Contains(closeErr.Error(), path) {
		t.Errorf("Close: %v, want one line naming %s and wrapping ErrDiskFull", closeErr, path)
	}
	if got, err := db.IntegrityCheck(); err != nil || got != "ok" {
		t.Errorf("integrity_check: %q %v", got, err)
	}
	if n := checkPrefix(t, db); int64(n) != st.Bursts || n == 0 {
		t.Errorf("%d bursts stored, the writer reported %d committed", n, st.Bursts)
	}
	db.Close()
	mustIntegrity(t, path)
	// Room again (no cap): a new run continues.
	db, err = Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	w, err = db.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	n := checkPrefix(t, db)
	b, lv := childBurst(c, n, t0)
	if err := w.AddBurst(b, lv); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if m := checkPrefix(t, db); m != n+1 {
		t.Errorf("after the disk had room again: %d bursts, want %d", m, n+1)
	}
}

// TestDiskFullFileSizeLimit: the same fault from the operating system — a
// child writes under RLIMIT_FSIZE, so the kernel refuses to grow the
// database or its WAL (write(2) → EFBIG) as a full disk refuses (ENOSPC).
// The child must stop with one clear error and exit; the database passes
// the sqlite3 program's integrity check and holds what was committed.
func TestDiskFullFileSizeLimit(t *testing.T) {
	testtool.Need(t, "sqlite3", "-version")
	path := filepath.Join(t.TempDir(), "fsize.db")
	// Create the schema first, so the limit bites on data, not on setup.
	db, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	db.Close()
	cmd, out := startChild(t, "fsize", path, childFSizeEnv+"="+strconv.Itoa(1<<20))
	done := make(chan error, 1)
	go func() { <-out.done; done <- cmd.Wait() }()
	select {
	case err = <-done:
	case <-time.After(60 * time.Second):
		cmd.Process.Kill()
		t.Fatal("the child did not stop within 60 s under the file size limit")
	}
	var ee *exec.ExitError
	if !errors.As(err, &ee) || ee.ExitCode() != 3 {
		t.Fatalf("child: %v, want exit status 3 (stopped on the write error)\n%s", err, strings.Join(out.lines, "\n"))
	}
	var msg string
	var committed int64 = -1
	for _, l := range out.lines {
		if m, ok := strings.CutPrefix(l, "error "); ok {
			msg = m
		}
		if m, ok := strings.CutPrefix(l, "committed "); ok {
			committed, _ = strconv.ParseInt(m, 10, 64)
		}
	}
	t.Logf("child stopped: %s", msg)
	if !strings.Contains(msg, ErrDiskFull.Error()) || strings.Contains(msg, " | ") {
		t.Errorf("child's error %q: want one line saying %q", msg, ErrDiskFull)
	}
	mustIntegrity(t, path)
	db, err = Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if n := checkPrefix(t, db); int64(n) != committed || n == 0 {
		t.Errorf("%d bursts stored, the child reported %d committed", n, committed)
	}
}

// chattr sets or clears the immutable attribute (chattr(1), e2fsprogs):
// the kernel then refuses writes to the file even to root, which the
// tests run as — so a chmod would prove nothing.
func chattr(t *testing.T, flag string, paths ...string) {
	t.Helper()
	bin := testtool.Need(t, "chattr")
	for _, p := range paths {
		if _, err := os.Stat(p); err != nil {
			continue
		}
		if out, err := exec.Command(bin, flag, p).CombinedOutput(); err != nil {
			testtool.Unavailable(t, "the immutable attribute on "+filepath.Dir(p), fmt.Errorf("chattr %s: %v: %s", flag, err, out))
		}
	}
}

// TestReadOnly: three honest read-only databases, each refused with one
// clear error wrapping ErrReadOnly and left sound:
//   - SQLite's read-only open (URI mode=ro, Options.ReadOnly);
//   - a write-protected file (immutable attribute) opened for writing;
//   - a file that becomes write-protected while a writer is running.
func TestReadOnly(t *testing.T) {
	db, path := newDB(t)
	writeRecording(t, db, 3)
	db.Close()

	ro, err := Open(path, Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	if bs, err := ro.Bearings(BearingQuery{}); err != nil || len(bs) != 3 {
		t.Errorf("read-only open: reading bearings: %d %v", len(bs), err)
	}
	if _, err := ro.NewWriter(WriterOptions{}); !errors.Is(err, ErrReadOnly) {
		t.Errorf("writer on a read-only open: %v", err)
	}
	_, err = ro.PutStation(Station{Name: "Other", LatDeg: ptr(1), LonDeg: ptr(1), PositionSource: PositionFixed})
	if !errors.Is(err, ErrReadOnly) || strings.Contains(err.Error(), "\n") {
		t.Errorf("write on a read-only open: %v, want one line wrapping ErrReadOnly", err)
	}
	ro.Close()

	// Not the -shm file: SQLite maps it into memory, and a store to a
	// mapped page of an immutable file is a SIGBUS, not an error.
	files := []string{path, path + "-wal"}
	chattr(t, "+i", path)
	t.Cleanup(func() { chattr(t, "-i", files...) })
	_, err = Open(path, Options{})
	if !errors.Is(err, ErrReadOnly) || strings.Contains(err.Error(), "\n") {
		t.Errorf("Open of a write-protected file: %v, want one line wrapping ErrReadOnly", err)
	}
	chattr(t, "-i", path)
	mustIntegrity(t, path)

	// While writing: the writer commits, then the files become immutable.
	db, err = Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	var c CaptureID = 1
	w, err := db.NewWriter(WriterOptions{FlushInterval: 20 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	b, lv := burstAt(c, 100, "N0CALL/1")
	if err := w.AddBurst(b, lv); err != nil {
		t.Fatal(err)
	}
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	chattr(t, "+i", files...)
	b, lv = burstAt(c, 101, "N0CALL/1")
	if err := w.AddBurst(b, lv); err != nil {
		t.Fatal(err)
	}
	ferr := w.Flush()
	cerr := w.Close()
	t.Logf("writer stopped: %v", cerr)
	if !errors.Is(ferr, ErrReadOnly) || !errors.Is(cerr, ErrReadOnly) || strings.Contains(cerr.Error(), "\n") {
		t.Errorf("commit to a file made write-protected: flush %v, close %v; want one line wrapping ErrReadOnly", ferr, cerr)
	}
	if err := w.AddBurst(b, lv); !errors.Is(err, ErrWriterStopped) {
		t.Errorf("add after the stop: %v", err)
	}
	db.Close()
	chattr(t, "-i", files...)
	mustIntegrity(t, path)
	db, err = Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	bs, err := db.BurstsOfCapture(c)
	if err != nil || len(bs) != 4 || bs[3].StartSample != int64(100*60*2.4e6) {
		t.Errorf("after the read-only fault: %d bursts (%v), want the 3 first and the one committed before", len(bs), err)
	}
}
