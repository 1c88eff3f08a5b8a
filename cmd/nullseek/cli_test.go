package main

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
)

// cliBin is the nullseek binary, built once for the package on first use
// (cliBuild), for the tests of what only a process shows: exit statuses,
// signals and file-size limits (the hostile corpus, hostile_test.go).
// Tests of a command's output and errors run the command line in-process
// (runCLI, cliRun). It is built lazily, not in TestMain's start, because
// other tests of this package re-run the test binary as a child process,
// which must not build (or leave) anything.
var (
	cliBin, cliDir string
	cliOnce        sync.Once
	cliErr         error
)

func cliBuild(t *testing.T) string {
	t.Helper()
	cliOnce.Do(func() {
		cliDir, cliErr = os.MkdirTemp("", "nullseek-cli-test-")
		if cliErr != nil {
			return
		}
		goTool, err := exec.LookPath("go")
		if err != nil {
			goTool = "/usr/local/go/bin/go"
		}
		bin := filepath.Join(cliDir, "nullseek")
		if out, err := exec.Command(goTool, "build", "-o", bin, ".").CombinedOutput(); err != nil {
			cliErr = fmt.Errorf("go build ./cmd/nullseek: %v\n%s", err, out)
			return
		}
		cliBin = bin
	})
	if cliErr != nil {
		t.Fatal(cliErr)
	}
	return cliBin
}

// TestMain removes the built binary after the tests.
func TestMain(m *testing.M) {
	code := m.Run()
	if cliDir != "" {
		os.RemoveAll(cliDir)
	}
	os.Exit(code)
}

// runCLI runs the command line args in-process on a fresh command tree,
// with empty stdin, and returns what the command wrote to stdout and
// stderr and its error (which main would print as the last line).
func runCLI(t *testing.T, args ...string) (stdout, stderr string, err error) {
	t.Helper()
	var out, errb bytes.Buffer
	root := newRootCmd()
	root.SetArgs(args)
	root.SetIn(strings.NewReader(""))
	root.SetOut(&out)
	root.SetErr(&errb)
	err = root.Execute()
	return out.String(), errb.String(), err
}

// cliResult is one run of the command line.
type cliResult struct {
	code           int
	stdout, stderr string
}

// cliRun runs the command line in-process in dir as main does (execute:
// a failure's line on stderr, the exit status exitCode gives). The
// working directory is dir for the run only; being the process's, it is
// not for parallel tests.
func cliRun(t *testing.T, dir string, args ...string) cliResult {
	t.Helper()
	wd, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	if err := os.Chdir(dir); err != nil {
		t.Fatal(err)
	}
	defer func() {
		if err := os.Chdir(wd); err != nil {
			t.Fatal(err)
		}
	}()
	var out, errb bytes.Buffer
	err = execute(args, strings.NewReader(""), &out, &errb)
	r := cliResult{stdout: out.String(), stderr: errb.String()}
	if err != nil {
		r.code = exitCode(err)
	}
	return r
}

// cliFiles lists the names in dir.
func cliFiles(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range es {
		names = append(names, e.Name())
	}
	return names
}

