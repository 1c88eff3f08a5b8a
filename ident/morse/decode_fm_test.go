package morse

import (
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"

	"nullseek/ident/internal/identtest"
	"nullseek/internal/testtool"
)

// The fixtures in testdata/morse/fm were made entirely by outside tools:
// ebook2cw 0.8.4 audio, frequency-modulated (±2.5 kHz), noised at a known
// carrier-to-noise ratio in 12.5 kHz and demodulated by GNU Radio 3.10.5
// (testdata/morse/make_fm_iq.py; CNR definition in its header).

type cerRow struct {
	cnr              float64
	refLen, us, peer int
	peerRan          bool
}

// cerTable decodes every "cer" file of a manifest with our decoder (and
// multimon-ng when given) and sums edit distances per CNR.
func cerTable(t *testing.T, dir string, sox, mm string) []cerRow {
	rows := testtool.TSVRows(t, filepath.Join(dir, "manifest.tsv"))
	by := map[float64]*cerRow{}
	for _, r := range rows {
		if r["kind"] != "cer" {
			continue
		}
		cnr := identtest.Atof(t, r["cnr_db"])
		row := by[cnr]
		if row == nil {
			row = &cerRow{cnr: cnr}
			by[cnr] = row
		}
		path := filepath.Join(dir, r["file"])
		a, rate, err := identtest.ReadWAV(path)
		if err != nil {
			t.Fatal(err)
		}
		ref := testtool.CERText(r["text"])
		row.refLen += len(ref)
		got := ""
		if d, err := DecodeTone(a, rate, DecodeOptions{Mode: ModeFM}); err == nil {
			got = d.Text
		} else {
			t.Logf("%s: %v", r["file"], err)
		}
		row.us += testtool.EditDistance(testtool.CERText(got), ref)
		if mm != "" {
			row.peer += testtool.EditDistance(testtool.CERText(identtest.Multimon(t, sox, mm, path)), ref)
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
	dir := filepath.Join(identtest.MorseDir, "fm")
	sox, mm := "", ""
	if testtool.Have(t, "multimon-ng") {
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

// TestFMIQCompanions decodes the demodulated companions of the committed
// cu8 IQ files (the receiver's end-to-end test uses the IQ itself).
func TestFMIQCompanions(t *testing.T) {
	for _, cnr := range []int{12, 6} {
		a, rate, err := identtest.ReadWAV(filepath.Join(identtest.MorseDir, "fm", fmt.Sprintf("iq_cnr%d_n0call2_demod.wav", cnr)))
		if err != nil {
			t.Fatal(err)
		}
		d, err := DecodeTone(a, rate, DecodeOptions{})
		if err != nil || d.Text != "N0CALL/2" {
			t.Errorf("CNR %d: %q, %v", cnr, d.Text, err)
		}
		if st, err := os.Stat(filepath.Join(identtest.MorseDir, "fm", fmt.Sprintf("iq_cnr%d_n0call2.cu8", cnr))); err != nil || st.Size()%2 != 0 {
			t.Errorf("cu8 companion: %v", err)
		}
	}
}

// BenchmarkErrorRateVsCNR decodes the GNU Radio CER files (all CNRs) and
// reports audio samples decoded per second; run the test
// TestFMFreeDecodeCER -v for the CER table against multimon-ng.
func BenchmarkErrorRateVsCNR(b *testing.B) {
	var audio [][]float32
	var rate float64
	for _, r := range testtool.TSVRows(b, filepath.Join(identtest.MorseDir, "fm", "manifest.tsv")) {
		if r["kind"] == "cer" {
			a, fs, err := identtest.ReadWAV(filepath.Join(identtest.MorseDir, "fm", r["file"]))
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
