//go:build linux

package main

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"testing"
	"time"

	"nullseek/internal/testtool"
)

// The hostile-input corpus (Linux: it makes FIFOs and sets RLIMIT_FSIZE
// through setrlimit(2)): every command (scan, slots, bearing,
// calibrate, fix, demo, carriers via scan --list, and the live forms
// against dead, refusing, silent and garbage-speaking servers on
// loopback) is run as the real binary on inputs meant to break it. The
// cases are one table (hostileCases, hostile_cases_test.go); each states
// its command line, the inputs it makes and what must happen. The
// contract checked for every failing case is the project's rule for bad
// input (issue 10, "Checks"):
//
//   - the run ends within the case's time limit (default hostileTimeout);
//   - its exit status is 1, or the case's documented code;
//   - stderr ends in exactly one "nullseek: …" line naming what is wrong
//     (the case's fragment), and holds nothing else unless the case is a
//     live capture or an analysis that prints notes on the way;
//   - no panic, runtime error or goroutine dump;
//   - stdout is empty (a failing run prints no half result) unless the
//     case says the command deliberately reports what it could do;
//   - no file is left behind or changed: the case's input, output
//     (working) and temporary (TMPDIR) folders are compared before and
//     after, down to each file's content, except the outputs the case
//     names as deliberately kept.
//
// A full disk is made with RLIMIT_FSIZE on the child (setrlimit(2): a
// write past the limit fails with EFBIG, enforced even for root; the Go
// runtime ignores SIGXFSZ, os/signal documentation, so the write returns
// the error). A tmpfs cannot be mounted by an unprivileged CI job.
//
// Each case's outcome is classified, worst first: hang (killed at its
// time limit), panic, partial (files left behind or changed), unclear
// (wrong exit status, not one error line, the fragment missing, a half
// result on stdout) or clear. The test fails on any outcome but clear
// and logs the tally by outcome.

// hostileTimeout is a case's default time limit. Cases that wait on a
// receiver's or rotator's own timeouts (5 s and 2 s) state their own.
const hostileTimeout = 10 * time.Second

// hostileCase is one entry of the corpus.
type hostileCase struct {
	name string
	// args is the command line. Placeholders: {fx} the shared fixture
	// folder (read-only: recordings and heading logs every case may use),
	// {in} the case's input folder, {out} its output folder (the working
	// directory), {rtl}, {rot}, {nmea} the fake servers' HOST:PORT.
	args []string
	// files are written into {in} before the run: name → content. A
	// content "@fx/NAME" is a copy of a fixture file.
	files map[string]string
	// setup makes further inputs (pipes, links, large files).
	setup func(t *testing.T, d caseDirs)
	// stdin is the child's standard input.
	stdin string
	// rtl, rot, nmea name the fake rtl_tcp, rotctld and NMEA servers the
	// case runs against (see fakeServer).
	rtl, rot, nmea string
	// fsize limits the size of every file the child writes (RLIMIT_FSIZE,
	// bytes): a full disk.
	fsize int64
	// code is the expected exit status; 0 means 1.
	code int
	// ok marks a case that must succeed (exit 0) with check true.
	ok    bool
	check func(d caseDirs, r hostileRun) error
	// want is a fragment the error line must contain (what is wrong),
	// after the case's folders in it are written as their placeholders;
	// not is one it must not contain (advice that names no real flag, a
	// count that is wrong).
	want, not string
	// notes allows lines before the error line (a live capture's or an
	// analysis's progress notes).
	notes bool
	// stdout allows output on stdout (a command that reports what it did
	// before failing on an optional output).
	stdout bool
	// keep lists the files (relative to the case root, e.g.
	// "out/f.geojson") the case expects to appear or change.
	keep []string
	// timeout is the case's time limit (0: hostileTimeout).
	timeout time.Duration
}

// caseDirs are a case's folders.
type caseDirs struct{ root, fx, in, out, tmp string }

// hostileRun is one finished run.
type hostileRun struct {
	code           int
	stdout, stderr string
	took           time.Duration
	hung           bool
	signal         string // set when the child died of a signal
}

