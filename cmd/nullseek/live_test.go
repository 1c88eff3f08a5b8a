package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"log/slog"
	"math"
	"math/rand"
	"net"
	"nullseek/internal/angle"
	"nullseek/internal/testtool"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/sdr"
	"nullseek/sim"
)

// TestNullseekHelperProcess is not a test: the tests below re-run the test
// binary with NULLSEEK_HELPER_MAIN=1 to run the command line in a child
// process, as a user would (own stdout, stderr and exit status).
func TestNullseekHelperProcess(t *testing.T) {
	if os.Getenv("NULLSEEK_HELPER_MAIN") != "1" {
		t.Skip("helper process for the command-line tests")
	}
	args := os.Args
	for i, a := range args {
		if a == "--" {
			args = args[i+1:]
			break
		}
	}
	os.Exit(mainStatus(args))
}

// nullseekRun is a finished child run of the command line.
type nullseekRun struct {
	stdout, stderr string
	code           int
}

// startNullseek starts the command line in a child process with TMPDIR
// set to tmp (when not empty).
func startNullseek(t *testing.T, tmp string, args ...string) (*exec.Cmd, *bytes.Buffer, *bytes.Buffer) {
	t.Helper()
	cmd := exec.Command(os.Args[0], append([]string{"-test.run=^TestNullseekHelperProcess$", "--"}, args...)...)
	cmd.Env = append(os.Environ(), "NULLSEEK_HELPER_MAIN=1")
	if tmp != "" {
		cmd.Env = append(cmd.Env, "TMPDIR="+tmp)
	}
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	return cmd, &out, &errb
}

func waitNullseek(t *testing.T, cmd *exec.Cmd, out, errb *bytes.Buffer) nullseekRun {
	t.Helper()
	err := cmd.Wait()
	r := nullseekRun{stdout: out.String(), stderr: errb.String()}
	if ee, ok := err.(*exec.ExitError); ok {
		r.code = ee.ExitCode()
	} else if err != nil {
		t.Fatal(err)
	}
	return r
}

func runNullseek(t *testing.T, tmp string, args ...string) nullseekRun {
	t.Helper()
	c, o, e := startNullseek(t, tmp, args...)
	return waitNullseek(t, c, o, e)
}

// inProcess runs the command line in-process as main does (execute), for
// the checks of flags, help and errors that need no process of its own
// (no signal, no exit status beyond non-zero, no TMPDIR).
func inProcess(t *testing.T, args ...string) nullseekRun {
	t.Helper()
	var out, errb bytes.Buffer
	err := execute(args, strings.NewReader(""), &out, &errb)
	r := nullseekRun{stdout: out.String(), stderr: errb.String()}
	if err != nil {
		r.code = exitCode(err)
	}
	return r
}

// azHistory records a rotator's polled azimuth and interpolates it.
type azHistory struct {
	mu sync.Mutex
	t  []time.Time
	az []float64
}

func (h *azHistory) add(t time.Time, az float64) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if n := len(h.t); n > 0 && !t.After(h.t[n-1]) {
		return
	}
	h.t = append(h.t, t)
	h.az = append(h.az, az)
}

// at interpolates linearly (rotctld azimuths are not wrapped, so plain
// linear interpolation is right), extrapolating at most 0.2 s past the
// last poll.
func (h *azHistory) at(t time.Time) (float64, bool) {
	h.mu.Lock()
	defer h.mu.Unlock()
	n := len(h.t)
	if n == 0 {
		return 0, false
	}
	if !t.After(h.t[0]) || n == 1 {
		return h.az[0], true
	}
	i := sort.Search(n, func(i int) bool { return h.t[i].After(t) })
	if i == n {
		i = n - 1
		if t.Sub(h.t[n-1]) > 200*time.Millisecond {
			t = h.t[n-1].Add(200 * time.Millisecond)
		}
	}
	a, b := h.t[i-1], h.t[i]
	f := float64(t.Sub(a)) / float64(b.Sub(a))
	return h.az[i-1] + f*(h.az[i]-h.az[i-1]), true
}

