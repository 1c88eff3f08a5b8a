//go:build unix

package watch

import (
	"bufio"
	"context"
	"encoding/json"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"nullseek/internal/testtool"
	"nullseek/sdr"
	"nullseek/station"
	"nullseek/store"
)

// TestWatchRotatorOutage: rotctld (Hamlib 4.5.4 dummy) is killed 9 s into
// the first burst and started again on the same port at 16.5 s. The watch
// says once that the rotator failed, logs and stores every burst, the
// first without a bearing (a hole of 8 s in its headings leaves less than
// the fit's 90° of sweep), and the second — which begins after the rotator
// answered again — with one.
func TestWatchRotatorOutage(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	meta := makeRecording(t, dir)
	rot, proc := testtool.Rotctld(t)
	_, portS, _ := net.SplitHostPort(rot)
	port, _ := strconv.Atoi(portS)
	sp := writeStation(t, dir, serve(t, meta), rot)
	st, err := station.Load(sp)
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Now()
	db, log, wait := watchInBackground(t, sp, Options{DurationS: recSeconds, RetryPeriod: 500 * time.Millisecond})
	time.Sleep(9*time.Second - time.Since(t0))
	proc.Kill()
	time.Sleep(16500*time.Millisecond - time.Since(t0))
	testtool.RotctldOn(t, port)
	sum, runErr := wait()
	out := log.String()
	t.Logf("log:\n%s", out)
	if runErr != nil {
		t.Fatal(runErr)
	}
	if n := strings.Count(out, "rotator at "+rot+" failed"); n != 1 {
		t.Errorf("the rotator's failure was reported %d times, want once", n)
	}
	if !strings.Contains(out, "answers again") {
		t.Error("the rotator's return was not reported")
	}
	bursts, err := db.BurstsOfCapture(sum.Capture)
	if err != nil {
		t.Fatal(err)
	}
	bs, err := db.Bearings(store.BearingQuery{Station: st.Name})
	if err != nil {
		t.Fatal(err)
	}
	has := map[int64]bool{}
	for _, b := range bs {
		has[b.BurstStartSample] = true
	}
	if len(bursts) < 3 || sum.Bursts != len(bursts) {
		t.Fatalf("%d bursts stored, %d logged; want every burst of the recording (at least 3)", len(bursts), sum.Bursts)
	}
	if has[bursts[0].StartSample] {
		t.Errorf("the burst the rotator vanished in (%.1f–%.1f s) has a bearing", bursts[0].StartS, bursts[0].EndS)
	}
	if !has[bursts[1].StartSample] {
		t.Errorf("the burst after the rotator came back (%.1f–%.1f s) has no bearing", bursts[1].StartS, bursts[1].EndS)
	}
	if !strings.Contains(out, "no bearing") {
		t.Error("no burst line says it has no bearing")
	}
}

// buildNullseek builds the command into dir.
func buildNullseek(t *testing.T, dir string) string {
	t.Helper()
	bin := filepath.Join(dir, "nullseek")
	out, err := exec.Command("go", "build", "-o", bin, "nullseek/cmd/nullseek").CombinedOutput()
	if err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	return bin
}

