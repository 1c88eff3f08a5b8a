// Package testtool is the one place where tests find the outside programs
// they check nullseek against (GNU Radio, scipy, GeographicLib, Hamlib,
// ebook2cw, multimon-ng, sox, gpsd, Chromium …).
//
// A missing program skips the test with a message that names it, unless
// the environment sets NULLSEEK_REQUIRE_TOOLS=1 — as CI does after
// installing them — when it fails the test instead. Nothing here is used
// by production code.
package testtool

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// DebianPython is Debian's interpreter, the one that imports the Debian
// packages gnuradio, python3-numpy and python3-scipy (a python3 earlier on
// PATH may not).
const DebianPython = "/usr/bin/python3"

// Required reports whether missing tools fail tests (NULLSEEK_REQUIRE_TOOLS=1).
func Required() bool { return os.Getenv("NULLSEEK_REQUIRE_TOOLS") == "1" }

// Unavailable skips t, or fails it when tools are required, saying what is
// missing and why.
func Unavailable(t testing.TB, what string, err error) {
	t.Helper()
	if Required() {
		t.Fatalf("%s is required (NULLSEEK_REQUIRE_TOOLS=1) but unavailable: %v", what, err)
	}
	t.Skipf("%s unavailable, skipping this outside check: %v", what, err)
}

// Need returns the path of the program name (looked up on PATH, or an
// absolute path). With probe arguments it also runs the program with them
// and treats a failure as missing (for example a Python that lacks a
// module).
func Need(t testing.TB, name string, probe ...string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err == nil && len(probe) > 0 {
		if out, perr := exec.Command(p, probe...).CombinedOutput(); perr != nil {
			err = fmt.Errorf("%s %s: %v: %s", name, strings.Join(probe, " "), perr, strings.TrimSpace(string(out)))
		}
	}
	if err != nil {
		Unavailable(t, name, err)
	}
	return p
}

// Have reports whether the program is on PATH without skipping; with tools
// required a missing one still fails the test.
func Have(t testing.TB, name string) bool {
	t.Helper()
	if _, err := exec.LookPath(name); err != nil {
		if Required() {
			t.Fatalf("%s is required (NULLSEEK_REQUIRE_TOOLS=1) but not on PATH: %v", name, err)
		}
		return false
	}
	return true
}

// Python returns DebianPython when it can run the given import statement's
// modules, for example Python(t, "numpy, scipy.signal").
func Python(t testing.TB, modules string) string {
	t.Helper()
	return Need(t, DebianPython, "-c", "import "+modules)
}

// GNURadio returns DebianPython when it imports GNU Radio 3.10's blocks used
// by the fixture scripts (gr, analog, blocks, filter, channels) with numpy
// and scipy, and checks that the named programs are on PATH.
func GNURadio(t testing.TB, progs ...string) string {
	t.Helper()
	py := Need(t, DebianPython, "-c", "from gnuradio import gr, analog, blocks, filter, channels; import numpy, scipy")
	for _, p := range progs {
		Need(t, p)
	}
	return py
}

// Rotctld starts Hamlib's rotctld with the dummy rotator (model 1; Hamlib
// rotctld(1)) on a free loopback port and returns its address once it
// answers get_pos ("p", two value lines): a listening socket alone is not
// enough, rotctld may still be setting up. The process is killed when the
// test ends; kill it earlier through the returned process to test a
// vanished rotator.
func Rotctld(t testing.TB) (addr string, proc *os.Process) {
	t.Helper()
	bin := Need(t, "rotctld")
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	port := ln.Addr().(*net.TCPAddr).Port
	ln.Close()
	return rotctldOn(t, bin, port)
}

// RotctldOn is Rotctld on a given loopback port: a rotctld that comes back
// where a killed one was.
func RotctldOn(t testing.TB, port int) (addr string, proc *os.Process) {
	t.Helper()
	return rotctldOn(t, Need(t, "rotctld"), port)
}

func rotctldOn(t testing.TB, bin string, port int) (addr string, proc *os.Process) {
	t.Helper()
	cmd := exec.Command(bin, "-m", "1", "-T", "127.0.0.1", "-t", fmt.Sprint(port))
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	exited := make(chan struct{})
	go func() { cmd.Wait(); close(exited) }()
	t.Cleanup(func() {
		cmd.Process.Kill()
		<-exited
	})
	addr = fmt.Sprintf("127.0.0.1:%d", port)
	for deadline := time.Now().Add(5 * time.Second); ; {
		if answersGetPos(addr) {
			return addr, cmd.Process
		}
		if time.Now().After(deadline) {
			t.Fatalf("rotctld did not answer get_pos on %s", addr)
		}
		time.Sleep(100 * time.Millisecond)
	}
}

