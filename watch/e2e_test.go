package watch

import (
	"context"
	"fmt"
	"math"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/ident"
	"nullseek/ident/idmatch"
	"nullseek/internal/testtool"
	"nullseek/receiver"
	"nullseek/sdr"
	"nullseek/station"
	"nullseek/store"
	"nullseek/survey"
)

// The recording every end-to-end test serves: GNU Radio 3.10 (testdata/
// bearing/make_rotating.py, run into the test's folder) makes a carrier at
// +25 kHz keyed by Morse N0CALL at 18 WPM (ITU-R M.1677-1 timing) with an
// 800 Hz FM tone, on 17 s and off 2 s from 0 s (the keying starts 0.5 s
// in; the third burst is cut by the end), heard through a Yagi that
// sweeps 0° ↔ 120° at 6 °/s, so a burst covers about 95° (the fit wants
// 90°) — the speed of Hamlib's dummy rotator (rotctld
// 4.5.4 model 1 turns 6 °/s; heading/rotator_test.go measures it) — with
// noise at 25 dB SNR in 12.5 kHz, 240 kS/s cu8 (an RTL2832 rate). The
// scene is invented; the reference the tests check watch against is
// survey on the same file and the heading track watch stored.
const (
	recSeconds = 40.0
	recCentre  = 144.8e6
	recChannel = 144.825e6
)

var recArgs = []string{"--rate", "240000", "--seconds", fmt.Sprint(recSeconds), "--bursts", "17:2", "--first-on", "0", "--keyed", "18",
	"--pattern", "yagi", "--sweep", "backforth", "--arc", "120", "--turn-rate", "6", "--start-heading", "0",
	"--bearing", "30", "--snr", "25", "--datatype", "cu8", "--full-scale", "1"}

// makeRecording runs make_rotating.py into dir and returns the metadata's
// path.
func makeRecording(t *testing.T, dir string) string {
	t.Helper()
	return makeRecordingOf(t, dir, recSeconds)
}

// makeRecordingOf is makeRecording of the given length (the same bursts,
// 17 s on and 2 s off, go on to the end); extra arguments follow recArgs
// (argparse keeps the last of a repeated option, so they override).
func makeRecordingOf(t *testing.T, dir string, seconds float64, extra ...string) string {
	t.Helper()
	py := testtool.GNURadio(t)
	script := filepath.Join("..", "testdata", "bearing", "make_rotating.py")
	args := append(append([]string{script, "--out", dir}, recArgs...), extra...)
	for i := range args {
		if args[i] == "--seconds" {
			args[i+1] = fmt.Sprint(seconds)
		}
	}
	out, err := exec.Command(py, args...).CombinedOutput()
	if err != nil {
		t.Fatalf("make_rotating.py: %v\n%s", err, out)
	}
	return filepath.Join(dir, "rotating_loop.sigmf-meta")
}

// serve plays the recording over rtl_tcp on loopback in real time
// (sdr.ServeRTLTCP, paced) and returns HOST:PORT.
func serve(t *testing.T, meta string) string {
	t.Helper()
	src, err := sdr.Open(meta, sdr.RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan struct{})
	go func() {
		defer close(done)
		sdr.ServeRTLTCP(ctx, ln, src, sdr.ServeOptions{Paced: true, Logger: discard})
	}()
	t.Cleanup(func() { cancel(); <-done; src.Close() })
	return ln.Addr().String()
}

// writeStation writes a station file for the served recording and the
// rotator, with its database beside it.
func writeStation(t *testing.T, dir, rtl, rot string) string {
	t.Helper()
	return writeStationWith(t, dir, rtl, rot, fmt.Sprintf("[[channel]]\nfreq = %d\nmode = \"auto\"\nids = [\"N0CALL\"]\n", int64(recChannel)))
}