// turningSource is a receiver in front of a Yagi on the rotator: a carrier
// whose level follows the pattern pointed at the rotator's current azimuth,
// plus noise. Like rtl_tcp (librtlsdr.c rtlsdr_read_async, osmocom/rtl-sdr @ae0dd6d: the default transfer
// of 16·32·512 bytes, rtl-sdr.h) it hands samples over one transfer at a
// time, when the transfer's last sample has been taken; sample n is taken
// at t0 + n/rate, t0 being the first Read.
type turningSource struct {
	rate, offsetHz   float64
	amp, sigma, onS  float64
	truthDeg         float64
	pat              bearing.Pattern
	hist             *azHistory
	chunk            int
	t0               time.Time
	n                int64
	buf              []complex64
	pos              int
	rng              *rand.Rand
	phase, gain      float64
	gainAt, gainStep int64
	// sent, when not nil, keeps the cu8 bytes of every sample generated,
	// as the rtl_tcp replay server sends them (unsigned 8-bit, x·127.5 +
	// 127.5 rounded and clamped: the cu8 of librtlsdr and SigMF).
	sentMu sync.Mutex
	sent   []byte
}

func cu8Code(x float32) byte { return byte(max(0, min(255, math.Round(float64(x)*127.5+127.5)))) }

// sentBytes is a copy of the bytes generated so far.
func (s *turningSource) sentBytes() []byte {
	s.sentMu.Lock()
	defer s.sentMu.Unlock()
	return append([]byte(nil), s.sent...)
}

func (s *turningSource) Info() sdr.Info {
	return sdr.Info{SampleRate: s.rate, Format: "cf32_le", Name: "turning test source", Samples: -1, ClipLevel: 1}
}
func (s *turningSource) Close() error { return nil }

func (s *turningSource) Read(dst []complex64) (int, error) {
	if s.pos >= len(s.buf) {
		if s.t0.IsZero() {
			s.t0 = time.Now()
			s.gainStep = int64(s.rate / 1000)
			s.gainAt = -1
		}
		due := s.t0.Add(time.Duration(float64(s.n+int64(s.chunk)) / s.rate * float64(time.Second)))
		time.Sleep(time.Until(due))
		if cap(s.buf) < s.chunk {
			s.buf = make([]complex64, s.chunk)
		}
		s.buf = s.buf[:s.chunk]
		for i := range s.buf {
			ts := float64(s.n) / s.rate
			if s.gainAt < 0 || s.n-s.gainAt >= s.gainStep {
				az, ok := s.hist.at(s.t0.Add(time.Duration(ts * float64(time.Second))))
				s.gain = 0
				if ok {
					// bearing convention: level = c + G(θ − φ)
					s.gain = math.Pow(10, sim.GainDB(s.pat, s.truthDeg-az)/20)
				}
				s.gainAt = s.n
			}
			v := complex(s.rng.NormFloat64()*s.sigma, s.rng.NormFloat64()*s.sigma)
			if ts >= s.onS {
				s.phase += 2 * math.Pi * s.offsetHz / s.rate
				if s.phase > math.Pi {
					s.phase -= 2 * math.Pi
				}
				sn, cs := math.Sincos(s.phase)
				v += complex(s.amp*s.gain*cs, s.amp*s.gain*sn)
			}
			s.buf[i] = complex64(v)
			s.n++
		}
		s.pos = 0
		if s.sent != nil {
			s.sentMu.Lock()
			for _, v := range s.buf {
				s.sent = append(s.sent, cu8Code(real(v)), cu8Code(imag(v)))
			}
			s.sentMu.Unlock()
		}
	}
	k := copy(dst, s.buf[s.pos:])
	s.pos += k
	return k, nil
}

// liveRig is a test receiver (rtl_tcp replay of a turningSource) and a
// real rotctld dummy rotator.
type liveRig struct {
	rtlAddr, rotAddr string
	rotProc          *os.Process
	stopServer       context.CancelFunc
	serverDone       chan error
	// hist is the rotator's azimuth as the rig's own connection polls it;
	// src is the receiver's signal.
	hist    *azHistory
	src     *turningSource
	pollErr atomic.Value // why the rig's own poll stopped, if it did
}

// azNow is the rotator's latest polled azimuth.
func (r *liveRig) azNow() float64 {
	r.hist.mu.Lock()
	defer r.hist.mu.Unlock()
	if len(r.hist.az) == 0 {
		return math.NaN()
	}
	return r.hist.az[len(r.hist.az)-1]
}