func abs(t *testing.T, rel string) string {
	t.Helper()
	p, err := filepath.Abs(rel)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

var (
	stepsMeta = filepath.Join("..", "..", "testdata", "bursts", "steps96k.sigmf-meta")
	stepsData = filepath.Join("..", "..", "testdata", "bursts", "steps96k.sigmf-data")
)

// stepsOffset is the carrier offset of the steps96k fixture
// (testdata/bursts/steps96k.truth.json, GNU Radio 3.10).
const stepsOffset = "17321.4"

// cliCase is one bad input: setup writes files into dir and returns the
// arguments; want is a fragment the error line must contain.
type cliCase struct {
	name  string
	setup func(t *testing.T, dir string) []string
	want  string
}

func writeFile(t *testing.T, path string, data []byte) {
	t.Helper()
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

// metaWith is the steps96k metadata with one substitution.
func metaWith(t *testing.T, old, new string) []byte {
	t.Helper()
	b, err := os.ReadFile(stepsMeta)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(b, []byte(old)) {
		t.Fatalf("steps96k.sigmf-meta has no %q", old)
	}
	return bytes.Replace(b, []byte(old), []byte(new), 1)
}

func copyData(t *testing.T, dst string, n int) {
	t.Helper()
	b, err := os.ReadFile(stepsData)
	if err != nil {
		t.Fatal(err)
	}
	if n >= 0 {
		b = b[:n]
	}
	writeFile(t, dst, b)
}

// cf32With writes little-endian complex float32 samples with one bad value.
func cf32With(t *testing.T, path string, bad float32) {
	t.Helper()
	v := make([]float32, 2*48000)
	for i := range v {
		v[i] = 0.01 * float32(i%7)
	}
	v[2*1000] = bad
	var b bytes.Buffer
	if err := binary.Write(&b, binary.LittleEndian, v); err != nil {
		t.Fatal(err)
	}
	writeFile(t, path, b.Bytes())
}

// checkBadInput runs every case and checks the project issue's rule for
// bad input: "one clear error line, non-zero exit, no panic", with stdout
// empty and no output files written.
func checkBadInput(t *testing.T, cases []cliCase) {
	t.Helper()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			args := c.setup(t, dir)
			before := cliFiles(t, dir)
			r := cliRun(t, dir, args...)
			if r.code == 0 {
				t.Fatalf("exit status 0, want non-zero\nstdout: %s\nstderr: %s", r.stdout, r.stderr)
			}
			if strings.Contains(r.stderr, "panic") || strings.Contains(r.stderr, "goroutine ") {
				t.Fatalf("stack trace on stderr:\n%s", r.stderr)
			}
			lines := strings.Split(strings.TrimRight(r.stderr, "\n"), "\n")
			if len(lines) != 1 || !strings.HasPrefix(lines[0], "nullseek: ") || !strings.HasSuffix(r.stderr, "\n") {
				t.Fatalf("stderr is not one line starting with \"nullseek: \":\n%q", r.stderr)
			}
			if !strings.Contains(lines[0], c.want) {
				t.Errorf("error %q does not say %q", lines[0], c.want)
			}
			if r.stdout != "" {
				t.Errorf("stdout not empty on bad input:\n%s", r.stdout)
			}
			if after := cliFiles(t, dir); !slices.Equal(before, after) {
				t.Errorf("files changed on bad input: before %v, after %v", before, after)
			}
			t.Logf("exit %d: %s", r.code, lines[0])
		})
	}
}

