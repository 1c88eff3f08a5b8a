package main

import (
	"fmt"
	"math"
	"nullseek/internal/testtool"
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"strings"
	"testing"
)

// TestVersion: --version prints the module version from the build
// information and the Go version, in-process (a test binary has no module
// version: "devel") and from the built binary, whose line must agree with
// what `go version -m` (the Go toolchain) reads from the same file.
func TestVersion(t *testing.T) {
	out, errOut, err := runCLI(t, "--version")
	if err != nil || errOut != "" {
		t.Fatalf("--version: %v %q", err, errOut)
	}
	shape := regexp.MustCompile(`^nullseek (devel|v[0-9]+\.[0-9]+\.[0-9]+\S*) \((go[0-9]\S*)\)\n$`)
	m := shape.FindStringSubmatch(out)
	if m == nil || m[2] != runtime.Version() {
		t.Fatalf("--version printed %q, want \"nullseek VERSION (%s)\"", out, runtime.Version())
	}
	bin := cliBuild(t)
	b, err := exec.Command(bin, "--version").Output()
	if err != nil {
		t.Fatal(err)
	}
	info, err := exec.Command("go", "version", "-m", bin).Output()
	if err != nil {
		t.Fatalf("go version -m: %v", err)
	}
	// First line "BIN: goX.Y.Z"; then "\tmod\tnullseek\tVERSION\t...".
	goVer, modVer := "", "devel"
	for i, l := range strings.Split(string(info), "\n") {
		f := strings.Fields(l)
		if i == 0 && len(f) == 2 {
			goVer = f[1]
		}
		if len(f) >= 3 && f[0] == "mod" && f[1] == "nullseek" && f[2] != "(devel)" {
			modVer = f[2]
		}
	}
	if want := fmt.Sprintf("nullseek %s (%s)\n", modVer, goVer); string(b) != want {
		t.Errorf("nullseek --version = %q; go version -m says %q", b, want)
	}
}

// TestWarningStyle: a library warning (heading.ReadNMEA's summary of the
// lines it skipped, through log/slog) reaches the user as one line in the
// command's own style, "nullseek: warning: ...", not slog's default
// "time=... level=WARN msg=...". The NMEA sentences' checksums follow
// NMEA 0183 (nmeaSentence); the recording is the steps96k GNU Radio
// fixture.
func TestWarningStyle(t *testing.T) {
	dir := t.TempDir()
	var b strings.Builder
	for k := 0; k <= 60; k++ {
		ts := 0.05 * float64(k)
		fmt.Fprintf(&b, "%.2f %s\r\n", ts, testtool.NMEASentence(fmt.Sprintf("HCHDT,%.1f,T", math.Mod(120*ts, 360))))
		if k == 10 || k == 20 {
			b.WriteString("hello, not a sentence\r\n")
		}
	}
	nmea := filepath.Join(dir, "h.nmea")
	writeFile(t, nmea, []byte(b.String()))
	_, errOut, _ := runCLI(t, "bearing", abs(t, stepsMeta), "--offset", stepsOffset, "--nmea", nmea)
	t.Logf("stderr:\n%s", errOut)
	var warns []string
	for _, l := range strings.Split(errOut, "\n") {
		if strings.HasPrefix(l, "nullseek: warning: ") {
			warns = append(warns, l)
		}
	}
	if len(warns) != 1 || !strings.Contains(warns[0], "skipped NMEA lines") || !strings.Contains(warns[0], "skipped=2") || !strings.Contains(warns[0], nmea) {
		t.Errorf("want one \"nullseek: warning: \" line on the 2 skipped lines of %s; stderr:\n%s", nmea, errOut)
	}
	if strings.Contains(errOut, "level=WARN") || strings.Contains(errOut, "time=") {
		t.Errorf("slog's default format on stderr:\n%s", errOut)
	}
}
