//go:build unix

package main

import (
	"bytes"
	"context"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"syscall"
	"testing"
	"time"

	"nullseek/heading"
	"nullseek/internal/angle"
	"nullseek/internal/testtool"
	"nullseek/sdr"
)

// rotatorAt asks rotctld for the azimuth (`p`, get_pos; Hamlib rotctld(1)
// 4.5.4) on a connection of its own, twice a second apart, and returns
// both readings.
func rotatorAt(t *testing.T, addr string) (a0, a1 float64) {
	t.Helper()
	rot, err := heading.DialRotator(context.Background(), addr, heading.RotatorOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer rot.Close()
	if a0, _, err = rot.Position(); err != nil {
		t.Fatal(err)
	}
	time.Sleep(time.Second)
	if a1, _, err = rot.Position(); err != nil {
		t.Fatal(err)
	}
	return a0, a1
}

// keptRecording checks a recording the command kept at base: it opens
// (nullseek's SigMF reader), its core:sha512 is the SHA-512 of the data
// file as coreutils sha512sum computes it (SigMF v1.2.5 core:sha512), the
// data file is two bytes a cu8 sample, and its bytes are the first ones
// the receiver sent. It returns the recording's start and length in
// seconds.
func keptRecording(t *testing.T, base string, sent []byte) (time.Time, float64) {
	t.Helper()
	src, err := sdr.Open(base+".sigmf-meta", sdr.RawParams{})
	if err != nil {
		t.Fatalf("the kept recording does not open: %v", err)
	}
	info := src.Info()
	src.Close()
	data, err := os.ReadFile(base + ".sigmf-data")
	if err != nil {
		t.Fatal(err)
	}
	if info.Format != "cu8" || int64(len(data)) != 2*info.Samples || info.Samples == 0 {
		t.Errorf("data file %d bytes for %d %s samples", len(data), info.Samples, info.Format)
	}
	if len(data) > len(sent) || !bytes.Equal(data, sent[:len(data)]) {
		t.Errorf("the %d bytes kept are not the first bytes the receiver sent (%d sent)", len(data), len(sent))
	}
	testtool.CheckSigMFHash(t, base)
	return info.Start, float64(info.Samples) / info.SampleRate
}

// headingLogSpan reads a kept heading log and returns its first and last
// rows.
func headingLogSpan(t *testing.T, path string, start time.Time) (first, last heading.Sample) {
	t.Helper()
	fh, err := os.Open(path)
	if err != nil {
		t.Fatalf("no heading log: %v", err)
	}
	defer fh.Close()
	tr, err := heading.ReadLog(fh, start, heading.True)
	if err != nil {
		t.Fatal(err)
	}
	return tr.Samples[0], tr.Samples[len(tr.Samples)-1]
}

// errorLine is the run's one "nullseek: " line.
func errorLine(t *testing.T, r nullseekRun) string {
	t.Helper()
	oneLine(t, r)
	for _, l := range strings.Split(r.stderr, "\n") {
		if strings.HasPrefix(l, "nullseek: ") {
			return l
		}
	}
	return ""
}

// TestLiveInterrupt sends SIGINT or SIGTERM to a live bearing while Hamlib's
// dummy rotator (rotctld 4.5.4, model 1, 6°/s) sweeps 0° → 150°. The
// rotator must be stopped (two get_pos a second apart agree, well short of
// 150°), the exit status must be 128 + the signal (Bash manual 3.7.5;
// Linux signal(7): SIGINT 2, SIGTERM 15), one line must say what was kept,
// and with --record the SigMF pair and the heading log up to the last
// block stay, without temporaries (*.tmp, nullseek-live-*).
func TestLiveInterrupt(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name   string
		sig    syscall.Signal
		record bool
	}{
		{"SIGINT with --record", syscall.SIGINT, true},
		{"SIGTERM with --record", syscall.SIGTERM, true},
		{"SIGINT without --record", syscall.SIGINT, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			rig := newLiveRig(t, 40, true)
			dir, tmp := t.TempDir(), t.TempDir()
			rec := filepath.Join(dir, "cut")
			args := []string{"bearing", "rtl_tcp://" + rig.rtlAddr, "--rotator", rig.rotAddr, "--sweep", "0:150",
				"--freq", "145.5M", "--center", "145.45M", "--rate", "250k", "--no-ident"}
			if tc.record {
				args = append(args, "--record", rec)
			}
			c, o, e := startNullseek(t, tmp, args...)
			rig.waitAz(t, 30, 30*time.Second, c, o, e)
			azSig := rig.azNow()
			if err := c.Process.Signal(tc.sig); err != nil {
				t.Fatal(err)
			}
			r := waitNullseek(t, c, o, e)
			line := errorLine(t, r)
			a0, a1 := rotatorAt(t, rig.rotAddr)
			t.Logf("signal at %.1f°; rotator then at %.2f° and a second later %.2f°; exit %d; %s", azSig, a0, a1, r.code, line)
			if want := 128 + int(tc.sig); r.code != want {
				t.Errorf("exit status %d, want %d", r.code, want)
			}
			if math.Abs(a1-a0) > 0.05 || a1 > azSig+12 {
				t.Errorf("rotator not stopped: %.2f° then %.2f° (signalled at %.1f°, sweep to 150°)", a0, a1, azSig)
			}
			for _, w := range []string{"interrupted by " + map[syscall.Signal]string{syscall.SIGINT: "SIGINT", syscall.SIGTERM: "SIGTERM"}[tc.sig], "stopped at"} {
				if !strings.Contains(line, w) {
					t.Errorf("error line does not say %q", w)
				}
			}
			if left := filesIn(t, tmp); len(left) > 0 {
				t.Errorf("temporary files left behind: %v", left)
			}
			if !tc.record {
				if !strings.Contains(line, "not kept") {
					t.Errorf("error line does not say that nothing was kept")
				}
				return
			}
			files := filesIn(t, dir)
			sort.Strings(files)
			if strings.Join(files, " ") != "cut.csv cut.sigmf-data cut.sigmf-meta" {
				t.Errorf("recording folder holds %v, want the pair and the heading log only", files)
			}
			if !strings.Contains(line, "kept") || !strings.Contains(line, rec+".sigmf-meta") || !strings.Contains(line, rec+".csv") {
				t.Errorf("error line does not name what was kept")
			}
			start, secs := keptRecording(t, rec, rig.src.sentBytes())
			first, last := headingLogSpan(t, rec+".csv", start)
			t.Logf("kept %.2f s; heading log %.2f s (%.1f°) to %.2f s (%.1f°)", secs, first.T, first.Deg, last.T, last.Deg)
			// The log covers the recording up to its last block (the first
			// poll comes after the receiver's first 0.52 s transfer), and
			// never past where the rotator stopped.
			if first.T > 3 || last.T < secs-0.5 || last.T > secs+0.5 || last.Deg > a1+0.1 {
				t.Errorf("heading log %.2f–%.2f s ending at %.1f°, recording %.2f s, rotator stopped at %.1f°", first.T, last.T, last.Deg, secs, a1)
			}
			// The recording is whole: it re-runs offline.
			off := inProcess(t, "bearing", rec+".sigmf-meta", "--headings", rec+".csv", "--freq", "145.5M", "--no-ident", "--json")
			if strings.Contains(off.stderr, "panic") || off.code != 0 && !strings.Contains(off.stderr, "nullseek: ") {
				t.Errorf("offline re-run of the kept part: exit %d\n%s", off.code, off.stderr)
			}
		})
	}
}