// TestCLIScanBadInput: the recording inputs of `scan` (project issue: "Missing
// data file, a data size that is not a whole number of samples, unknown
// datatype, malformed or truncated metadata, a sample rate of zero, NaN or
// Inf in float data, a channel outside the captured band, an empty file").
// Datatype grammar and core:sample_rate: SigMF v1.2.5, core:datatype and core:sample_rate.
func TestCLIScanBadInput(t *testing.T) {
	meta := func(name string, data []byte) string { return name + ".sigmf-meta" }
	cases := []cliCase{
		{"missing data file", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "r.sigmf-meta"), metaWith(t, "cu8", "cu8"))
			return []string{"scan", "--offset", stepsOffset, "r.sigmf-meta"}
		}, "missing data file"},
		{"missing recording", func(t *testing.T, d string) []string {
			return []string{"scan", "--offset", "1k", "--rate", "48k", "--format", "cu8", "nothing.cu8"}
		}, "nothing.cu8"},
		{"missing metadata", func(t *testing.T, d string) []string {
			copyData(t, filepath.Join(d, "r.sigmf-data"), -1)
			return []string{"scan", "--offset", stepsOffset, "r.sigmf-data"}
		}, "metadata"},
		{"SigMF data size not whole samples", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "r.sigmf-meta"), metaWith(t, "cu8", "cu8"))
			copyData(t, filepath.Join(d, "r.sigmf-data"), 100001)
			return []string{"scan", "--offset", stepsOffset, meta("r", nil)}
		}, "not a whole number"},
		{"raw ci16 size not whole samples", func(t *testing.T, d string) []string {
			copyData(t, filepath.Join(d, "r.iq"), 4002)
			return []string{"scan", "--offset", "1k", "--rate", "96k", "--format", "ci16_le", "r.iq"}
		}, "not a whole number"},
		{"unknown datatype in metadata", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "r.sigmf-meta"), metaWith(t, `"cu8"`, `"cq7"`))
			copyData(t, filepath.Join(d, "r.sigmf-data"), -1)
			return []string{"scan", "--offset", stepsOffset, "r.sigmf-meta"}
		}, "cq7"},
		{"unknown --format", func(t *testing.T, d string) []string {
			copyData(t, filepath.Join(d, "r.iq"), -1)
			return []string{"scan", "--offset", "1k", "--rate", "96k", "--format", "cu9", "r.iq"}
		}, "cu9"},
		{"malformed metadata", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "r.sigmf-meta"), []byte("global: cu8\n"))
			copyData(t, filepath.Join(d, "r.sigmf-data"), -1)
			return []string{"scan", "--offset", stepsOffset, "r.sigmf-meta"}
		}, "metadata"},
		{"truncated metadata", func(t *testing.T, d string) []string {
			m := metaWith(t, "cu8", "cu8")
			writeFile(t, filepath.Join(d, "r.sigmf-meta"), m[:len(m)/2])
			copyData(t, filepath.Join(d, "r.sigmf-data"), -1)
			return []string{"scan", "--offset", stepsOffset, "r.sigmf-meta"}
		}, "truncated"},
		{"metadata without datatype", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "r.sigmf-meta"), metaWith(t, `"core:datatype": "cu8",`, ""))
			copyData(t, filepath.Join(d, "r.sigmf-data"), -1)
			return []string{"scan", "--offset", stepsOffset, "r.sigmf-meta"}
		}, "datatype"},
		{"sample rate zero in metadata", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "r.sigmf-meta"), metaWith(t, "96000.0", "0"))
			copyData(t, filepath.Join(d, "r.sigmf-data"), -1)
			return []string{"scan", "--offset", stepsOffset, "r.sigmf-meta"}
		}, "sample_rate"},
		{"sample rate zero on the command line", func(t *testing.T, d string) []string {
			copyData(t, filepath.Join(d, "r.cu8"), -1)
			return []string{"scan", "--offset", "1k", "--rate", "0", "--format", "cu8", "r.cu8"}
		}, "sample rate"},
		{"negative sample rate", func(t *testing.T, d string) []string {
			copyData(t, filepath.Join(d, "r.cu8"), -1)
			return []string{"scan", "--offset", "1k", "--rate", "-96k", "--format", "cu8", "r.cu8"}
		}, "rate"},
		{"NaN in float data", func(t *testing.T, d string) []string {
			cf32With(t, filepath.Join(d, "r.cf32"), float32(math.NaN()))
			return []string{"scan", "--offset", "1k", "--rate", "48k", "--format", "cf32_le", "r.cf32"}
		}, "not finite"},
		{"Inf in float data", func(t *testing.T, d string) []string {
			cf32With(t, filepath.Join(d, "r.cf32"), float32(math.Inf(1)))
			return []string{"scan", "--offset", "1k", "--rate", "48k", "--format", "cf32_le", "--json", "r.cf32"}
		}, "not finite"},
		{"NaN in float data, channel from the carrier search", func(t *testing.T, d string) []string {
			cf32With(t, filepath.Join(d, "r.cf32"), float32(math.NaN()))
			return []string{"scan", "--rate", "48k", "--format", "cf32_le", "r.cf32"}
		}, "not finite"},
		{"offset outside the band", func(t *testing.T, d string) []string {
			return []string{"scan", "--offset", "60k", abs(t, stepsMeta)}
		}, "outside the captured band"},
		{"frequency outside the band", func(t *testing.T, d string) []string {
			return []string{"scan", "--freq", "434.5M", "--json", abs(t, stepsMeta)}
		}, "outside the captured band"},
		{"frequency without a centre", func(t *testing.T, d string) []string {
			copyData(t, filepath.Join(d, "r.cu8"), -1)
			return []string{"scan", "--freq", "433.9M", "--rate", "96k", "--format", "cu8", "r.cu8"}
		}, "centre frequency"},
		{"empty raw file", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "r.cu8"), nil)
			return []string{"scan", "--offset", "1k", "--rate", "48k", "--format", "cu8", "r.cu8"}
		}, "empty"},
		{"empty raw file, channel from the carrier search", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "r.cu8"), nil)
			return []string{"scan", "--rate", "48k", "--format", "cu8", "r.cu8"}
		}, "empty"},
		{"empty SigMF data", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "r.sigmf-meta"), metaWith(t, "cu8", "cu8"))
			writeFile(t, filepath.Join(d, "r.sigmf-data"), nil)
			return []string{"scan", "--offset", stepsOffset, "r.sigmf-meta"}
		}, "empty"},
		{"empty metadata file", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "r.sigmf-meta"), nil)
			copyData(t, filepath.Join(d, "r.sigmf-data"), -1)
			return []string{"scan", "--offset", stepsOffset, "r.sigmf-meta"}
		}, "metadata"},
		{"offset not a number", func(t *testing.T, d string) []string {
			return []string{"scan", "--offset", "NaN", abs(t, stepsMeta)}
		}, "--offset"},
	}
	checkBadInput(t, cases)
}

