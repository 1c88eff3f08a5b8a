package main

import (
	"bytes"
	"image/png"
	"math"
	"nullseek/internal/angle"
	"nullseek/internal/testtool"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// TestCLIBearingOptionsBadInput: every numeric bearing option is checked
// against its range — negative, NaN, absurd — with one clear error that
// names the flag (project issue: "--site-sigma and every other numeric
// bearing option validated"). The recording is the steps96k fixture; the
// check happens before any scan.
func TestCLIBearingOptionsBadInput(t *testing.T) {
	args := func(extra ...string) func(t *testing.T, d string) []string {
		return func(t *testing.T, d string) []string {
			headingLog(t, filepath.Join(d, "h.csv"), 0, 0.05, 80, func(ts float64) float64 { return math.Mod(360*ts, 360) })
			return append([]string{"bearing", abs(t, stepsMeta), "--offset", stepsOffset, "--headings", "h.csv"}, extra...)
		}
	}
	var cases []cliCase
	for _, c := range []struct{ flag, value string }{
		{"--site-sigma", "-1"}, {"--site-sigma", "NaN"}, {"--site-sigma", "1e9"},
		{"--beamwidth", "0"}, {"--beamwidth", "NaN"}, {"--beamwidth", "400"},
		{"--front-back", "-3"}, {"--front-back", "Inf"},
		{"--null-depth", "-5"}, {"--null-depth", "500"},
		{"--body-depth", "0"}, {"--body-depth", "NaN"},
		{"--mount-offset", "NaN"}, {"--mount-offset", "1e6"},
		{"--lag", "NaN"}, {"--lag", "-3600"},
	} {
		cases = append(cases, cliCase{c.flag + " " + c.value, args(c.flag, c.value), c.flag})
	}
	cases = append(cases, cliCase{"--antenna dish", args("--antenna", "dish"), "--antenna"})
	checkBadInput(t, cases)
}

// TestCLIBearingHelpStatesConventions: --help says which direction of the
// antenna a heading names for each pattern, and the loop's other
// convention is a flag value.
func TestCLIBearingHelpStatesConventions(t *testing.T) {
	r := cliRun(t, t.TempDir(), "bearing", "--help")
	out := strings.Join(strings.Fields(r.stdout), " ")
	for _, want := range []string{"loop-plane", "loop's axis", "loop's plane", "Yagi's boresight", "the way the operator faces", "mount offset"} {
		if !strings.Contains(out, want) {
			t.Errorf("bearing --help does not say %q", want)
		}
	}
}

// makeRotating runs testdata/bearing/make_rotating.py (GNU Radio 3.10)
// into dir.
func makeRotating(t *testing.T, dir string, args ...string) {
	t.Helper()
	py := testtool.GNURadio(t)
	script := filepath.Join("..", "..", "testdata", "bearing", "make_rotating.py")
	cmd := exec.Command(py, append([]string{script, "--out", dir}, args...)...)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("make_rotating.py %s: %v\n%s", strings.Join(args, " "), err, out)
	}
}

