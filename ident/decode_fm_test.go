package ident

import (
	"bytes"
	"fmt"
	"nullseek/internal/testtool"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"testing"
)

// The fixtures in testdata/morse/fm were made entirely by outside tools:
// ebook2cw 0.8.4 audio, frequency-modulated (±2.5 kHz), noised at a known
// carrier-to-noise ratio in 12.5 kHz and demodulated by GNU Radio 3.10.5
// (testdata/morse/make_fm_iq.py; CNR definition in its header).

// cerText prepares text for character error rate: upper case, white space
// removed (word-gap errors are not counted; both decoders are compared the
// same way).
func cerText(s string) []rune {
	return []rune(strings.Join(strings.Fields(strings.ToUpper(s)), ""))
}

func runeDistance(a, b []rune) int {
	sa := make([]string, len(a))
	for i, r := range a {
		sa[i] = string(r)
	}
	sb := make([]string, len(b))
	for i, r := range b {
		sb[i] = string(r)
	}
	return mcEditDistance(sa, sb)
}

// multimonDecode runs multimon-ng's MORSE_CW decoder (Debian multimon-ng
// 1.2.0) on a WAV: sox resamples to raw 22050 Hz s16le, as its help asks.
func multimonDecode(t testing.TB, sox, mm, wav string) string {
	t.Helper()
	s := exec.Command(sox, wav, "-t", "raw", "-r", "22050", "-e", "signed-integer", "-b", "16", "-c", "1", "-")
	raw, err := s.Output()
	if err != nil {
		t.Fatalf("sox %s: %v", wav, err)
	}
	m := exec.Command(mm, "-q", "-c", "-a", "MORSE_CW", "-t", "raw", "-")
	m.Stdin = bytes.NewReader(raw)
	out, err := m.Output()
	if err != nil {
		t.Fatalf("multimon-ng %s: %v", wav, err)
	}
	return strings.TrimSpace(string(out))
}

type cerRow struct {
	cnr              float64
	refLen, us, peer int
	peerRan          bool
}

// cerTable decodes every "cer" file of a manifest with our decoder (and
// multimon-ng when given) and sums edit distances per CNR.
func cerTable(t *testing.T, dir string, sox, mm string) []cerRow {
	rows := tsvRows(t, filepath.Join(dir, "manifest.tsv"))
	by := map[float64]*cerRow{}
	for _, r := range rows {
		if r["kind"] != "cer" {
			continue
		}
		cnr := atof(t, r["cnr_db"])
		row := by[cnr]
		if row == nil {
			row = &cerRow{cnr: cnr}
			by[cnr] = row
		}
		path := filepath.Join(dir, r["file"])
		a, rate, err := mcReadWAV(path)
		if err != nil {
			t.Fatal(err)
		}
		ref := cerText(r["text"])
		row.refLen += len(ref)
		got := ""
		if d, err := DecodeTone(a, rate, DecodeOptions{Mode: ModeFM}); err == nil {
			got = d.Text
		} else {
			t.Logf("%s: %v", r["file"], err)
		}
		row.us += runeDistance(cerText(got), ref)
		if mm != "" {
			row.peer += runeDistance(cerText(multimonDecode(t, sox, mm, path)), ref)
			row.peerRan = true
		}
		if testing.Verbose() && got != strings.ToUpper(r["text"]) {
			t.Logf("CNR %g dB %s: ours %q, sent %q", cnr, r["file"], got, r["text"])
		}
	}
	var out []cerRow
	for _, r := range by {
		out = append(out, *r)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].cnr < out[j].cnr })
	return out
}

func printCER(t *testing.T, rows []cerRow) {
	var b strings.Builder
	fmt.Fprintf(&b, "\n%8s %6s %10s %14s\n", "CNR dB", "chars", "ours CER", "multimon CER")
	for _, r := range rows {
		peer := "skipped"
		if r.peerRan {
			peer = fmt.Sprintf("%.1f %%", 100*float64(r.peer)/float64(r.refLen))
		}
		fmt.Fprintf(&b, "%8.0f %6d %9.1f %% %14s\n", r.cnr, r.refLen, 100*float64(r.us)/float64(r.refLen), peer)
	}
	t.Log(b.String())
}

// checkCER: character error rate ≤ 1 % at CNR ≥ 12 dB (task requirement;
// the audio is GNU Radio's, the texts ebook2cw's).
func checkCER(t *testing.T, rows []cerRow) {
	n := 0
	for _, r := range rows {
		if r.cnr >= 12 {
			n++
			if cer := float64(r.us) / float64(r.refLen); cer > 0.01 {
				t.Errorf("CNR %g dB: CER %.1f %% > 1 %%", r.cnr, 100*cer)
			}
		}
	}
	if n == 0 {
		t.Fatal("no fixtures at CNR ≥ 12 dB")
	}
}

// TestFMFreeDecodeCER measures our CER and multimon-ng's on the same
// GNU Radio audio and prints the table. Ours must be lower at every CNR;
// where multimon-ng's CER is already 0, "lower or equal" (both 0) is the
// only possible reading.
func TestFMFreeDecodeCER(t *testing.T) {
	dir := filepath.Join(morseDir, "fm")
	sox, mm := "", ""
	if _, err := exec.LookPath("multimon-ng"); err == nil || os.Getenv("NULLSEEK_REQUIRE_TOOLS") == "1" {
		mm = testtool.Need(t, "multimon-ng")
		sox = testtool.Need(t, "sox")
	} else {
		t.Log("multimon-ng not installed: peer comparison skipped")
	}
	rows := cerTable(t, dir, sox, mm)
	printCER(t, rows)
	checkCER(t, rows)
	for _, r := range rows {
		if !r.peerRan {
			continue
		}
		if r.us > r.peer || (r.peer > 0 && r.us >= r.peer) {
			t.Errorf("CNR %g dB: our %d errors vs multimon-ng %d", r.cnr, r.us, r.peer)
		}
	}
}

