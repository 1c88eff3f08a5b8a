package survey

import (
	"context"
	"fmt"
	"math"
	"math/rand"
	"nullseek/ident"
	"nullseek/ident/idmatch"
	"nullseek/ident/morse"
	"nullseek/internal/testtool"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"testing"
	"time"

	"nullseek/receiver"
	"nullseek/sdr"
)

// End-to-end Morse checks: IQ made by outside tools (ebook2cw 0.8.4 keys
// the text, sox 14.4.2 converts it, GNU Radio 3.10.5 frequency-modulates it
// and adds noise at a known CNR; testdata/morse/make_fm_iq.py) goes through
// our whole chain: sdr.Open → survey.Run (channel filter, burst detector,
// FM demodulation, Morse decoder, ID matcher). The reference is the text
// given to ebook2cw.
//
// Requirement (project issue): free decoding CER ≤ 1 % at CNR ≥ 12 dB in a
// 12.5 kHz channel; known-ID matching correct on ≥ 95 % of bursts at CNR 6 dB.

// The IQ format of make_fm_iq.py (its header): cu8, 48000 S/s, value =
// round(127.5 + 40·x), carrier +3000 Hz from the centre, noise power ampl²
// over 48 kHz with ampl = sqrt(48/12.5 / 10^(CNR/10)).
const (
	morseRate     = 48000.0
	morseOffsetHz = 3000.0
)

var morseIDs = []string{"N0CALL/1", "N0CALL/2", "N0CALL/3", "N0CALL/4", "N0CALL/5"}

// Receiver settings: the defaults. At CNR 6 dB in 12.5 kHz our channel
// filter (7 kHz pass, 12 kHz stop: about 18.5 kHz noise bandwidth) sees an
// SNR of about 4.4 dB, so the carrier lifts the channel power about 5.7 dB,
// above the default 5 dB start threshold.
var defaultCfg = receiver.Config{OffsetHz: morseOffsetHz}

// cfgFor picks the receiver settings for a CNR (the defaults at every CNR).
func cfgFor(float64) receiver.Config { return defaultCfg }

// morseNoiseAmpl is make_fm_iq.py's noise_ampl: total complex noise
// amplitude over 48 kHz for a CNR (dB) in 12.5 kHz.
func morseNoiseAmpl(cnrDB float64) float64 {
	return math.Sqrt(48.0 / 12.5 / math.Pow(10, cnrDB/10))
}