// writeStationWith is writeStation with the given [[channel]] tables.
func writeStationWith(t *testing.T, dir, rtl, rot, channels string) string {
	t.Helper()
	toml := fmt.Sprintf(`name = "Test Ridge"
database = "watch.db"

[position]
source = "fixed"
lat_lon = "45.0, 6.0"

[antenna]
kind = "yagi"

[receiver]
source = "rtl_tcp://%s"
sample_rate = 240000
centre = %d
gain_db = 30

%s
[heading]
source = "rotator"
reference = "true"
rotator = "%s"
sweep_from_deg = 0.0
sweep_to_deg = 120.0
`, rtl, int64(recCentre), channels, rot)
	path := filepath.Join(dir, "station.toml")
	if err := os.WriteFile(path, []byte(toml), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// syncBuffer is a bytes.Buffer safe for the watch's writers.
type syncBuffer = testtool.SyncBuffer

// integrityCheck asks the sqlite3 command-line shell (SQLite 3, an outside
// reader of the file) for PRAGMA integrity_check; a sound database
// answers "ok" (SQLite documentation, PRAGMA integrity_check).
func integrityCheck(t *testing.T, path string) {
	t.Helper()
	bin := testtool.Need(t, "sqlite3")
	out, err := exec.Command(bin, path, "PRAGMA integrity_check;").CombinedOutput()
	if err != nil || strings.TrimSpace(string(out)) != "ok" {
		t.Fatalf("sqlite3 %s: PRAGMA integrity_check: %v: %s", path, err, out)
	}
}

// watchRun runs a watch of the station file for the recording's length.
func watchRun(t *testing.T, stationPath string, opts Options) (*Summary, *station.File, string, string) {
	t.Helper()
	st, err := station.Load(stationPath)
	if err != nil {
		t.Fatal(err)
	}
	db, err := store.Open(st.Database, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	var log, status syncBuffer
	opts.Station, opts.DB, opts.Log, opts.Status = st, db, &log, &status
	if opts.StatusPeriod == 0 {
		opts.StatusPeriod = 2 * time.Second
	}
	if opts.DurationS == 0 {
		opts.DurationS = recSeconds
	}
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	sum, err := Run(ctx, opts)
	if err != nil {
		t.Fatalf("watch: %v\nlog:\n%s", err, log.String())
	}
	return sum, st, log.String(), status.String()
}

// TestWatchMatchesSurvey: a watch of the recording served over rtl_tcp,
// with Hamlib's dummy rotator (rotctld 4.5.4 -m 1) sweeping, stores the
// bursts, identifiers and bearings that survey finds on the same file
// with the heading track the watch stored: the same number of bursts,
// starts within 50 ms (ten level readings of the receiver), the same
// listed identifiers, each bearing within the sigma of survey's; sqlite3
// finds the file sound.
func TestWatchMatchesSurvey(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	meta := makeRecording(t, dir)
	rot, _ := testtool.Rotctld(t)
	sp := writeStation(t, dir, serve(t, meta), rot)
	sum, st, log, status := watchRun(t, sp, Options{})
	t.Logf("log:\n%s\nstatus:\n%s", log, status)
	integrityCheck(t, st.Database)

	db, err := store.Open(st.Database, store.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	bursts, err := db.BurstsOfCapture(sum.Capture)
	if err != nil {
		t.Fatal(err)
	}
	hs, ref, err := db.Headings(sum.Capture)
	if err != nil || ref != store.RefTrue || len(hs) < 100 {
		t.Fatalf("stored headings: %d (%s), %v; want 10 a second of a %v s watch", len(hs), ref, err, recSeconds)
	}
	tr := &heading.Track{Ref: heading.True}
	for _, h := range hs {
		tr.Samples = append(tr.Samples, heading.Sample{T: h.TimeS, Deg: h.Deg})
	}
	bs, err := db.Bearings(store.BearingQuery{Station: st.Name})
	if err != nil {
		t.Fatal(err)
	}
	bearingAt := map[int64]store.Bearing{}
	for _, b := range bs {
		bearingAt[b.BurstStartSample] = b
	}

	// The reference: survey on the same file with the stored headings.
	src, err := sdr.Open(meta, sdr.RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	spec := bearing.DefaultAntenna
	spec.Kind = "yagi"
	p, err := spec.Pattern()
	if err != nil {
		t.Fatal(err)
	}
	idOpts := ident.DefaultOptions()
	idOpts.IDs = []string{"N0CALL"}
	res, err := survey.Run(context.Background(), src, survey.Options{Receiver: receiver.Config{FreqHz: recChannel}, Ident: idOpts,
		Bearing: &survey.BearingPlan{Track: tr, Pattern: p, Fit: bearing.DefaultFit}}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Records) < 3 || len(bursts) != len(res.Records) || sum.Bursts != len(bursts) {
		t.Fatalf("watch stored %d bursts (logged %d), survey found %d; want the same, at least 3", len(bursts), sum.Bursts, len(res.Records))
	}
	if n := strings.Count(log, "\nburst ") + boolInt(strings.HasPrefix(log, "burst ")); n != len(bursts) {
		t.Errorf("%d burst lines for %d bursts", n, len(bursts))
	}
	compared := 0
	for i, r := range res.Records {
		b := bursts[i]
		// Level readings thinned to store.DefaultReadingsPerS (40 a second)
		// over the burst: one per window of 6000 samples at 240 kS/s.
		rd, err := db.Readings(b.ID)
		if err != nil {
			t.Fatal(err)
		}
		if want := (b.EndS - b.StartS) * store.DefaultReadingsPerS; float64(len(rd)) < 0.8*want || float64(len(rd)) > want+2 {
			t.Errorf("burst %d (%.1f s): %d level readings stored, want about %.0f", i, b.EndS-b.StartS, len(rd), want)
		}
		// The stored readings, handed to the store block by block while
		// the burst was on, are survey's level track of the burst thinned
		// (store.ThinLevels) at the same samples.
		var raw []store.LevelReading
		for _, lv := range r.Level {
			raw = append(raw, store.LevelReading{Sample: lv.Sample, TimeS: lv.T, LevelDBFS: lv.LevelDB, Clipped: lv.Clipped})
		}
		thin, err := store.ThinLevels(raw, 240000, store.DefaultReadingsPerS)
		if err != nil {
			t.Fatal(err)
		}
		at := map[int64]float64{}
		for _, x := range thin {
			at[x.Sample] = x.LevelDBFS
		}
		same := 0
		for _, x := range rd {
			if lv, ok := at[x.Sample]; ok && math.Abs(lv-x.LevelDBFS) < 0.01 {
				same++
			}
		}
		if same < len(rd)-2 {
			t.Errorf("burst %d: %d of %d stored readings equal survey's thinned track at their sample", i, same, len(rd))
		}
		if d := math.Abs(b.StartS - r.StartS); d > 0.05 {
			t.Errorf("burst %d starts at %.3f s in the watch, %.3f s in survey", i, b.StartS, r.StartS)
		}
		if idmatch.Known(r.Ident) && r.IdentMethod != "fingerprint" && b.Ident != r.Ident {
			t.Errorf("burst %d: watch read %q, survey %q", i, b.Ident, r.Ident)
		}
		if r.Fit == nil || r.Fit.Err != nil {
			continue
		}
		wb, ok := bearingAt[b.StartSample]
		if !ok {
			t.Errorf("burst %d: survey fitted %.1f° ± %.1f°, the watch stored no bearing", i, r.Fit.Est.BearingDeg, r.Fit.Est.SigmaDeg)
			continue
		}
		d := math.Abs(math.Remainder(wb.TrueDeg-r.Fit.Est.BearingDeg, 360))
		if d > r.Fit.Est.SigmaDeg {
			t.Errorf("burst %d: watch %.2f° ± %.2f°, survey %.2f° ± %.2f°: %.2f° apart", i, wb.TrueDeg, wb.SigmaDeg, r.Fit.Est.BearingDeg, r.Fit.Est.SigmaDeg, d)
		}
		compared++
	}
	if compared == 0 {
		t.Fatal("survey fitted no bearing to compare with")
	}
	// Against the recording's truth (make_rotating.py: 30° true): the
	// dummy rotator sweeps as the recording's antenna did, but from the
	// moment the watch dialled it rather than from sample 0; up to half a
	// second of that is 3° at 6 °/s.
	for _, b := range bs {
		if d := math.Abs(math.Remainder(b.TrueDeg-30, 360)); d > 5 {
			t.Errorf("bearing %.1f° is %.1f° from the recording's 30°", b.TrueDeg, d)
		}
	}
	plan, err := db.ScheduleAt(time.Now().Add(time.Hour))
	if err != nil || len(plan) == 0 {
		t.Errorf("no slot schedule stored after %d bursts: %v", len(bursts), err)
	}
	for _, want := range []string{"MS/s", "CPU", "rotator", "behind", "input [", "dBFS", "last burst"} {
		if !strings.Contains(status, want) {
			t.Errorf("the status lines say nothing of %q:\n%s", want, status)
		}
	}
	// While a burst is on (34 s of the 40), the status lines say so with
	// the channel's level and SNR, not only once a piece has come.
	if n := len(statusOn.FindAllString(status, -1)); n < 5 {
		t.Errorf("%d status lines show the channel on, want most of the %d:\n%s", n, strings.Count(status, "status "), status)
	}
}

// statusOn is a channel shown on in a status line.
var statusOn = regexp.MustCompile(`MHz on -?\d+\.\d dBFS SNR \d+\.\d dB`)

func boolInt(b bool) int {
	if b {
		return 1
	}
	return 0
}
