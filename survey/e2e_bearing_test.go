package survey

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"nullseek/internal/testtool"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/receiver"
	"nullseek/sdr"
)

// angleErrDeg is the absolute difference of two bearings, 0…180°.
func angleErrDeg(a, b float64) float64 {
	d := math.Mod(math.Abs(a-b), 360)
	return math.Min(d, 360-d)
}

// rotTruth is testdata/bearing/rotating_loop_truth.json (make_rotating.py).
type rotTruth struct {
	BearingDeg float64 `json:"bearing_deg"`
	Pattern    struct {
		Kind        string  `json:"kind"`
		NullDepthDB float64 `json:"null_depth_db"`
		Symmetry    int     `json:"symmetry"`
	} `json:"pattern"`
	OffsetHz   float64 `json:"carrier_offset_hz"`
	SNRDB      float64 `json:"snr_db_in_12k5"`
	TurnRate   float64 `json:"turn_rate_deg_s"`
	StartDeg   float64 `json:"start_heading_deg"`
	SampleRate float64 `json:"sample_rate"`
	Seconds    float64 `json:"seconds"`
}

func readRotTruth(t *testing.T, path string) rotTruth {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var tr rotTruth
	if err := json.Unmarshal(b, &tr); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return tr
}

// TestE2EBearingRotatingLoop: GNU Radio 3.10 (testdata/bearing/
// make_rotating.py, run at test time into a temporary directory: its IQ is
// 13 MB) makes an NBFM beacon whose level a small loop turning at a steady
// rate shapes, with noise at a known SNR in 12.5 kHz, plus the heading log
// and the truth. Our chain: sdr.Open (SigMF ci16_le) → survey.Run →
// heading.ReadLog → survey.Bearings with bearing.SmallLoop of the truth's
// null depth. Requirement (project issue): bearing error ≤ 2° at SNR ≥ 20 dB.
// A loop's null is bidirectional (FCC question pool E9H05), so the truth is
// ambiguous: the bearing or its reported alternate must match it.
func TestE2EBearingRotatingLoop(t *testing.T) {
	testtool.GNURadio(t)
	t.Parallel()
	committed := filepath.Join(testdataDir, "bearing")
	cases := []struct {
		name string
		args []string // make_rotating.py options besides --out
		// useCommitted: compare the generated heading log and truth with
		// the committed ones (the default parameters made those).
		useCommitted bool
	}{
		{"committed parameters, SNR 20 dB", []string{"--snr", "20"}, true},
		{"bearing 101, anticlockwise from 200, SNR 20 dB", []string{"--snr", "20", "--bearing", "101", "--start-heading", "200", "--turn-rate", "-30", "--seed", "77"}, false},
	}
	if testing.Short() {
		cases = cases[:1]
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			cmd := exec.Command(testtool.DebianPython, append([]string{filepath.Join(committed, "make_rotating.py"), "--out", dir}, c.args...)...)
			if out, err := cmd.CombinedOutput(); err != nil {
				t.Fatalf("make_rotating.py: %v\n%s", err, out)
			}
			truth := readRotTruth(t, filepath.Join(dir, "rotating_loop_truth.json"))
			if c.useCommitted {
				ct := readRotTruth(t, filepath.Join(committed, "rotating_loop_truth.json"))
				ct.SNRDB = truth.SNRDB // only the SNR was changed
				if ct != truth {
					t.Fatalf("generated truth %+v differs from the committed %+v", truth, ct)
				}
				gen, _ := os.ReadFile(filepath.Join(dir, "rotating_loop_heading.csv"))
				com, err := os.ReadFile(filepath.Join(committed, "rotating_loop_heading.csv"))
				if err != nil || !bytes.Equal(gen, com) {
					t.Fatalf("generated heading log differs from the committed one (%v)", err)
				}
			}
			if truth.Pattern.Kind != "small_loop" || truth.Pattern.Symmetry != 2 {
				t.Fatalf("truth pattern %+v: this test knows the small loop only", truth.Pattern)
			}

			src, err := sdr.Open(filepath.Join(dir, "rotating_loop.sigmf-meta"), sdr.RawParams{})
			if err != nil {
				t.Fatal(err)
			}
			defer src.Close()
			// MergeGapS 1.5 s as `nullseek bearing` sets it: the loop's nulls
			// drop the level under the off threshold, and must not split the
			// transmission into bursts too short to sweep 90°.
			rc := receiver.Config{OffsetHz: truth.OffsetHz, MergeGapS: 1.5}
			res, err := Run(context.Background(), src, Options{Receiver: rc}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(res.Records) == 0 {
				t.Fatal("no burst found")
			}
			fh, err := os.Open(filepath.Join(dir, "rotating_loop_heading.csv"))
			if err != nil {
				t.Fatal(err)
			}
			defer fh.Close()
			track, err := heading.ReadLog(fh, res.Info.Start, heading.True)
			if err != nil {
				t.Fatal(err)
			}
			loop, err := bearing.SmallLoop(truth.Pattern.NullDepthDB)
			if err != nil {
				t.Fatal(err)
			}
			bbs, txs := Bearings(res, track, loop, bearing.FitOptions{Seed: 1}, DefaultSiteSigmaDeg)
			var fitted int
			for _, bb := range bbs {
				if bb.Err != nil {
					t.Logf("burst %d (%.1f s): no bearing: %v", bb.Index, bb.StartS, bb.Err)
					continue
				}
				fitted++
				e := bb.Est
				checkAmbiguous(t, "burst "+strconv.Itoa(bb.Index), e.BearingDeg, e.AltBearingDeg, truth.BearingDeg)
				t.Logf("burst %d %.2f–%.2f s: bearing %.2f° ±%.2f° (alt %v), null %.1f dB, coverage %.0f°, %d points",
					bb.Index, bb.StartS, res.Records[0].EndS, e.BearingDeg, e.SigmaDeg, fmtAlt(e.AltBearingDeg), e.NullDepthDB, e.CoverageDeg, e.Points)
			}
			if fitted == 0 {
				t.Fatal("no burst gave a bearing")
			}
			if len(txs) != 1 || txs[0].Err != nil {
				t.Fatalf("transmitter bearings %+v, want one", txs)
			}
			tb := txs[0]
			checkAmbiguous(t, "combined", tb.Combined.BearingDeg, tb.Combined.AltBearingDeg, truth.BearingDeg)
			t.Logf("truth %.0f° (or %.0f°), SNR %.0f dB: combined %.2f° (alt %s), fit σ %.2f°, with site error %.2f°",
				truth.BearingDeg, math.Mod(truth.BearingDeg+180, 360), truth.SNRDB, tb.Combined.BearingDeg, fmtAlt(tb.Combined.AltBearingDeg), tb.Combined.SigmaDeg, tb.SigmaDeg)
		})
	}
}

// checkAmbiguous: the bearing or the alternate must be within 2° of the
// truth (issue requirement at SNR ≥ 20 dB), and the alternate must be
// reported as the bearing + 180° (a small loop's two nulls).
func checkAmbiguous(t *testing.T, what string, bDeg float64, alt *float64, truthDeg float64) {
	t.Helper()
	if alt == nil {
		t.Errorf("%s: no alternate bearing reported for a loop (ambiguous by 180°)", what)
		return
	}
	if d := angleErrDeg(*alt, bDeg+180); d > 0.01 {
		t.Errorf("%s: alternate %.2f° is not bearing %.2f° + 180°", what, *alt, bDeg)
	}
	e := math.Min(angleErrDeg(bDeg, truthDeg), angleErrDeg(*alt, truthDeg))
	if e > 2 {
		t.Errorf("%s: bearing %.2f° (alt %.2f°) is %.2f° from the truth %.1f°, want ≤ 2°", what, bDeg, *alt, e, truthDeg)
	}
}

func fmtAlt(p *float64) string {
	if p == nil {
		return "none"
	}
	return strconv.FormatFloat(*p, 'f', 2, 64) + "°"
}