// TestWatchKill9: a `nullseek watch` process killed with SIGKILL (no
// clean-up at all) 5 s after it printed its first burst, in the middle of
// the next, leaves a database that sqlite3 finds sound and that holds that
// burst, the next one's readings so far and the headings up to the last
// commit; a second watch on the same database recovers the cut burst
// (and says so), adds its own capture to the same station and ends
// cleanly.
func TestWatchKill9(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	meta := makeRecording(t, dir)
	bin := buildNullseek(t, dir)
	rot, _ := testtool.Rotctld(t)
	sp := writeStation(t, dir, serve(t, meta), rot)
	dbPath := filepath.Join(dir, "watch.db")

	cmd := exec.Command(bin, "watch", "--station-file", sp)
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	cmd.Stderr = nil
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	lines := make(chan string, 100)
	go func() {
		sc := bufio.NewScanner(stdout)
		for sc.Scan() {
			lines <- sc.Text()
		}
		close(lines)
	}()
	deadline := time.After(60 * time.Second)
	var seen []string
wait:
	for {
		select {
		case l, ok := <-lines:
			if !ok {
				t.Fatalf("watch ended before a burst:\n%s", strings.Join(seen, "\n"))
			}
			seen = append(seen, l)
			if strings.HasPrefix(l, "burst ") {
				break wait
			}
		case <-deadline:
			cmd.Process.Kill()
			t.Fatalf("no burst line in 60 s:\n%s", strings.Join(seen, "\n"))
		}
	}
	// Into the next burst (17 s on, 2 s off, keyed from 0.5 s in), with a
	// commit since: the Writer commits at least every second.
	time.Sleep(5 * time.Second)
	if err := cmd.Process.Signal(os.Kill); err != nil {
		t.Fatal(err)
	}
	cmd.Wait()
	integrityCheck(t, dbPath)
	db, err := store.Open(dbPath, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	counts, err := db.Counts()
	db.Close()
	if err != nil {
		t.Fatal(err)
	}
	if counts["bursts"] < 1 || counts["headings"] < 100 || counts["captures"] != 1 || counts["stations"] != 1 {
		t.Fatalf("after kill -9 the database holds %v; want the logged burst, ~10 headings a second, one capture and station", counts)
	}

	// A new run continues the database (a fresh replay of the recording).
	sp2 := writeStation(t, dir, serve(t, meta), rot)
	out, err := exec.Command(bin, "watch", "--station-file", sp2, "--db", dbPath, "--duration", "3s").CombinedOutput()
	if err != nil {
		t.Fatalf("second watch: %v\n%s", err, out)
	}
	integrityCheck(t, dbPath)
	db, err = store.Open(dbPath, store.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	after, err := db.Counts()
	if err != nil {
		t.Fatal(err)
	}
	if after["captures"] != 2 || after["stations"] != 1 || after["headings"] <= counts["headings"] || after["bursts"] < counts["bursts"] {
		t.Errorf("the second run left %v (before: %v); want a second capture of the same station, more headings, the bursts kept", after, counts)
	}
	// The kill came seconds into the next burst: its readings were in
	// open_readings (40 a second); the second run says it recovered them
	// as a burst, and ends cleanly with none left.
	if counts["open_readings"] < 40 {
		t.Errorf("the kill 5 s after a burst line left %d open readings of the next burst; want its readings so far", counts["open_readings"])
	}
	if !strings.Contains(string(out), "a transmission was still on the air when an earlier run stopped") {
		t.Errorf("the kill left %d open readings; the second run did not say it recovered them:\n%s", counts["open_readings"], out)
	}
	if after["open_readings"] != 0 || after["bursts"] < counts["bursts"]+1 {
		t.Errorf("after the second run: %d open readings, %d bursts (before: %d); want none left and the recovered burst stored", after["open_readings"], after["bursts"], counts["bursts"])
	}

	// SIGTERM (as a service manager stops it) ends a third run cleanly:
	// exit status 0, its closing line, everything committed.
	sp3 := writeStation(t, dir, serve(t, meta), rot)
	third := exec.Command(bin, "watch", "--station-file", sp3, "--db", dbPath)
	var out3 syncBuffer
	third.Stdout, third.Stderr = &out3, &out3
	if err := third.Start(); err != nil {
		t.Fatal(err)
	}
	time.Sleep(3 * time.Second)
	third.Process.Signal(syscall.SIGTERM)
	if err := third.Wait(); err != nil {
		t.Fatalf("watch after SIGTERM: %v\n%s", err, out3.String())
	}
	if !strings.Contains(out3.String(), "watch ended after") {
		t.Errorf("no closing line after SIGTERM:\n%s", out3.String())
	}
	integrityCheck(t, dbPath)
	final, err := db.Counts()
	if err != nil {
		t.Fatal(err)
	}
	if final["captures"] != 3 || final["headings"] <= after["headings"] {
		t.Errorf("after the SIGTERM run the database holds %v (before: %v)", final, after)
	}
}

// TestWatchReceiverOutage: the rtl_tcp server vanishes 8 s into the run
// and comes back 3 s later on the same address (the recording paused
// meanwhile): the watch reconnects by itself (sdr.ResilientRTLTCP), logs
// the gap once and goes on storing bursts from the stream after it. Its
// recording (RecordDir) marks the gap as SigMF v1.2.5 asks: a new capture
// segment where time jumps, and an annotation labelled "gap".
func TestWatchReceiverOutage(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	meta := makeRecording(t, dir)
	rot, _ := testtool.Rotctld(t)
	src, err := sdr.Open(meta, sdr.RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := ln.Addr().String()
	serveUntil := func(ln net.Listener) (stop func()) {
		ctx, cancel := context.WithCancel(context.Background())
		done := make(chan struct{})
		go func() {
			defer close(done)
			sdr.ServeRTLTCP(ctx, ln, src, sdr.ServeOptions{Paced: true, Logger: discard})
		}()
		return func() { cancel(); ln.Close(); <-done }
	}
	stop := serveUntil(ln)
	// Ended before the recording does: at its end the server hangs up and
	// the watch would go on redialling.
	rec := filepath.Join(dir, "rec")
	if err := os.Mkdir(rec, 0o755); err != nil {
		t.Fatal(err)
	}
	status := &syncBuffer{}
	db, log, wait := watchInBackground(t, writeStation(t, dir, addr, rot), Options{DurationS: recSeconds - 3, RecordDir: rec,
		Status: status, StatusPeriod: time.Second})
	time.Sleep(8 * time.Second)
	stop()
	time.Sleep(3 * time.Second)
	ln2, err := net.Listen("tcp", addr)
	if err != nil {
		t.Fatalf("listen again on %s: %v", addr, err)
	}
	stop2 := serveUntil(ln2)
	defer stop2()
	sum, runErr := wait()
	out := log.String()
	t.Logf("log:\n%s", out)
	if runErr != nil {
		t.Fatal(runErr)
	}
	if n := strings.Count(out, "receiver "+addr+": gap of"); n != 1 {
		t.Errorf("the receiver's outage was logged %d times, want once", n)
	}
	// The status lines say the receiver is lost while it is (3 s and the
	// redial's backoff, a status line a second), and show the channel
	// again once it is back.
	lines := strings.Split(strings.TrimSpace(status.String()), "\n")
	lostLines, backAfter := 0, 0
	for _, l := range lines {
		switch {
		case strings.Contains(l, "receiver lost at "):
			lostLines++
			if strings.Contains(l, " MHz ") {
				t.Errorf("a receiver-lost status line shows the channel's stale state: %s", l)
			}
		case lostLines > 0 && strings.Contains(l, "input ["):
			backAfter++
		}
	}
	if lostLines < 2 || backAfter < 5 {
		t.Errorf("%d status lines say the receiver is lost, %d show the input after it; want 2 or more, 5 or more:\n%s", lostLines, backAfter, status)
	}
	bursts, err := db.BurstsOfCapture(sum.Capture)
	if err != nil {
		t.Fatal(err)
	}
	late := 0
	for _, b := range bursts {
		if b.StartS > 8 {
			late++
		}
	}
	if late == 0 {
		t.Errorf("no burst stored from after the outage (%d bursts in all)", len(bursts))
	}
	integrityCheck(t, db.Path())
	metas, _ := filepath.Glob(filepath.Join(rec, "*.sigmf-meta"))
	if len(metas) != 1 {
		t.Fatalf("recorded pairs %v, want one", metas)
	}
	b, err := os.ReadFile(metas[0])
	if err != nil {
		t.Fatal(err)
	}
	var got struct {
		Captures    []map[string]any `json:"captures"`
		Annotations []map[string]any `json:"annotations"`
	}
	if err := json.Unmarshal(b, &got); err != nil {
		t.Fatal(err)
	}
	gaps := 0
	for _, a := range got.Annotations {
		if a["core:label"] == "gap" {
			gaps++
		}
	}
	if len(got.Captures) != 2 || gaps != 1 {
		t.Errorf("the recording has %d capture segments and %d gap annotations, want 2 and 1:\n%s", len(got.Captures), gaps, b)
	}
}

// watchInBackground starts a watch of the station file at sp in the
// background with opts (Station, DB and Log filled here); wait returns its
// summary and error once it ends, with the log, the database still open.
func watchInBackground(t *testing.T, sp string, opts Options) (db *store.DB, log *syncBuffer, wait func() (*Summary, error)) {
	t.Helper()
	st, err := station.Load(sp)
	if err != nil {
		t.Fatal(err)
	}
	db, err = store.Open(st.Database, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	log = &syncBuffer{}
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	opts.Station, opts.DB, opts.Log = st, db, log
	var sum *Summary
	var runErr error
	done := make(chan struct{})
	go func() {
		defer close(done)
		sum, runErr = Run(ctx, opts)
	}()
	return db, log, func() (*Summary, error) { <-done; cancel(); return sum, runErr }
}