// Outcomes, worst first.
const (
	outHang    = "hang"
	outPanic   = "panic"
	outPartial = "partial"
	outUnclear = "unclear"
	outClear   = "clear"
)

var outcomeOrder = []string{outClear, outUnclear, outPanic, outHang, outPartial}

// hostileFixtures is the shared, read-only fixture folder: the steps96k
// GNU Radio recording and the turning-antenna recording made by
// testdata/hostile/make_turning.py (numpy), with its heading log.
var (
	hostileFxOnce sync.Once
	hostileFxDir  string
	hostileFxErr  error
)

func hostileFixtures(t *testing.T) string {
	t.Helper()
	py := testtool.Python(t, "numpy")
	hostileFxOnce.Do(func() {
		dir, err := os.MkdirTemp("", "nullseek-hostile-fx-")
		if err != nil {
			hostileFxErr = err
			return
		}
		hostileFxDir = dir
		script := filepath.Join("..", "..", "testdata", "hostile", "make_turning.py")
		if out, err := exec.Command(py, script, "--out", dir).CombinedOutput(); err != nil {
			hostileFxErr = fmt.Errorf("%s: %v\n%s", script, err, out)
			return
		}
		for _, src := range []string{stepsMeta, stepsData} {
			b, err := os.ReadFile(src)
			if err == nil {
				err = os.WriteFile(filepath.Join(dir, filepath.Base(src)), b, 0o644)
			}
			if err != nil {
				hostileFxErr = err
				return
			}
		}
	})
	if hostileFxErr != nil {
		t.Fatal(hostileFxErr)
	}
	return hostileFxDir
}

// expand replaces the placeholders in s.
func (d caseDirs) expand(s string, addrs map[string]string) string {
	r := []string{"{fx}", d.fx, "{in}", d.in, "{out}", d.out, "{tmp}", d.tmp}
	for k, v := range addrs {
		r = append(r, "{"+k+"}", v)
	}
	return strings.NewReplacer(r...).Replace(s)
}

// fileState is what the before/after comparison looks at.
type fileState struct {
	kind string // "file", "dir", "link -> TARGET", "fifo", "other"
	size int64
	sum  string
	mode fs.FileMode
}