// waitAz waits until the rotator has turned to deg or more; if it does not
// within the time, it stops the child run c and fails with its output.
func (r *liveRig) waitAz(t *testing.T, deg float64, within time.Duration, c *exec.Cmd, out, errb *bytes.Buffer) {
	t.Helper()
	for deadline := time.Now().Add(within); !(r.azNow() >= deg); time.Sleep(20 * time.Millisecond) {
		if time.Now().After(deadline) {
			c.Process.Kill()
			run := waitNullseek(t, c, out, errb)
			t.Fatalf("the rotator did not reach %.0f° within %v (at %.2f°; the test's poll: %v); the run's stderr:\n%s", deg, within, r.azNow(), r.pollErr.Load(), run.stderr)
		}
	}
}

const (
	liveRate     = 250000.0 // an RTL2832 rate (225001–300000 Hz; librtlsdr.c rtlsdr_set_sample_rate)
	liveCenterHz = 145.45e6
	liveChanHz   = 145.5e6
)

func newLiveRig(t *testing.T, truthDeg float64, withRotator bool) *liveRig {
	t.Helper()
	hist := &azHistory{}
	rig := &liveRig{hist: hist}
	ctx, cancel := context.WithCancel(context.Background())
	t.Cleanup(cancel)
	if withRotator {
		rig.rotAddr, rig.rotProc = testtool.Rotctld(t)
		// The source learns the antenna's azimuth on its own connection.
		rot, err := heading.DialRotator(ctx, rig.rotAddr, heading.RotatorOptions{})
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { rot.Close() })
		go func() {
			if err := rot.Poll(ctx, 25, hist.add); err != nil {
				rig.pollErr.Store(err.Error())
			}
		}()
	} else {
		hist.add(time.Now(), 0)
	}
	yagi, err := bearing.Yagi(60, 18)
	if err != nil {
		t.Fatal(err)
	}
	src := &turningSource{
		rate: liveRate, offsetHz: liveChanHz - liveCenterHz,
		amp: math.Pow(10, -10.0/20), sigma: math.Sqrt(math.Pow(10, -35.0/10) / 2), onS: 2,
		truthDeg: truthDeg, pat: yagi, hist: hist, chunk: 16 * 32 * 512 / 2,
		rng: rand.New(rand.NewSource(11)), sent: []byte{},
	}
	rig.src = src
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	rig.rtlAddr = ln.Addr().String()
	sctx, scancel := context.WithCancel(ctx)
	rig.stopServer = scancel
	rig.serverDone = make(chan error, 1)
	go func() {
		rig.serverDone <- sdr.ServeRTLTCP(sctx, ln, src, sdr.ServeOptions{Paced: true, Logger: slog.New(slog.NewTextHandler(nopWriter{}, nil))})
	}()
	return rig
}

type nopWriter struct{}

func (nopWriter) Write(p []byte) (int, error) { return len(p), nil }

// jsonLines decodes the JSON objects printed one per line.
func jsonLines(t *testing.T, s string) []map[string]any {
	t.Helper()
	var out []map[string]any
	sc := bufio.NewScanner(strings.NewReader(s))
	for sc.Scan() {
		var m map[string]any
		if err := json.Unmarshal(sc.Bytes(), &m); err != nil {
			t.Fatalf("not a JSON line: %q: %v", sc.Text(), err)
		}
		out = append(out, m)
	}
	return out
}

// filesIn lists a directory's entries (recursively, relative names).
func filesIn(t *testing.T, dir string) []string {
	t.Helper()
	var names []string
	filepath.WalkDir(dir, func(p string, d os.DirEntry, err error) error {
		if err == nil && p != dir {
			rel, _ := filepath.Rel(dir, p)
			names = append(names, rel)
		}
		return nil
	})
	return names
}

// oneLine checks that a failed run printed exactly one error line.
func oneLine(t *testing.T, r nullseekRun, want ...string) {
	t.Helper()
	if r.code == 0 {
		t.Fatalf("exit status 0, want failure; stderr:\n%s", r.stderr)
	}
	var errLines []string
	for _, l := range strings.Split(strings.TrimSpace(r.stderr), "\n") {
		if strings.HasPrefix(l, "nullseek: ") {
			errLines = append(errLines, l)
		}
	}
	if len(errLines) != 1 {
		t.Fatalf("want one error line, got %d; stderr:\n%s", len(errLines), r.stderr)
	}
	if strings.Contains(r.stderr, "panic") || strings.Contains(r.stderr, "goroutine ") {
		t.Fatalf("stack trace in stderr:\n%s", r.stderr)
	}
	for _, w := range want {
		if !strings.Contains(errLines[0], w) {
			t.Errorf("error line %q does not mention %q", errLines[0], w)
		}
	}
}