func answersGetPos(addr string) bool {
	c, err := net.DialTimeout("tcp", addr, 200*time.Millisecond)
	if err != nil {
		return false
	}
	defer c.Close()
	c.SetDeadline(time.Now().Add(time.Second))
	if _, err := io.WriteString(c, "p\n"); err != nil {
		return false
	}
	buf := make([]byte, 64)
	got := ""
	for strings.Count(got, "\n") < 2 {
		n, err := c.Read(buf)
		if err != nil {
			return false
		}
		got += string(buf[:n])
	}
	return true
}

// Chromium runs headless Chromium (Debian's package chromium) on the local
// page file with the extra args (for example "--dump-dom", or
// "--screenshot=PATH" with "--window-size=W,H") and returns its standard
// output. It gets a profile of its own, no sandbox (tests run as root in
// CI), no GPU, and a proxy on a closed loopback port with background
// networking off, so a page that tried to load anything from the network
// would find nothing and no traffic leaves the machine.
func Chromium(t testing.TB, page string, args ...string) string {
	t.Helper()
	bin := Need(t, "chromium")
	abs, err := filepath.Abs(page)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	all := append([]string{"--headless", "--no-sandbox", "--disable-gpu", "--user-data-dir=" + t.TempDir(),
		"--no-first-run", "--disable-background-networking", "--disable-component-update",
		"--proxy-server=http://127.0.0.1:9", "--hide-scrollbars"}, args...)
	all = append(all, "file://"+abs)
	cmd := exec.CommandContext(ctx, bin, all...)
	var stderr strings.Builder
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("chromium %s: %v\n%s", strings.Join(args, " "), err, lastLines(stderr.String(), 10))
	}
	return string(out)
}

func lastLines(s string, n int) string {
	lines := strings.Split(strings.TrimRight(s, "\n"), "\n")
	if len(lines) > n {
		lines = lines[len(lines)-n:]
	}
	return strings.Join(lines, "\n")
}

// ArtifactDir is the folder where a test keeps what a person should be
// able to look at afterwards (screenshots): $NULLSEEK_TEST_ARTIFACTS when
// set, else nullseek-test-artifacts in the system's temporary folder. It is
// made if missing; unlike t.TempDir it is not removed when the test ends.
// Name files after the test.
func ArtifactDir(t testing.TB) string {
	t.Helper()
	dir := os.Getenv("NULLSEEK_TEST_ARTIFACTS")
	if dir == "" {
		dir = filepath.Join(os.TempDir(), "nullseek-test-artifacts")
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatalf("test artefacts folder: %v", err)
	}
	return dir
}

// SHA512Sum is coreutils sha512sum's digest of the file at path, in hex:
// the outside check of a SigMF core:sha512.
func SHA512Sum(t testing.TB, path string) string {
	t.Helper()
	out, err := exec.Command(Need(t, "sha512sum"), path).Output()
	if err != nil {
		t.Fatalf("sha512sum %s: %v", path, err)
	}
	f := strings.Fields(string(out))
	if len(f) == 0 {
		t.Fatalf("sha512sum %s: no output", path)
	}
	return f[0]
}

// CheckSigMFHash fails the test unless base.sigmf-meta's global
// core:sha512 (SigMF 1.2.0, global object) is sha512sum's digest of
// base.sigmf-data. The key is read as the specification names it, not
// through nullseek's reader.
func CheckSigMFHash(t testing.TB, base string) {
	t.Helper()
	mb, err := os.ReadFile(base + ".sigmf-meta")
	if err != nil {
		t.Fatal(err)
	}
	var meta struct {
		Global map[string]any `json:"global"`
	}
	if err := json.Unmarshal(mb, &meta); err != nil {
		t.Fatalf("%s.sigmf-meta: %v", base, err)
	}
	if sum := SHA512Sum(t, base+".sigmf-data"); meta.Global["core:sha512"] != sum {
		t.Errorf("%s: core:sha512 %v, sha512sum of the data says %s", base, meta.Global["core:sha512"], sum)
	}
}