// headingLog writes "time,heading_deg" rows: heading h(t) at t = t0, t0+dt, … .
func headingLog(t *testing.T, path string, t0, dt float64, n int, h func(float64) float64) {
	t.Helper()
	var b strings.Builder
	b.WriteString("time,heading_deg\n")
	for i := 0; i < n; i++ {
		ts := t0 + float64(i)*dt
		fmt.Fprintf(&b, "%.3f,%.3f\n", ts, h(ts))
	}
	writeFile(t, path, []byte(b.String()))
}

// TestCLIBearingBadInput: the heading inputs of `bearing` (project issue:
// "heading log out of time order, headings outside 0–360, no overlap with
// the recording, sweep under 90°, garbage"). The recording is the
// steps96k GNU Radio fixture (bursts 0.31–2.89 s; one burst with the
// command's 1.5 s merge gap). The bearing CSV and plot options are given
// so that a file written on bad input would show.
func TestCLIBearingBadInput(t *testing.T) {
	bearingArgs := func(d, log string) []string {
		return []string{"bearing", abs(t, stepsMeta), "--offset", stepsOffset, "--antenna", "yagi",
			"--headings", log, "--station", "45.1,6.1", "--bearings-csv", filepath.Join(d, "lop.csv"), "--plot", filepath.Join(d, "p.png")}
	}
	spin := func(ts float64) float64 { return math.Mod(360*ts, 360) }
	cases := []cliCase{
		{"heading log out of time order", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "h.csv"), []byte("time,heading_deg\n0,10\n1,100\n0.5,200\n2,300\n"))
			return bearingArgs(d, "h.csv")
		}, "time order"},
		{"repeated time", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "h.csv"), []byte("time,heading_deg\n0,10\n1,100\n1,200\n"))
			return bearingArgs(d, "h.csv")
		}, "line 4"},
		{"heading above 360", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "h.csv"), []byte("time,heading_deg\n0,10\n1,400\n2,40\n"))
			return bearingArgs(d, "h.csv")
		}, "400"},
		{"negative heading", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "h.csv"), []byte("time,heading_deg\n0,10\n1,-10\n2,40\n"))
			return bearingArgs(d, "h.csv")
		}, "-10"},
		{"NaN heading", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "h.csv"), []byte("time,heading_deg\n0,10\n1,NaN\n2,40\n"))
			return bearingArgs(d, "h.csv")
		}, "NaN"},
		{"no overlap with the recording", func(t *testing.T, d string) []string {
			headingLog(t, filepath.Join(d, "h.csv"), 100, 0.05, 80, spin)
			return bearingArgs(d, "h.csv")
		}, "does not overlap"},
		{"sweep under 90°", func(t *testing.T, d string) []string {
			headingLog(t, filepath.Join(d, "h.csv"), 0, 0.05, 80, func(ts float64) float64 { return 10 + 20*ts })
			return bearingArgs(d, "h.csv")
		}, "90°"},
		{"garbage heading log", func(t *testing.T, d string) []string {
			g := make([]byte, 3000)
			for i := range g {
				g[i] = byte(i * 7)
			}
			writeFile(t, filepath.Join(d, "h.csv"), g)
			return bearingArgs(d, "h.csv")
		}, "heading log"},
		{"empty heading log", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "h.csv"), nil)
			return bearingArgs(d, "h.csv")
		}, "no data rows"},
		{"missing heading log", func(t *testing.T, d string) []string {
			return bearingArgs(d, "nothing.csv")
		}, "nothing.csv"},
		{"no heading source", func(t *testing.T, d string) []string {
			return []string{"bearing", abs(t, stepsMeta), "--offset", stepsOffset}
		}, "heading source"},
		{"garbage NMEA", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "h.nmea"), []byte("$GARBAGE*00\nhello\n\x00\x01\x02\n"))
			return []string{"bearing", abs(t, stepsMeta), "--offset", stepsOffset, "--nmea", "h.nmea"}
		}, "h.nmea"},
		{"steady turn of zero rate", func(t *testing.T, d string) []string {
			return []string{"bearing", abs(t, stepsMeta), "--offset", stepsOffset, "--turn", "10:0"}
		}, "--turn"},
		{"unknown antenna", func(t *testing.T, d string) []string {
			headingLog(t, filepath.Join(d, "h.csv"), 0, 0.05, 80, spin)
			return []string{"bearing", abs(t, stepsMeta), "--offset", stepsOffset, "--antenna", "dish", "--headings", "h.csv"}
		}, "--antenna"},
	}
	checkBadInput(t, cases)
}