// TestLiveBearingRotctldSweep sweeps Hamlib's real rotctld dummy rotator
// (Hamlib 4.5.4, model 1, 6°/s; Hamlib rigs/dummy/rot_dummy.c) over 150° while a Yagi
// (60°, 18 dB F/B) in front of an rtl_tcp-like receiver sees a carrier at
// a known bearing, and checks the live `bearing` result against it.
func TestLiveBearingRotctldSweep(t *testing.T) {
	t.Parallel()
	const truth = 83.0
	rig := newLiveRig(t, truth, true)
	dir := t.TempDir()
	rec := filepath.Join(dir, "session")
	r := runNullseek(t, "", "bearing", "rtl_tcp://"+rig.rtlAddr,
		"--rotator", rig.rotAddr, "--sweep", "0:150",
		"--center", "145.45M", "--freq", "145.5M", "--rate", "250k", "--gain", "20",
		"--no-ident", "--antenna", "yagi", "--margin", "1.5", "--record", rec, "--json")
	if r.code != 0 {
		t.Fatalf("exit %d\nstderr:\n%s", r.code, r.stderr)
	}
	var got map[string]any
	for _, m := range jsonLines(t, r.stdout) {
		if m["type"] == "bearing" {
			got = m
		}
	}
	if got == nil || got["bearing_deg"] == nil {
		t.Fatalf("no transmitter bearing in output:\n%s\nstderr:\n%s", r.stdout, r.stderr)
	}
	b, sig, fit := got["bearing_deg"].(float64), got["sigma_deg"].(float64), got["fit_sigma_deg"].(float64)
	errDeg := angle.Wrap180(b - truth)
	t.Logf("live sweep: bearing %.2f° (truth %.1f°), error %+.2f°, sigma %.2f° (fit %.2f°)", b, truth, errDeg, sig, fit)
	// The truth is the bearing the test source was built with; the
	// headings are what the real rotctld reported.
	if math.Abs(errDeg) > 3*sig || math.Abs(errDeg) > 2 {
		t.Errorf("bearing %.2f° is %+.2f° from the truth %.1f° (sigma %.2f°): want within 3σ and 2°", b, errDeg, truth, sig)
	}
	// The recording and its heading log re-run offline to the same answer.
	for _, f := range []string{rec + ".sigmf-meta", rec + ".sigmf-data", rec + ".csv"} {
		if _, err := os.Stat(f); err != nil {
			t.Fatalf("--record left no %s: %v", f, err)
		}
	}
	off := inProcess(t, "bearing", rec+".sigmf-meta", "--headings", rec+".csv",
		"--freq", "145.5M", "--no-ident", "--antenna", "yagi", "--json")
	if off.code != 0 {
		t.Fatalf("offline re-run: exit %d\n%s", off.code, off.stderr)
	}
	for _, m := range jsonLines(t, off.stdout) {
		if m["type"] == "bearing" {
			if ob := m["bearing_deg"].(float64); math.Abs(angle.Wrap180(ob-b)) > 0.005 {
				t.Errorf("offline re-run gave %.2f°, live %.2f°", ob, b)
			}
		}
	}
}

// TestLiveRotctldKilledMidSweep kills rotctld while the rotator turns: the
// command must fail with one line naming the rotator, and leave no files.
func TestLiveRotctldKilledMidSweep(t *testing.T) {
	t.Parallel()
	rig := newLiveRig(t, 40, true)
	dir, tmp := t.TempDir(), t.TempDir()
	c, o, e := startNullseek(t, tmp, "bearing", "rtl_tcp://"+rig.rtlAddr,
		"--rotator", rig.rotAddr, "--sweep", "0:150", "--freq", "145.5M", "--center", "145.45M",
		"--rate", "250k", "--no-ident", "--record", filepath.Join(dir, "cut"))
	time.Sleep(4 * time.Second)
	rig.rotProc.Kill()
	r := waitNullseek(t, c, o, e)
	t.Logf("stderr: %s", r.stderr)
	oneLine(t, r, "rotator", rig.rotAddr)
	if left := filesIn(t, dir); len(left) > 0 {
		t.Errorf("recording files left behind: %v", left)
	}
	if left := filesIn(t, tmp); len(left) > 0 {
		t.Errorf("temporary files left behind: %v", left)
	}
}