// padWithNoise puts gapS seconds of carrier-off noise before and after the
// committed burst IQ. The committed files hold the carrier from their first
// sample to their last, so a receiver never sees the noise floor; the pad
// is complex Gaussian noise of the power make_fm_iq.py used (its CNR
// formula), quantised the same way. It is scaffolding, not the reference:
// the burst itself is GNU Radio's.
func padWithNoise(t *testing.T, burst []byte, cnrDB, gapS float64, seed int64) string {
	t.Helper()
	rng := rand.New(rand.NewSource(seed))
	sigma := morseNoiseAmpl(cnrDB) / math.Sqrt2 // per component
	n := int(gapS * morseRate)
	q := func(x float64) byte { return byte(math.Max(0, math.Min(255, math.Round(127.5+40*x)))) }
	noise := func() []byte {
		b := make([]byte, 2*n)
		for i := range b {
			b[i] = q(sigma * rng.NormFloat64())
		}
		return b
	}
	data := append(append(noise(), burst...), noise()...)
	path := filepath.Join(t.TempDir(), "padded.cu8")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// surveyCU8 runs the whole chain on a raw cu8 recording of make_fm_iq.py's
// format.
func surveyCU8(t *testing.T, path string, ids []string, rc receiver.Config) *Result {
	t.Helper()
	src, err := sdr.Open(path, sdr.RawParams{SampleRate: morseRate, Format: "cu8"})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	res, err := Run(context.Background(), src, Options{
		Receiver: rc,
		Ident:    ident.Options{Mode: morse.ModeAuto, IDs: ids},
	}, nil)
	if err != nil {
		t.Fatal(err)
	}
	return res
}

// TestE2EMorseCommittedIQ runs the two committed GNU Radio IQ bursts
// ("N0CALL/2", 40 WPM, 800 Hz; testdata/morse/fm/manifest.tsv) through the
// chain, free and with the ID list.
func TestE2EMorseCommittedIQ(t *testing.T) {
	dir := filepath.Join(testdataDir, "morse", "fm")
	var n int
	for _, row := range testtool.TSVRows(t, filepath.Join(dir, "manifest.tsv")) {
		if row["kind"] != "iq" {
			continue
		}
		n++
		cnr, _ := strconv.ParseFloat(row["cnr_db"], 64)
		want := row["text"]
		t.Run(row["file"], func(t *testing.T) {
			raw, err := os.ReadFile(filepath.Join(dir, row["file"]))
			if err != nil {
				t.Fatal(err)
			}
			path := padWithNoise(t, raw, cnr, 1.0, 7)
			burstS := float64(len(raw)/2) / morseRate
			for _, ids := range [][]string{nil, morseIDs} {
				res := surveyCU8(t, path, ids, cfgFor(cnr))
				if len(res.Records) != 1 {
					t.Fatalf("ids %v: %d bursts, want 1 (GNU Radio made one burst)", ids, len(res.Records))
				}
				r := res.Records[0]
				// Carrier on at 1.0 s, off at 1.0 s + the burst (make_fm_iq.py
				// output length, padded above); 20 ms ≈ 4 readings at 200/s.
				if math.Abs(r.StartS-1.0) > 0.02 || math.Abs(r.EndS-(1.0+burstS)) > 0.02 {
					t.Errorf("burst %.3f–%.3f s, want 1.000–%.3f s", r.StartS, r.EndS, 1+burstS)
				}
				// Carrier at +3000 Hz (make_fm_iq.py OFFSET_HZ); an FM burst's
				// mean frequency is its carrier within a few tens of Hz.
				if math.Abs(r.OffsetHz-morseOffsetHz) > 50 {
					t.Errorf("carrier offset %.1f Hz, want 3000 Hz", r.OffsetHz)
				}
				// 800 Hz tone (manifest, ebook2cw -f 800).
				if math.Abs(r.ToneHz-800) > 20 {
					t.Errorf("tone %.1f Hz, want 800 Hz", r.ToneHz)
				}
				d := testtool.EditDistance(testtool.CERText(r.Text), testtool.CERText(want))
				t.Logf("CNR %g dB, ids=%v: text %q (ref %q, %d errors), ident %s (%.2f, %s), SNR %.1f dB",
					cnr, ids != nil, r.Text, want, d, r.Ident, r.IdentConfidence, r.IdentMethod, r.SNRDB)
				if cnr >= 12 && d != 0 {
					// CER ≤ 1 % on 8 characters means no error (issue requirement).
					t.Errorf("CNR %g dB: %d character errors in %q (ref %q)", cnr, d, r.Text, want)
				}
				if ids != nil && r.Ident != want {
					// Known-ID matching at CNR ≥ 6 dB (issue requirement).
					t.Errorf("CNR %g dB: ident %q, want %q", cnr, r.Ident, want)
				}
			}
		})
	}
	if n != 2 {
		t.Fatalf("manifest lists %d IQ files, want 2", n)
	}
}

// truthBurst is one burst of a make_morse_bursts.py recording.
type truthBurst struct {
	startS, endS float64
	text         string
}

func readBurstTruth(t *testing.T, path string) []truthBurst {
	var out []truthBurst
	for _, r := range testtool.TSVRows(t, path) {
		s, err1 := strconv.ParseFloat(r["start_s"], 64)
		e, err2 := strconv.ParseFloat(r["end_s"], 64)
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: bad times %v %v", path, r["start_s"], r["end_s"])
		}
		out = append(out, truthBurst{s, e, r["text"]})
	}
	if len(out) == 0 {
		t.Fatalf("%s: no bursts", path)
	}
	return out
}

// morseScore pairs detected bursts with the truth by time overlap.
type morseScore struct {
	bursts, found, extra int
	chars, errs          int
	idRight              int
	maxEdgeErrS          float64
}

func scoreMorse(t *testing.T, res *Result, truth []truthBurst) morseScore {
	var sc morseScore
	sc.bursts = len(truth)
	used := make([]bool, len(res.Records))
	for _, tb := range truth {
		ref := testtool.CERText(tb.text)
		sc.chars += len(ref)
		best, bestOv := -1, 0.0
		for i, r := range res.Records {
			ov := math.Min(r.EndS, tb.endS) - math.Max(r.StartS, tb.startS)
			if ov > bestOv {
				best, bestOv = i, ov
			}
		}
		if best < 0 {
			sc.errs += len(ref) // missed: every character lost
			t.Logf("burst %.2f–%.2f s %q: not detected", tb.startS, tb.endS, tb.text)
			continue
		}
		used[best] = true
		sc.found++
		r := res.Records[best]
		sc.maxEdgeErrS = math.Max(sc.maxEdgeErrS, math.Max(math.Abs(r.StartS-tb.startS), math.Abs(r.EndS-tb.endS)))
		d := testtool.EditDistance(testtool.CERText(r.Text), ref)
		sc.errs += d
		want := strings.Fields(tb.text)[0]
		if r.Ident == want {
			sc.idRight++
		}
		if d > 0 || (r.Ident != want && r.Ident != idmatch.Unknown) {
			t.Logf("burst %.2f s: read %q for %q (%d errors), ident %s (%.2f %s)", tb.startS, r.Text, tb.text, d, r.Ident, r.IdentConfidence, r.IdentMethod)
		}
	}
	for i, u := range used {
		if !u {
			sc.extra++
			sc.errs += len(testtool.CERText(res.Records[i].Text)) // a false burst's text is all insertions
			t.Logf("extra burst %.2f–%.2f s text %q", res.Records[i].StartS, res.Records[i].EndS, res.Records[i].Text)
		}
	}
	return sc
}