// TestCLIBearingField: `bearing` on recordings made by GNU Radio 3.10
// (make_rotating.py, command lines below):
//
//   - a magnetic heading log (declination −5°, east positive), 0.3 s late,
//     on a back-and-forth sweep, with --estimate-lag: the lag is found and
//     applied and the bearing is the truth (it used to end in "estimate
//     lag: no bursts");
//   - a heading source along the loop's plane: --antenna loop-plane gives
//     the truth with no arithmetic, --antenna loop is 90° off, and the
//     result line says which convention was used;
//   - one polar plot per transmitter, drawn from the combined result (the
//     title carries the table's bearing), a PNG a person can read.
func TestCLIBearingField(t *testing.T) {
	dir := t.TempDir()
	// magnetic, late, back and forth
	mag := filepath.Join(dir, "mag")
	makeRotating(t, mag, "--rate", "96000", "--seconds", "30", "--sweep", "backforth", "--arc", "360",
		"--log-lag", "0.3", "--declination", "-5", "--log-hz", "20", "--bearing", "140", "--seed", "3")
	r := cliRun(t, dir, "bearing", filepath.Join(mag, "rotating_loop.sigmf-meta"), "--offset", "25000",
		"--headings", filepath.Join(mag, "rotating_loop_heading.csv"), "--heading-ref", "magnetic", "--declination", "-5",
		"--estimate-lag", "--antenna", "loop", "--json")
	if r.code != 0 {
		t.Fatalf("magnetic log with --estimate-lag: exit %d\n%s", r.code, r.stderr)
	}
	// The sign is the module's (package heading): positive when the log is late.
	if !strings.Contains(r.stderr, "heading log late by +0.3") {
		t.Errorf("no lag of +0.3 s found (the log is 0.3 s late): %s", r.stderr)
	}
	b := txBearing(t, r.stdout)
	if e := loopErr(b, 140); e > 0.5 {
		t.Errorf("magnetic, late log: bearing %v, truth 140° (error %.2f°)", b["bearing_deg"], e)
	}

	// a heading source along the loop's plane
	plane := filepath.Join(dir, "plane")
	makeRotating(t, plane, "--rate", "96000", "--seconds", "14", "--pattern", "loop-plane", "--bearing", "61", "--seed", "4")
	run := func(antenna string) (map[string]any, string) {
		r := cliRun(t, dir, "bearing", filepath.Join(plane, "rotating_loop.sigmf-meta"), "--offset", "25000",
			"--headings", filepath.Join(plane, "rotating_loop_heading.csv"), "--antenna", antenna)
		rj := cliRun(t, dir, "bearing", filepath.Join(plane, "rotating_loop.sigmf-meta"), "--offset", "25000",
			"--headings", filepath.Join(plane, "rotating_loop_heading.csv"), "--antenna", antenna, "--json")
		if r.code != 0 || rj.code != 0 {
			t.Fatalf("--antenna %s: exit %d/%d\n%s%s", antenna, r.code, rj.code, r.stderr, rj.stderr)
		}
		return txBearing(t, rj.stdout), r.stdout
	}
	bp, table := run("loop-plane")
	if e := loopErr(bp, 61); e > 0.5 {
		t.Errorf("--antenna loop-plane: bearing %v, truth 61°", bp["bearing_deg"])
	}
	if !strings.Contains(table, "the loop's plane") {
		t.Errorf("the result does not say the heading is the loop's plane:\n%s", table)
	}
	ba, table := run("loop")
	if e := loopErr(ba, 61); math.Abs(e-90) > 1 {
		t.Errorf("--antenna loop on a plane heading: bearing %v, want 90° off the truth 61°", ba["bearing_deg"])
	}
	if !strings.Contains(table, "the loop's axis") {
		t.Errorf("the result does not say the heading is the loop's axis:\n%s", table)
	}

	// the polar plot: one per transmitter, from the combined result
	plotPrefix := filepath.Join(dir, "polar.png")
	r = cliRun(t, dir, "bearing", filepath.Join(plane, "rotating_loop.sigmf-meta"), "--offset", "25000",
		"--headings", filepath.Join(plane, "rotating_loop_heading.csv"), "--antenna", "loop-plane", "--plot", plotPrefix)
	if r.code != 0 {
		t.Fatalf("--plot: exit %d\n%s", r.code, r.stderr)
	}
	files, _ := filepath.Glob(filepath.Join(dir, "polar-*.png"))
	if len(files) != 1 {
		t.Fatalf("plots %v, want one per transmitter", files)
	}
	data, err := os.ReadFile(files[0])
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(data))
	if err != nil || img.Bounds().Dx() < 300 {
		t.Fatalf("plot is not a readable PNG: %v", err)
	}
}

// txBearing is the transmitter line of `bearing --json`.
func txBearing(t *testing.T, stdout string) map[string]any {
	t.Helper()
	for _, m := range jsonLines(t, stdout) {
		if m["type"] == "bearing" && m["bearing_deg"] != nil {
			return m
		}
	}
	t.Fatalf("no transmitter bearing in:\n%s", stdout)
	return nil
}

// loopErr is the distance of a loop's bearing (or its alternate) from the truth.
func loopErr(m map[string]any, truth float64) float64 {
	b := m["bearing_deg"].(float64)
	e := math.Abs(angle.Wrap180(b - truth))
	if a, ok := m["alt_bearing_deg"].(float64); ok {
		e = math.Min(e, math.Abs(angle.Wrap180(a-truth)))
	}
	return e
}
