package receiver

import (
	"context"
	"math"
	"path/filepath"
	"testing"

	"nullseek/internal/testtool"
	"nullseek/sdr"
)

type truthFile struct {
	Rate     float64 `json:"rate"`
	OffsetHz float64 `json:"offset_hz"`
	CenterHz float64 `json:"center_hz"`
	Bursts   []struct {
		StartS  float64 `json:"start_s"`
		EndS    float64 `json:"end_s"`
		LevelDB float64 `json:"level_dbfs"`
	} `json:"bursts"`
}

func scanFile(t *testing.T, path string, cfg Config) ([]*Burst, Summary) {
	t.Helper()
	return scanWith(t, path, sdr.RawParams{}, cfg)
}

// readBurstTruth reads the truth make_bursts.py wrote beside recording
// base (a path without extension).
func readBurstTruth(t *testing.T, base string) truthFile {
	return testtool.ReadJSON[truthFile](t, base+".truth.json")
}

// scanWith opens path with p (the zero value for a self-describing file)
// and returns every burst the scanner reports with its summary.
func scanWith(t *testing.T, path string, p sdr.RawParams, cfg Config) ([]*Burst, Summary) {
	t.Helper()
	src, err := sdr.Open(path, p)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	sc, err := NewScanner(src.Info(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	var got []*Burst
	sum, err := sc.Run(context.Background(), src, func(b *Burst) error { got = append(got, b); return nil }, nil)
	if err != nil {
		t.Fatal(err)
	}
	return got, sum
}

// TestGNURadioBurstFixtures checks burst timing, carrier offset and level
// steps against recordings made by GNU Radio 3.10 (testdata/bursts/
// make_bursts.py: analog.frequency_modulator_fc, blocks.rotator_cc,
// analog.noise_source_c), whose truth the script wrote beside them.
// Tolerances are the issue's: times within 10 ms, offset within 20 Hz,
// 3 dB level steps within 0.3 dB.
func TestGNURadioBurstFixtures(t *testing.T) {
	for _, name := range []string{"steps96k", "neg240k"} {
		t.Run(name, func(t *testing.T) {
			base := filepath.Join("..", "testdata", "bursts", name)
			tr := readBurstTruth(t, base)
			// Tune with the absolute frequency, as a user would.
			got, sum := scanFile(t, base+".sigmf-meta", Config{FreqHz: tr.CenterHz + tr.OffsetHz + 150})
			if len(got) != len(tr.Bursts) {
				t.Fatalf("found %d bursts, want %d", len(got), len(tr.Bursts))
			}
			if sum.InBurstAtStart {
				t.Errorf("summary says the recording starts inside a burst")
			}
			for i, b := range got {
				w := tr.Bursts[i]
				if d := b.StartS - w.StartS; math.Abs(d) > 0.010 {
					t.Errorf("burst %d start %.4f s, want %.4f (off by %.1f ms)", i+1, b.StartS, w.StartS, d*1e3)
				}
				if d := b.EndS - w.EndS; math.Abs(d) > 0.010 {
					t.Errorf("burst %d end %.4f s, want %.4f (off by %.1f ms)", i+1, b.EndS, w.EndS, d*1e3)
				}
				if d := b.OffsetHz - tr.OffsetHz; math.Abs(d) > 20 {
					t.Errorf("burst %d offset %.1f Hz, want %.1f", i+1, b.OffsetHz, tr.OffsetHz)
				}
				if d := b.FreqHz - (tr.CenterHz + tr.OffsetHz); math.Abs(d) > 20 {
					t.Errorf("burst %d freq %.1f Hz", i+1, b.FreqHz)
				}
				if b.Start.IsZero() {
					t.Errorf("burst %d has no UTC start although the metadata gives one", i+1)
				}
				if i > 0 {
					step := b.LevelDB - got[i-1].LevelDB
					want := w.LevelDB - tr.Bursts[i-1].LevelDB
					if math.Abs(step-want) > 0.3 {
						t.Errorf("level step %d→%d is %.2f dB, want %.2f", i, i+1, step, want)
					}
				}
				if b.SNRDB < 10 {
					t.Errorf("burst %d SNR %.1f dB is implausibly low", i+1, b.SNRDB)
				}
				rate := float64(len(b.Level)) / (b.EndS - b.StartS)
				if rate < 100 {
					t.Errorf("burst %d level track has %.0f readings/s, want ≥ 100", i+1, rate)
				}
				t.Logf("burst %d: start %+.2f ms end %+.2f ms offset %+.1f Hz level %.2f dBFS snr %.1f dB",
					i+1, (b.StartS-w.StartS)*1e3, (b.EndS-w.EndS)*1e3, b.OffsetHz-tr.OffsetHz, b.LevelDB, b.SNRDB)
			}
		})
	}
}