// TestE2EMorseGenerated makes fresh recordings with the committed GNU Radio
// script (testdata/e2e/make_morse_bursts.py, which calls
// testdata/morse/make_fm_iq.py for every burst) into a temporary directory:
// seven free-text bursts (108 characters, so that one error is within
// 1 %) at CNR 12 dB (and 15 dB with NULLSEEK_E2E_FULL=1), and twenty
// known-ID bursts at CNR 6 dB
// (whose free-text CER is reported too), each recording with quiet gaps.
func TestE2EMorseGenerated(t *testing.T) {
	testtool.GNURadio(t, "ebook2cw", "sox")
	t.Parallel() // mostly waiting on Python; overlaps the other end-to-end tests
	// CNR 12 dB is the requirement's hardest case; 15 dB adds runtime, not
	// evidence, so it runs only with NULLSEEK_E2E_FULL=1.
	cerCNRs := []float64{12}
	if os.Getenv("NULLSEEK_E2E_FULL") == "1" {
		cerCNRs = append(cerCNRs, 15)
	}
	var cs []string
	for _, c := range cerCNRs {
		cs = append(cs, strconv.FormatFloat(c, 'g', -1, 64))
	}
	dir := t.TempDir()
	t0 := time.Now()
	cmd := exec.Command(testtool.DebianPython, filepath.Join(testdataDir, "e2e", "make_morse_bursts.py"),
		"--out", dir, "--seed", "3", "--cer-cnrs", strings.Join(cs, ","), "--id-cnr", "6", "--id-bursts", "20")
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("make_morse_bursts.py: %v\n%s", err, out)
	}
	t.Logf("GNU Radio generation: %.1f s", time.Since(t0).Seconds())

	type row struct {
		cnr float64
		sc  morseScore
	}
	var rows []row
	for _, c := range cerCNRs {
		name := "cer_cnr" + strconv.FormatFloat(c, 'g', -1, 64)
		truth := readBurstTruth(t, filepath.Join(dir, name+".tsv"))
		res := surveyCU8(t, filepath.Join(dir, name+".cu8"), nil, cfgFor(c))
		sc := scoreMorse(t, res, truth)
		rows = append(rows, row{c, sc})
		cer := float64(sc.errs) / float64(sc.chars)
		t.Logf("free decoding, CNR %4.1f dB: %d/%d bursts found, %d extra, %d errors in %d characters: CER %.2f %%, worst edge error %.1f ms",
			c, sc.found, sc.bursts, sc.extra, sc.errs, sc.chars, 100*cer, 1000*sc.maxEdgeErrS)
		if c >= 12 {
			// Issue requirement: CER ≤ 1 % at CNR ≥ 12 dB in 12.5 kHz
			// (CNR as defined in make_fm_iq.py's header).
			if cer > 0.01 {
				t.Errorf("CNR %g dB: CER %.2f %% > 1 %%", c, 100*cer)
			}
			if sc.found != sc.bursts || sc.extra != 0 {
				t.Errorf("CNR %g dB: %d of %d bursts found, %d extra", c, sc.found, sc.bursts, sc.extra)
			}
			// Carrier on/off times from the script's sample counts; 25 ms is
			// five readings at 200 readings/s (common practice for an edge
			// found on a power track, not a standard).
			if sc.maxEdgeErrS > 0.025 {
				t.Errorf("CNR %g dB: burst edge off by %.1f ms", c, 1000*sc.maxEdgeErrS)
			}
		}
	}

	truth := readBurstTruth(t, filepath.Join(dir, "id_cnr6.tsv"))
	res := surveyCU8(t, filepath.Join(dir, "id_cnr6.cu8"), morseIDs, defaultCfg)
	sc := scoreMorse(t, res, truth)
	acc := float64(sc.idRight) / float64(sc.bursts)
	methods := map[string]int{}
	for _, r := range res.Records {
		methods[r.IdentMethod]++
	}
	rows = append(rows, row{6, sc})
	t.Logf("known-ID, CNR 6 dB: %d/%d bursts right (%.0f %%), %d found, %d extra, free-text CER %.2f %%, methods %v",
		sc.idRight, sc.bursts, 100*acc, sc.found, sc.extra, 100*float64(sc.errs)/float64(sc.chars), methods)
	// Issue requirement: known-ID matching correct on ≥ 95 % of bursts at
	// CNR 6 dB. A missed burst counts as wrong.
	if acc < 0.95 {
		t.Errorf("known-ID accuracy %.0f %% (%d/%d) < 95 %% at CNR 6 dB", 100*acc, sc.idRight, sc.bursts)
	}
	sort.Slice(rows, func(i, j int) bool { return rows[i].cnr < rows[j].cnr })
	var b strings.Builder
	fmt.Fprintf(&b, "\n%7s %6s %6s %8s\n", "CNR dB", "chars", "errors", "CER %")
	for _, r := range rows {
		fmt.Fprintf(&b, "%7.1f %6d %6d %8.2f\n", r.cnr, r.sc.chars, r.sc.errs, 100*float64(r.sc.errs)/float64(r.sc.chars))
	}
	t.Log(b.String())
}