// idAccuracy matches every "id" burst of a manifest against N0CALL/1..5.
func idAccuracy(t *testing.T, dir string) (right, total int, methods map[string]int) {
	m, err := NewMatcher([]string{"N0CALL/1", "N0CALL/2", "N0CALL/3", "N0CALL/4", "N0CALL/5"})
	if err != nil {
		t.Fatal(err)
	}
	methods = map[string]int{}
	for _, r := range tsvRows(t, filepath.Join(dir, "manifest.tsv")) {
		if r["kind"] != "id" {
			continue
		}
		total++
		want := strings.Fields(r["text"])[0]
		a, rate, err := mcReadWAV(filepath.Join(dir, r["file"]))
		if err != nil {
			t.Fatal(err)
		}
		d, err := DecodeTone(a, rate, DecodeOptions{Mode: ModeFM})
		if err != nil {
			t.Logf("%s: %v", r["file"], err)
			continue
		}
		got := m.Match(d)
		methods[got.Method]++
		if got.ID == want {
			right++
		} else {
			t.Logf("%s (CNR %s): sent %s, decoded %q, matched %s (%.2f, %s) %v", r["file"], r["cnr_db"], want, d.Text, got.ID, got.Confidence, got.Method, got.Warnings)
		}
		if got.ID != want && got.ID != UnknownID {
			t.Errorf("%s: wrong identifier %s reported with confidence %.2f (sent %s)", r["file"], got.ID, got.Confidence, want)
		}
	}
	return right, total, methods
}

// TestFMKnownIDAccuracy: ≥ 95 % of the 25 ID bursts at CNR 6 dB are
// matched to the identifier sent (task requirement), and none wrongly.
func TestFMKnownIDAccuracy(t *testing.T) {
	right, total, methods := idAccuracy(t, filepath.Join(morseDir, "fm"))
	t.Logf("known-ID matching at CNR 6 dB: %d/%d right; methods %v", right, total, methods)
	if total < 20 || float64(right) < 0.95*float64(total) {
		t.Errorf("%d/%d bursts matched, want ≥ 95 %% of ≥ 20", right, total)
	}
}

// TestFMIQCompanions decodes the demodulated companions of the committed
// cu8 IQ files (the receiver's end-to-end test uses the IQ itself).
func TestFMIQCompanions(t *testing.T) {
	for _, cnr := range []int{12, 6} {
		a, rate, err := mcReadWAV(filepath.Join(morseDir, "fm", fmt.Sprintf("iq_cnr%d_n0call2_demod.wav", cnr)))
		if err != nil {
			t.Fatal(err)
		}
		d, err := DecodeTone(a, rate, DecodeOptions{})
		if err != nil || d.Text != "N0CALL/2" {
			t.Errorf("CNR %d: %q, %v", cnr, d.Text, err)
		}
		if st, err := os.Stat(filepath.Join(morseDir, "fm", fmt.Sprintf("iq_cnr%d_n0call2.cu8", cnr))); err != nil || st.Size()%2 != 0 {
			t.Errorf("cu8 companion: %v", err)
		}
	}
}

// TestFMFreshNoise regenerates ten ID bursts at CNR 6 dB with another
// noise seed and repeats the known-ID check, so the committed set is not a
// lucky draw (all 39 files would take too long on a shared machine).
func TestFMFreshNoise(t *testing.T) {
	if testing.Short() {
		t.Skip("short mode: fresh GNU Radio generation skipped")
	}
	py := testtool.GNURadio(t, "ebook2cw", "sox")
	dir := t.TempDir()
	cmd := exec.Command(py, "make_fm_iq.py", "--out", dir, "--seed", "2", "--no-iq", "--only", "id", "--id-bursts", "10")
	cmd.Dir = morseDir
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("make_fm_iq.py: %v\n%s", err, out)
	}
	right, total, methods := idAccuracy(t, dir)
	t.Logf("fresh seed: known-ID %d/%d at CNR 6 dB; methods %v", right, total, methods)
	if total != 10 || float64(right) < 0.95*float64(total) {
		t.Errorf("%d/%d bursts matched", right, total)
	}
}

// BenchmarkErrorRateVsCNR decodes the GNU Radio CER files (all CNRs) and
// reports audio samples decoded per second; run the test
// TestFMFreeDecodeCER -v for the CER table against multimon-ng.
func BenchmarkErrorRateVsCNR(b *testing.B) {
	var audio [][]float32
	var rate float64
	for _, r := range tsvRows(b, filepath.Join(morseDir, "fm", "manifest.tsv")) {
		if r["kind"] == "cer" {
			a, fs, err := mcReadWAV(filepath.Join(morseDir, "fm", r["file"]))
			if err != nil {
				b.Fatal(err)
			}
			audio, rate = append(audio, a), fs
		}
	}
	n := 0
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		for _, a := range audio {
			if _, err := DecodeTone(a, rate, DecodeOptions{}); err != nil {
				b.Fatal(err)
			}
			n += len(a)
		}
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "samples/s")
}