// TestLiveReceiverCut closes the rtl_tcp server (the replay server in sdr)
// while the rotator sweeps: the seconds captured before are kept byte for
// byte, analysed (a Yagi bearing of the carrier, within 3σ and 3° of the
// bearing the receiver was built with), the rotator is stopped, and one line
// names the protocol and what was expected.
func TestLiveReceiverCut(t *testing.T) {
	t.Parallel()
	const truth = 45.0
	rig := newLiveRig(t, truth, true)
	dir, tmp := t.TempDir(), t.TempDir()
	rec := filepath.Join(dir, "cut")
	c, o, e := startNullseek(t, tmp, "bearing", "rtl_tcp://"+rig.rtlAddr, "--rotator", rig.rotAddr, "--sweep", "0:150",
		"--freq", "145.5M", "--center", "145.45M", "--rate", "250k", "--gain", "20", "--no-ident", "--antenna", "yagi",
		"--record", rec, "--json")
	// 0° → 125° covers the main lobe around the truth (60° beamwidth) and
	// the 90° the fit asks for, with room for a receiver that lags.
	rig.waitAz(t, 125, 45*time.Second, c, o, e)
	cutAt := time.Now()
	rig.stopServer()
	r := waitNullseek(t, c, o, e)
	line := errorLine(t, r)
	a0, a1 := rotatorAt(t, rig.rotAddr)
	if r.code != 1 {
		t.Errorf("exit status %d, want 1", r.code)
	}
	for _, w := range []string{"receiver fault", "rtl_tcp", rig.rtlAddr, "expected", "kept", rec + ".sigmf-meta"} {
		if !strings.Contains(line, w) {
			t.Errorf("error line does not mention %q", w)
		}
	}
	if math.Abs(a1-a0) > 0.05 || a1 > 145 {
		t.Errorf("rotator not stopped after the receiver fault: %.2f° then %.2f°", a0, a1)
	}
	// The first N seconds: the bytes sent until the server closed.
	sent := rig.src.sentBytes()
	start, secs := keptRecording(t, rec, sent)
	generated := float64(len(sent)/2) / liveRate
	t.Logf("kept %.2f s; the receiver made %.2f s of samples in the %.2f s it streamed; rotator stopped at %.1f°", secs, generated, cutAt.Sub(rig.src.t0).Seconds(), a1)
	// Samples go out one 0.52 s transfer at a time: the one being made
	// when the server closed, and one in flight, may be lost.
	if secs < generated-1.1 || secs > generated {
		t.Errorf("kept %.2f s of the %.2f s the receiver made", secs, generated)
	}
	if _, last := headingLogSpan(t, rec+".csv", start); last.T < secs-0.5 {
		t.Errorf("heading log ends at %.2f s, the recording at %.2f s", last.T, secs)
	}
	var got map[string]any
	for _, m := range jsonLines(t, r.stdout) {
		if m["type"] == "bearing" {
			got = m
		}
	}
	if got == nil || got["bearing_deg"] == nil {
		t.Fatalf("the kept part was not analysed into a bearing:\n%s\nstderr:\n%s", r.stdout, r.stderr)
	}
	b, sig := got["bearing_deg"].(float64), got["sigma_deg"].(float64)
	// The truth is the bearing the test receiver was built with; the
	// headings are what the real rotctld reported.
	if err := angle.Wrap180(b - truth); math.Abs(err) > 3*sig || math.Abs(err) > 3 {
		t.Errorf("bearing %.2f° from the kept part, truth %.1f° (sigma %.2f°)", b, truth, sig)
	}
	if left := filesIn(t, tmp); len(left) > 0 {
		t.Errorf("temporary files left behind: %v", left)
	}
}