// TestCLIFixBadInput: garbage, empty and missing bearing files for `fix`
// (row-level errors are in fix_test.go). Output files are requested so
// that any written on bad input would show.
func TestCLIFixBadInput(t *testing.T) {
	fixArgs := func(d, in string) []string {
		return []string{"fix", in, "--geojson", filepath.Join(d, "f.geojson"), "--kml", filepath.Join(d, "f.kml"), "--map", filepath.Join(d, "m.png")}
	}
	const hdr = "ident,station,lat,lon,bearing_deg,sigma_deg,reference,time\n"
	cases := []cliCase{
		{"garbage", func(t *testing.T, d string) []string {
			g := make([]byte, 2000)
			for i := range g {
				g[i] = byte(i*13 + 1)
			}
			writeFile(t, filepath.Join(d, "b.csv"), g)
			return fixArgs(d, "b.csv")
		}, "b.csv"},
		{"empty", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "b.csv"), nil)
			return fixArgs(d, "b.csv")
		}, "b.csv"},
		{"missing", func(t *testing.T, d string) []string { return fixArgs(d, "nothing.csv") }, "nothing.csv"},
		{"truncated JSON", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "b.json"), []byte(`[{"ident":"T","station":"A","lat":45.1,`))
			return fixArgs(d, "b.json")
		}, "b.json"},
		{"NaN bearing", func(t *testing.T, d string) []string {
			writeFile(t, filepath.Join(d, "b.csv"), []byte(hdr+"T,A,45.1,6.1,40,2,true,\nT,B,45.1,6.2,NaN,2,true,\n"))
			return fixArgs(d, "b.csv")
		}, "bearing_deg"},
	}
	checkBadInput(t, cases)
}