// TestLiveReceiverPulled stops the rtl_tcp server mid-capture (a steady
// hand turn, no rotator, no --record so the capture goes to a temporary
// directory): one error line, nothing left behind.
func TestLiveReceiverPulled(t *testing.T) {
	t.Parallel()
	rig := newLiveRig(t, 40, false)
	tmp := t.TempDir()
	c, o, e := startNullseek(t, tmp, "bearing", "rtl_tcp://"+rig.rtlAddr,
		"--duration", "20", "--turn", "0:30", "--freq", "145.5M", "--center", "145.45M",
		"--rate", "250k", "--no-ident")
	time.Sleep(3 * time.Second)
	rig.stopServer()
	r := waitNullseek(t, c, o, e)
	t.Logf("stderr: %s", r.stderr)
	oneLine(t, r, "rtl_tcp", rig.rtlAddr)
	if left := filesIn(t, tmp); len(left) > 0 {
		t.Errorf("temporary files left behind: %v", left)
	}
}

// TestLiveUnreachable: receiver or rotator not listening, and flag misuse,
// each give one clear line and a non-zero exit before anything is recorded.
func TestLiveUnreachable(t *testing.T) {
	t.Parallel()
	closed := func() string {
		ln, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		a := ln.Addr().String()
		ln.Close()
		return a
	}
	rig := newLiveRig(t, 40, false)
	dir := t.TempDir()
	noRx, noRot := closed(), closed()
	cases := []struct {
		name string
		args []string
		want []string
	}{
		{"receiver", []string{"rtl_tcp://" + noRx, "--rotator", noRot, "--sweep", "0:90", "--freq", "145.5M"}, []string{"rtl_tcp", noRx}},
		{"rotator", []string{"rtl_tcp://" + rig.rtlAddr, "--rotator", noRot, "--sweep", "0:90", "--freq", "145.5M"}, []string{"rotator", noRot, "rotctld"}},
		{"no sweep", []string{"rtl_tcp://" + noRx, "--rotator", noRot, "--freq", "145.5M"}, []string{"--sweep"}},
		{"no tuning", []string{"rtl_tcp://" + noRx, "--rotator", noRot, "--sweep", "0:90"}, []string{"--freq"}},
		{"bad step", []string{"rtl_tcp://" + noRx, "--rotator", noRot, "--step", "0:-10:90:1", "--freq", "145.5M"}, []string{"step"}},
		{"two heading sources", []string{"rtl_tcp://" + noRx, "--rotator", noRot, "--sweep", "0:90", "--turn", "0:30", "--freq", "145.5M"}, []string{"--rotator gives the headings"}},
		{"live flag on a file", []string{filepath.Join(dir, "x.sigmf-meta"), "--rotator", noRot}, []string{"--rotator", "live receiver"}},
		{"no duration", []string{"rtl_tcp://" + noRx, "--turn", "0:30", "--freq", "145.5M"}, []string{"--duration"}},
	}
	for _, tc := range cases {
		r := runNullseek(t, "", append([]string{"bearing", "--record", filepath.Join(dir, "r")}, tc.args...)...)
		t.Run(tc.name, func(t *testing.T) { oneLine(t, r, tc.want...) })
	}
	if left := filesIn(t, dir); len(left) > 0 {
		t.Errorf("files left behind: %v", left)
	}
}

// TestLiveHelp: the live flags' help says --iq-latency's default in words,
// not as the value "rtl_tcp", and names its value as seconds; the former
// value is still accepted.
func TestLiveHelp(t *testing.T) {
	t.Parallel()
	r := inProcess(t, "bearing", "--help")
	if r.code != 0 {
		t.Fatalf("exit %d\n%s", r.code, r.stderr)
	}
	var line string
	for _, l := range strings.Split(r.stdout, "\n") {
		if strings.Contains(l, "--iq-latency") {
			line = l
		}
	}
	if !strings.Contains(line, "--iq-latency seconds") || !strings.Contains(line, "(default: measured from the stream") || strings.Contains(line, `"rtl_tcp"`) {
		t.Errorf("--iq-latency help: %q", line)
	}
	for _, w := range []string{"Ctrl-C", "130 or 143", "status line"} {
		if !strings.Contains(r.stdout, w) {
			t.Errorf("bearing --help does not mention %q", w)
		}
	}
	// Nothing listens on port 1: the flags are accepted and the receiver
	// is what fails.
	r = runNullseek(t, "", "bearing", "rtl_tcp://127.0.0.1:1", "--iq-latency", "rtl_tcp", "--duration", "1", "--turn", "0:30", "--freq", "145.5M")
	oneLine(t, r, "rtl_tcp", "127.0.0.1:1")
}
