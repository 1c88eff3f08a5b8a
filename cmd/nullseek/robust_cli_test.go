package main

import (
	"fmt"
	"math"
	"nullseek/internal/testtool"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// bareNMEA writes n bare HDT sentences (no time stamps), the heading
// turning 18° per sentence, framed by testtool.NMEASentence.
func bareNMEA(t *testing.T, path string, n int) {
	t.Helper()
	var b strings.Builder
	for k := 0; k < n; k++ {
		body := fmt.Sprintf("HCHDT,%.1f,T", math.Mod(18*float64(k), 360))
		b.WriteString(testtool.NMEASentence(body))
	}
	writeFile(t, path, []byte(b.String()))
}

// The rates a probe of hostile inputs found fatal (1e11 panicked in the
// FFT, 1e300 looped for ever, 1e12 and 1e10 ate gigabytes) end at once
// with one line naming --rate and its bound; a --cpuprofile asked for on
// a failing run is not left behind; an --nmea file of bare sentences
// without --nmea-rate names that flag.
func TestCLIBoundsAndAdvice(t *testing.T) {
	raw := func(t *testing.T, d string) string {
		p := filepath.Join(d, "r.cu8")
		writeFile(t, p, make([]byte, 1<<16))
		return p
	}
	var cases []cliCase
	for _, r := range []string{"1e11", "1e300", "1e12", "1e10", "100000001", "999"} {
		cases = append(cases, cliCase{"raw --rate " + r, func(t *testing.T, d string) []string {
			return []string{"scan", raw(t, d), "--rate", r, "--format", "cu8", "--offset", "0"}
		}, "1 kS/s–100 MS/s"})
	}
	cases = append(cases,
		cliCase{"raw --center negative", func(t *testing.T, d string) []string {
			return []string{"scan", raw(t, d), "--rate", "2.4M", "--format", "cu8", "--center", "-145M"}
		}, "--center"},
		cliCase{"cpuprofile of a failing run", func(t *testing.T, d string) []string {
			return []string{"--cpuprofile", filepath.Join(d, "cpu.prof"), "scan", raw(t, d), "--rate", "1e11", "--format", "cu8"}
		}, "--rate"},
		cliCase{"bare NMEA without --nmea-rate", func(t *testing.T, d string) []string {
			bareNMEA(t, filepath.Join(d, "h.nmea"), 100)
			return []string{"bearing", abs(t, stepsMeta), "--offset", stepsOffset, "--nmea", "h.nmea"}
		}, "--nmea-rate HZ"},
	)
	checkBadInput(t, cases)
	// The profile of a run that succeeds is kept.
	dir := t.TempDir()
	prof := filepath.Join(dir, "ok.prof")
	if r := cliRun(t, dir, "--cpuprofile", prof, "scan", abs(t, stepsMeta), "--offset", stepsOffset); r.code != 0 {
		t.Fatalf("scan with --cpuprofile: %d %s", r.code, r.stderr)
	}
	if fi, err := os.Stat(prof); err != nil || fi.Size() == 0 {
		t.Errorf("profile of a good run: %v", err)
	}
	// With --nmea-rate the bare file is read: the run gets past the
	// headings (it may still stop later, but not on them).
	bareNMEA(t, filepath.Join(dir, "h.nmea"), 400)
	r := cliRun(t, dir, "bearing", abs(t, stepsMeta), "--offset", stepsOffset, "--nmea", "h.nmea", "--nmea-rate", "20")
	if strings.Contains(r.stderr, "nmea") || strings.Contains(r.stderr, "NMEA") {
		t.Errorf("bare NMEA with --nmea-rate 20: %s", r.stderr)
	}
	t.Logf("with --nmea-rate: exit %d %s", r.code, strings.TrimSpace(r.stderr))
}