// TestCLIScanJSON: the happy path of `scan --json` on the steps96k GNU
// Radio fixture (testdata/bursts/make_bursts.py, truth in
// steps96k.truth.json): one "burst" line per burst with every key of the
// stable burst line, then one "summary" line.
func TestCLIScanJSON(t *testing.T) {
	dir := t.TempDir()
	r := cliRun(t, dir, "scan", "--json", "--offset", stepsOffset, abs(t, stepsMeta))
	if r.code != 0 {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	var truth struct {
		Bursts []struct {
			StartS float64 `json:"start_s"`
			EndS   float64 `json:"end_s"`
		} `json:"bursts"`
	}
	tb, err := os.ReadFile(strings.TrimSuffix(stepsMeta, ".sigmf-meta") + ".truth.json")
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(tb, &truth); err != nil {
		t.Fatal(err)
	}
	required := []string{"type", "start_s", "end_s", "start", "offset_hz", "freq_hz", "level_dbfs", "noise_dbfs",
		"snr_db", "clipped", "text", "ident", "ident_confidence", "tone_hz", "transmitter"}
	var lines []map[string]any
	sc := bufio.NewScanner(strings.NewReader(r.stdout))
	for sc.Scan() {
		var m map[string]any
		if err := json.Unmarshal(sc.Bytes(), &m); err != nil {
			t.Fatalf("line %d is not JSON: %v\n%s", len(lines)+1, err, sc.Text())
		}
		lines = append(lines, m)
	}
	if len(lines) != len(truth.Bursts)+1 {
		t.Fatalf("%d lines, want %d bursts + a summary:\n%s", len(lines), len(truth.Bursts), r.stdout)
	}
	for i, m := range lines[:len(lines)-1] {
		if m["type"] != "burst" {
			t.Errorf("line %d: type %v, want burst", i+1, m["type"])
		}
		for _, k := range required {
			if _, ok := m[k]; !ok {
				t.Errorf("line %d: key %q missing", i+1, k)
			}
		}
		// Burst edges against the GNU Radio fixture's truth (5 ms: one
		// reading at 200 readings/s).
		s, _ := m["start_s"].(float64)
		e, _ := m["end_s"].(float64)
		if math.Abs(s-truth.Bursts[i].StartS) > 0.005 || math.Abs(e-truth.Bursts[i].EndS) > 0.005 {
			t.Errorf("burst %d: %.4f–%.4f s, truth %.4f–%.4f s", i+1, s, e, truth.Bursts[i].StartS, truth.Bursts[i].EndS)
		}
		// freq_hz = capture centre (433.92 MHz, steps96k.sigmf-meta) + offset.
		if f, _ := m["freq_hz"].(float64); math.Abs(f-433.92e6-m["offset_hz"].(float64)) > 0.2 {
			t.Errorf("burst %d: freq_hz %v is not the centre plus offset_hz %v", i+1, m["freq_hz"], m["offset_hz"])
		}
		if st, _ := m["start"].(string); !strings.HasPrefix(st, "2026-05-01T10:00:0") || !strings.HasSuffix(st, "Z") {
			t.Errorf("burst %d: start %q is not the RFC 3339 UTC time from core:datetime", i+1, st)
		}
	}
	last := lines[len(lines)-1]
	if last["type"] != "summary" {
		t.Errorf("last line type %v, want summary", last["type"])
	}
	sum, _ := last["summary"].(map[string]any)
	if n, _ := sum["bursts"].(float64); int(n) != len(truth.Bursts) {
		t.Errorf("summary bursts %v, want %d", sum["bursts"], len(truth.Bursts))
	}
	if cliFiles(t, dir) != nil {
		t.Errorf("scan wrote files: %v", cliFiles(t, dir))
	}
}