// TestLiveTurnRecordsHeadingLog: --record with --turn writes the heading
// log the help promises: the steady turn the user gave (START + RATE·t),
// sampled over the recording, which re-runs offline to the same bearing.
// The receiver's Yagi is turned at the same rate on the wall clock.
func TestLiveTurnRecordsHeadingLog(t *testing.T) {
	t.Parallel()
	rtl := newTurnRig(t, 40, turnClock{t0: time.Now(), startDeg: 300, rateDegS: 30})
	rec := filepath.Join(t.TempDir(), "turn")
	r := runNullseek(t, "", "bearing", "rtl_tcp://"+rtl, "--duration", "9", "--turn", "300:30",
		"--freq", "145.5M", "--center", "145.45M", "--rate", "250k", "--gain", "20", "--no-ident", "--record", rec, "--json")
	if r.code != 0 {
		t.Fatalf("exit %d, stderr:\n%s", r.code, r.stderr)
	}
	src, err := sdr.Open(rec+".sigmf-meta", sdr.RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	info := src.Info()
	src.Close()
	secs := float64(info.Samples) / info.SampleRate
	fh, err := os.Open(rec + ".csv")
	if err != nil {
		t.Fatalf("--record with --turn wrote no heading log: %v", err)
	}
	defer fh.Close()
	tr, err := heading.ReadLog(fh, info.Start, heading.True)
	if err != nil {
		t.Fatal(err)
	}
	first, last := tr.Samples[0], tr.Samples[len(tr.Samples)-1]
	if first.T != 0 || math.Abs(last.T-secs) > 1e-6 || len(tr.Samples) < int(secs*20) {
		t.Errorf("heading log %d rows from %.3f s to %.3f s; recording %.3f s", len(tr.Samples), first.T, last.T, secs)
	}
	for _, s := range tr.Samples {
		// The turn as given: 300° at 0 s, 30 °/s clockwise.
		if want := angle.Wrap360(300 + 30*s.T); math.Abs(angle.Wrap180(s.Deg-want)) > 0.001 {
			t.Fatalf("heading log row %.3f s: %.3f°, the turn gives %.3f°", s.T, s.Deg, want)
		}
	}
	if !strings.Contains(r.stderr, "--headings "+rec+".csv") {
		t.Errorf("the re-run hint does not name the heading log:\n%s", r.stderr)
	}
	live := bearingOf(t, r.stdout)
	off := inProcess(t, "bearing", rec+".sigmf-meta", "--headings", rec+".csv", "--freq", "145.5M", "--no-ident", "--json")
	if off.code != 0 {
		t.Fatalf("offline re-run: exit %d\n%s", off.code, off.stderr)
	}
	t.Logf("live %.3f°, offline with the heading log %.3f°", live, bearingOf(t, off.stdout))
	if math.Abs(angle.Wrap180(bearingOf(t, off.stdout)-live)) > 0.005 {
		t.Errorf("offline re-run gave %.3f°, live %.3f°", bearingOf(t, off.stdout), live)
	}
}

// bearingOf is the transmitter bearing in a run's JSON lines.
func bearingOf(t *testing.T, stdout string) float64 {
	t.Helper()
	for _, m := range jsonLines(t, stdout) {
		if m["type"] == "bearing" && m["bearing_deg"] != nil {
			return m["bearing_deg"].(float64)
		}
	}
	t.Fatalf("no transmitter bearing in:\n%s", stdout)
	return 0
}

// TestLiveStatusLine: on a terminal (a Linux pseudo-terminal, devpts(4))
// a live capture redraws a status line with the level and the heading a
// few times a second; into a pipe it writes a plain line every 10 s (none
// in a 3 s capture) and never a control sequence.
func TestLiveStatusLine(t *testing.T) {
	t.Parallel()
	rig := newLiveRig(t, 40, false)
	args := []string{"bearing", "rtl_tcp://" + rig.rtlAddr, "--duration", "3", "--turn", "0:30",
		"--freq", "145.5M", "--center", "145.45M", "--rate", "250k", "--no-ident"}
	master, slave, err := openPTY()
	if err != nil {
		testtool.Unavailable(t, "a pseudo-terminal", err)
	}
	defer master.Close()
	cmd := exec.Command(os.Args[0], append([]string{"-test.run=^TestNullseekHelperProcess$", "--"}, args...)...)
	cmd.Env = append(os.Environ(), "NULLSEEK_HELPER_MAIN=1")
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, slave
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	slave.Close()
	var tty bytes.Buffer
	read := make(chan struct{})
	go func() {
		defer close(read)
		buf := make([]byte, 4096)
		for {
			n, err := master.Read(buf)
			tty.Write(buf[:n])
			if err != nil {
				return // EIO once the child has exited
			}
		}
	}()
	cmd.Wait()
	<-read
	got := tty.String()
	redraws := strings.Count(got, "\x1b[K")
	t.Logf("%d redraws; last status: %q", redraws, lastStatus(got))
	// 3 s at 4 a second, less connecting.
	if redraws < 6 || !strings.Contains(got, "dBFS") || !strings.Contains(got, "turn ") || !strings.Contains(got, "/3.0s") {
		t.Errorf("terminal output has %d status redraws:\n%q", redraws, got)
	}
	r := runNullseek(t, "", args...)
	if strings.Contains(r.stderr, "dBFS") || strings.Contains(r.stderr, "\x1b[") {
		t.Errorf("status line written into a pipe:\n%q", r.stderr)
	}
}

// lastStatus is the last status line drawn in terminal output s.
func lastStatus(s string) string {
	parts := strings.Split(s, "\r")
	for i := len(parts) - 1; i >= 0; i-- {
		if strings.Contains(parts[i], "dBFS") {
			return strings.TrimSuffix(parts[i], "\x1b[K")
		}
	}
	return ""
}
