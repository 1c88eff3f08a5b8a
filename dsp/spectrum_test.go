package dsp

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"testing"
)

// Reference: scipy 1.10 signal.welch (Hann, 50 % overlap, scaling
// 'spectrum', two-sided, no detrend) via testdata/dsp/make_spectrum_ref.py.
func TestSpectrumAveragerScipyWelch(t *testing.T) {
	var ref struct {
		Scipy string    `json:"scipy_version"`
		Rate  float64   `json:"rate"`
		NFFT  int       `json:"nfft"`
		Freq  []float64 `json:"freq_hz"`
		Power []float64 `json:"power"`
	}
	if err := json.Unmarshal(readFixture(t, "spectrum_ref.json"), &ref); err != nil {
		t.Fatal(err)
	}
	x := decodeCF32(readFixture(t, "spectrum_in.cf32"))
	s, err := NewSpectrumAverager(ref.NFFT)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < len(x); i += 100 { // streaming in blocks
		s.Add(x[i:min(i+100, len(x))])
	}
	got := s.Result(nil)
	one := averageSpectrum(x, ref.NFFT)
	for i := range got {
		f := (float64(i) - float64(ref.NFFT/2)) * ref.Rate / float64(ref.NFFT)
		if math.Abs(f-ref.Freq[i]) > 1e-9 {
			t.Fatalf("bin %d at %g Hz, scipy %g Hz", i, f, ref.Freq[i])
		}
		want := DBFS(ref.Power[i])
		// scipy 1.10 welch, to 0.001 dB (float32 input)
		if math.Abs(got[i]-want) > 1e-3 || got[i] != one[i] {
			t.Errorf("bin %d: %.5f dB (one-shot %.5f), scipy %s %.5f dB", i, got[i], one[i], ref.Scipy, want)
		}
	}
}

func TestFindCarriers(t *testing.T) {
	const rate, nfft = 48000.0, 512
	rng := rand.New(rand.NewPCG(1, 1))
	cases := []struct {
		name  string
		tones [][2]float64 // Hz, amplitude
	}{
		{"on bin", [][2]float64{{93.75 * 20, 0.5}}},
		{"half bin", [][2]float64{{93.75 * 20.5, 0.5}}},
		{"two tones, negative offset", [][2]float64{{-7012.3, 0.3}, {3333.3, 0.03}}},
	}
	for _, c := range cases {
		x := make([]complex64, 48000)
		noise := 1e-4 // −40 dBFS total
		for i := range x {
			v := complex(math.Sqrt(noise/2)*rng.NormFloat64(), math.Sqrt(noise/2)*rng.NormFloat64())
			for _, tn := range c.tones {
				a := 2 * math.Pi * tn[0] / rate * float64(i)
				v += complex(tn[1]*math.Cos(a), tn[1]*math.Sin(a))
			}
			x[i] = complex64(v)
		}
		spec := averageSpectrum(x, nfft)
		got := FindCarriers(spec, rate, 20)
		if len(got) != len(c.tones) {
			t.Fatalf("%s: found %d carriers %+v, want %d", c.name, len(got), got, len(c.tones))
		}
		// noise per bin = σ²·1.5/nfft (Hann ENBW 1.5 bins, common practice)
		floorDB := DBFS(noise * 1.5 / nfft)
		for i, tn := range c.tones {
			g := got[i]
			// parabolic interpolation on a Hann window: within 0.1 bin
			if math.Abs(g.OffsetHz-tn[0]) > 0.1*rate/nfft {
				t.Errorf("%s: carrier at %.1f Hz, want %.1f", c.name, g.OffsetHz, tn[0])
			}
			// level of a complex tone: 20·log10(A), scalloping mostly restored
			if want := 20 * math.Log10(tn[1]); math.Abs(g.LevelDB-want) > 0.5 {
				t.Errorf("%s: level %.2f dB, want %.2f", c.name, g.LevelDB, want)
			}
			if want := 20*math.Log10(tn[1]) - floorDB; math.Abs(g.SNRDB-want) > 1.5 {
				t.Errorf("%s: SNR %.2f dB, want %.2f", c.name, g.SNRDB, want)
			}
		}
	}
	if FindCarriers([]float64{1, 2}, 1, 3) != nil {
		t.Error("short spectrum should give nil")
	}
}

// averageSpectrum is the one-shot form of SpectrumAverager: the averaged
// Hann-window power spectrum of x in dBFS per bin, centred order (see
// SpectrumAverager.Result). If x is shorter than nfft it is zero-padded
// (the level of a tone then drops by the padding). nfft < 2 gives nil.
func averageSpectrum(x []complex64, nfft int) []float64 {
	s, err := NewSpectrumAverager(nfft)
	if err != nil {
		return nil
	}
	if len(x) < nfft {
		s.Add(x)
		s.Add(make([]complex64, nfft-len(x)))
	} else {
		s.Add(x)
	}
	return s.Result(nil)
}