// snapshot walks root, reading regular files' content (FIFOs are not
// opened).
func snapshot(t *testing.T, root string) map[string]fileState {
	t.Helper()
	m := map[string]fileState{}
	err := filepath.WalkDir(root, func(p string, de fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, p)
		fi, err := os.Lstat(p)
		if err != nil {
			return err
		}
		st := fileState{mode: fi.Mode().Perm()}
		switch mt := fi.Mode(); {
		case mt&fs.ModeSymlink != 0:
			to, _ := os.Readlink(p)
			st.kind = "link -> " + to
		case mt.IsDir():
			st.kind = "dir"
		case mt&fs.ModeNamedPipe != 0:
			st.kind = "fifo"
		case mt.IsRegular():
			st.kind, st.size = "file", fi.Size()
			f, err := os.Open(p)
			if err != nil {
				return err
			}
			h := sha256.New()
			_, err = io.Copy(h, f)
			f.Close()
			if err != nil {
				return err
			}
			st.sum = hex.EncodeToString(h.Sum(nil))
		default:
			st.kind = "other"
		}
		m[rel] = st
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// diffSnapshots lists what changed between two snapshots, leaving out the
// paths in keep.
func diffSnapshots(before, after map[string]fileState, keep []string) []string {
	kept := map[string]bool{}
	for _, k := range keep {
		kept[filepath.Clean(k)] = true
	}
	var d []string
	for p, b := range before {
		a, ok := after[p]
		switch {
		case kept[p]:
		case !ok:
			d = append(d, "removed "+p)
		case a != b:
			d = append(d, fmt.Sprintf("changed %s (%s %d B %.8s → %s %d B %.8s)", p, b.kind, b.size, b.sum, a.kind, a.size, a.sum))
		}
	}
	for p, a := range after {
		if _, ok := before[p]; !ok && !kept[p] {
			d = append(d, fmt.Sprintf("left %s (%s, %d B)", p, a.kind, a.size))
		}
	}
	sort.Strings(d)
	return d
}

// runHostile runs the binary in d.out with the case's limits.
func runHostile(t *testing.T, c hostileCase, d caseDirs, args []string, limit time.Duration) hostileRun {
	t.Helper()
	bin := cliBuild(t)
	ctx, cancel := context.WithTimeout(context.Background(), limit)
	defer cancel()
	name, argv := bin, args
	env := append(os.Environ(), "TMPDIR="+d.tmp, "NULLSEEK_HELPER_MAIN=")
	if c.fsize > 0 {
		// The test binary sets the limit on itself and execs the command
		// (hostileExecWithLimit), so the limit holds from its first write.
		name = os.Args[0]
		env = append(env, fmt.Sprintf("%s=%d", hostileFsizeEnv, c.fsize), hostileExecEnv+"="+bin)
	}
	cmd := exec.CommandContext(ctx, name, argv...)
	cmd.Dir, cmd.Env = d.out, env
	cmd.Stdin = strings.NewReader(c.stdin)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	cmd.WaitDelay = 2 * time.Second
	t0 := time.Now()
	err := cmd.Run()
	r := hostileRun{stdout: out.String(), stderr: errb.String(), took: time.Since(t0), hung: ctx.Err() != nil}
	var ee *exec.ExitError
	switch {
	case err == nil:
	case errors.As(err, &ee):
		r.code = ee.ExitCode()
		if ws, ok := ee.Sys().(interface{ Signaled() bool }); ok && ws.Signaled() && !r.hung {
			r.signal = ee.String()
		}
	case r.hung:
	default:
		t.Fatalf("run %v: %v", args, err)
	}
	return r
}

// classify returns the case's outcome and why.
func classify(c hostileCase, r hostileRun, changes []string) (string, string) {
	if r.hung {
		return outHang, fmt.Sprintf("still running after %v (killed)", r.took.Round(time.Millisecond))
	}
	for _, s := range []string{"panic:", "goroutine ", "fatal error:", "runtime error", "SIGSEGV"} {
		if strings.Contains(r.stderr, s) {
			return outPanic, fmt.Sprintf("%q on stderr: %.300s", s, r.stderr)
		}
	}
	if r.signal != "" {
		return outPanic, "died: " + r.signal
	}
	if len(changes) > 0 {
		return outPartial, strings.Join(changes, "; ")
	}
	if c.ok {
		if r.code != 0 {
			return outUnclear, fmt.Sprintf("exit %d, want success: %s", r.code, strings.TrimSpace(r.stderr))
		}
		return outClear, ""
	}
	want := c.code
	if want == 0 {
		want = 1
	}
	if r.code != want {
		return outUnclear, fmt.Sprintf("exit %d, want %d; stderr %q", r.code, want, strings.TrimSpace(r.stderr))
	}
	lines := strings.Split(strings.TrimRight(r.stderr, "\n"), "\n")
	last := lines[len(lines)-1]
	if !strings.HasSuffix(r.stderr, "\n") || !strings.HasPrefix(last, "nullseek: ") {
		return outUnclear, fmt.Sprintf("stderr does not end in one \"nullseek: \" line: %q", r.stderr)
	}
	for _, l := range lines[:len(lines)-1] {
		if !c.notes || strings.HasPrefix(l, "nullseek: ") || strings.TrimSpace(l) == "" {
			return outUnclear, fmt.Sprintf("more than the error line on stderr: %q", r.stderr)
		}
	}
	if !strings.Contains(last, c.want) {
		return outUnclear, fmt.Sprintf("error line does not say %q: %s", c.want, last)
	}
	if c.not != "" && strings.Contains(last, c.not) {
		return outUnclear, fmt.Sprintf("error line says %q: %s", c.not, last)
	}
	if r.stdout != "" && !c.stdout {
		return outUnclear, fmt.Sprintf("half a result on stdout: %.200q", r.stdout)
	}
	return outClear, ""
}

// TestHostileCorpus runs every case of the corpus.
func TestHostileCorpus(t *testing.T) {
	fx := hostileFixtures(t)
	cliBuild(t)
	fxBefore := snapshot(t, fx)
	cases := hostileCases(t)
	names := map[string]bool{}
	for _, c := range cases {
		if names[c.name] {
			t.Fatalf("two cases named %q", c.name)
		}
		names[c.name] = true
	}
	var mu sync.Mutex
	tally := map[string]int{}
	byOutcome := map[string][]string{}
	t.Run("case", func(t *testing.T) {
		for _, c := range cases {
			t.Run(c.name, func(t *testing.T) {
				t.Parallel()
				outcome, why, line := runCase(t, c, fx)
				mu.Lock()
				tally[outcome]++
				byOutcome[outcome] = append(byOutcome[outcome], c.name+"\t"+line+"\t"+why)
				mu.Unlock()
				if outcome != outClear {
					t.Errorf("%s: %s", outcome, why)
				}
			})
		}
	})
	var parts []string
	for _, o := range outcomeOrder {
		parts = append(parts, fmt.Sprintf("%s %d", o, tally[o]))
	}
	t.Logf("hostile corpus: %d cases: %s", len(cases), strings.Join(parts, ", "))
	if p := os.Getenv("NULLSEEK_HOSTILE_TALLY"); p != "" {
		var b strings.Builder
		fmt.Fprintf(&b, "%d cases: %s\n", len(cases), strings.Join(parts, ", "))
		for _, o := range outcomeOrder {
			sort.Strings(byOutcome[o])
			for _, n := range byOutcome[o] {
				fmt.Fprintf(&b, "%s\t%s\n", o, n)
			}
		}
		if err := os.WriteFile(p, []byte(b.String()), 0o644); err != nil {
			t.Error(err)
		}
	}
	if d := diffSnapshots(fxBefore, snapshot(t, fx), nil); len(d) > 0 {
		t.Errorf("the shared fixtures changed: %v", d)
	}
}

// runCase sets a case up, runs it and classifies what happened.
func runCase(t *testing.T, c hostileCase, fx string) (outcome, why, line string) {
	root := t.TempDir()
	d := caseDirs{root: root, fx: fx, in: filepath.Join(root, "in"), out: filepath.Join(root, "out"), tmp: filepath.Join(root, "tmp")}
	for _, p := range []string{d.in, d.out, d.tmp} {
		if err := os.Mkdir(p, 0o755); err != nil {
			t.Fatal(err)
		}
	}
	addrs := map[string]string{}
	for _, s := range []struct{ key, kind string }{{"rtl", c.rtl}, {"rot", c.rot}, {"nmea", c.nmea}} {
		if s.kind != "" {
			addrs[s.key] = fakeServer(t, s.key, s.kind)
		}
	}
	for name, content := range c.files {
		var b []byte
		if f, ok := strings.CutPrefix(content, "@fx/"); ok {
			var err error
			if b, err = os.ReadFile(filepath.Join(fx, f)); err != nil {
				t.Fatal(err)
			}
		} else {
			b = []byte(d.expand(content, addrs))
		}
		writeFile(t, filepath.Join(d.in, name), b)
	}
	if c.setup != nil {
		c.setup(t, d)
	}
	args := make([]string, len(c.args))
	for i, a := range c.args {
		args[i] = d.expand(a, addrs)
	}
	limit := c.timeout
	if limit == 0 {
		limit = hostileTimeout
	}
	before := snapshot(t, root)
	r := runHostile(t, c, d, args, limit)
	// The folders' names hold the case's name: messages are matched with
	// placeholders in their place.
	folders := strings.NewReplacer(d.in, "{in}", d.out, "{out}", d.tmp, "{tmp}", d.root, "{root}", fx, "{fx}")
	r.stderr = folders.Replace(r.stderr)
	after := snapshot(t, root)
	outcome, why = classify(c, r, diffSnapshots(before, after, c.keep))
	if outcome == outClear && c.check != nil {
		if err := c.check(d, r); err != nil {
			outcome, why = outUnclear, err.Error()
		}
	}
	line = fmt.Sprintf("%v exit %d: %s", r.took.Round(time.Millisecond), r.code, lastLine(r.stderr))
	t.Logf("%s in %s", outcome, line)
	return outcome, why, line
}

func lastLine(s string) string {
	l := strings.Split(strings.TrimRight(s, "\n"), "\n")
	return l[len(l)-1]
}
