package dsp

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"nullseek/internal/testtool"
)

// TestChannelizerNoiseModel checks Response, NoiseBandwidthHz and NoiseACF
// against scipy.signal.freqz (Debian python3-scipy; script
// testdata/dsp/chain_response.py) on the taps of three plans, and against
// Gaussian noise pushed through the channelizer: its output power is
// N0·NoiseBandwidthHz and its lag correlations are NoiseACF's (to the
// sampling error of 2 s of noise).
func TestChannelizerNoiseModel(t *testing.T) {
	py := testtool.Python(t, "numpy, scipy.signal")
	script, err := filepath.Abs(filepath.Join("..", "testdata", "dsp", "chain_response.py"))
	if err != nil {
		t.Fatal(err)
	}
	freqs := []float64{0, 1000, 3000, 6000, 6999, 8000, 9500, 11000, 12500, 16000, 23000}
	const lags = 24
	for _, p := range []struct{ in, off float64 }{{2.4e6, 100e3}, {240e3, 20e3}, {96e3, 5e3}} {
		c, err := NewChannelizer(p.in, p.off, 48e3, 7000, 12000)
		if err != nil {
			t.Fatal(err)
		}
		type stage struct {
			Taps []float64 `json:"taps"`
			Rate float64   `json:"rate"`
		}
		var cfg struct {
			Stages  []stage   `json:"stages"`
			OutRate float64   `json:"out_rate"`
			Freqs   []float64 `json:"freqs"`
			Lags    int       `json:"lags"`
		}
		rate := p.in
		for _, s := range c.stages {
			cfg.Stages = append(cfg.Stages, stage{s.taps, rate})
			rate /= float64(s.d)
		}
		cfg.OutRate, cfg.Freqs, cfg.Lags = c.OutRate(), freqs, lags
		raw, _ := json.Marshal(cfg)
		in := filepath.Join(t.TempDir(), "plan.json")
		if err := os.WriteFile(in, raw, 0o644); err != nil {
			t.Fatal(err)
		}
		out, err := exec.Command(py, script, in).Output()
		if err != nil {
			t.Fatalf("chain_response.py: %v", err)
		}
		var ref struct {
			Scipy  string    `json:"scipy"`
			Gain   []float64 `json:"gain"`
			EnbwHz float64   `json:"enbw_hz"`
			ACF    []float64 `json:"acf"`
		}
		if err := json.Unmarshal(out, &ref); err != nil {
			t.Fatal(err)
		}
		for i, f := range freqs {
			if g := c.Response(f); math.Abs(g-ref.Gain[i]) > 1e-9+1e-6*ref.Gain[i] {
				t.Errorf("%g→48k: Response(%g Hz) = %.9g, scipy %s freqz gives %.9g", p.in, f, g, ref.Scipy, ref.Gain[i])
			}
		}
		enbw := c.NoiseBandwidthHz()
		if math.Abs(enbw-ref.EnbwHz) > 1e-5*ref.EnbwHz {
			t.Errorf("%g→48k: noise bandwidth %.3f Hz, scipy %.3f", p.in, enbw, ref.EnbwHz)
		}
		acf := c.NoiseACF(lags)
		for m := range acf {
			if math.Abs(acf[m]-ref.ACF[m]) > 1e-5*ref.EnbwHz {
				t.Errorf("%g→48k: ACF[%d] = %.4f, scipy %.4f", p.in, m, acf[m], ref.ACF[m])
			}
		}
		t.Logf("%g→48k: noise bandwidth %.1f Hz, ACF[1]/ACF[0] %.3f", p.in, enbw, acf[1]/acf[0])

		if p.in > 1e6 {
			continue // the measurement below is the same at every rate
		}
		// Measured: 2 s of complex Gaussian noise, σ² per complex sample.
		rng := rand.New(rand.NewPCG(1, uint64(p.in)))
		const sigma2 = 1e-4
		n := int(2 * p.in)
		x := make([]complex64, n)
		s := math.Sqrt(sigma2 / 2)
		for i := range x {
			x[i] = complex(float32(s*rng.NormFloat64()), float32(s*rng.NormFloat64()))
		}
		y := c.Process(nil, x)
		y = y[200:] // past the filters' start-up
		var pw float64
		r := make([]float64, 4)
		for i := range y {
			pw += float64(real(y[i])*real(y[i]) + imag(y[i])*imag(y[i]))
			for m := 1; m < len(r) && i >= m; m++ {
				r[m] += float64(real(y[i])*real(y[i-m]) + imag(y[i])*imag(y[i-m]))
			}
		}
		pw /= float64(len(y))
		want := sigma2 / p.in * enbw
		if math.Abs(pw/want-1) > 0.02 {
			t.Errorf("%g→48k: noise power out %.4g, N0·ENBW %.4g", p.in, pw, want)
		}
		for m := 1; m < len(r); m++ {
			got := r[m] / float64(len(y)-m) / pw
			if math.Abs(got-acf[m]/acf[0]) > 0.01 {
				t.Errorf("%g→48k: measured lag-%d correlation %.3f, model %.3f", p.in, m, got, acf[m]/acf[0])
			}
		}
	}
}

// TestBandNoiseUnderCarrier: the estimate of the noise density stays on
// the noise whatever the channel carries: nothing, a plain carrier, or an
// NBFM carrier (1 kHz tone, ±2.5 kHz deviation, 1.5 kHz off the channel
// centre like a transmitter's crystal error), from 3 to 30 dB CNR in
// 12.5 kHz. The reference is the generator's own noise variance. 4 s of
// 240 kS/s input per case, through the 48 kS/s channel filter.
func TestBandNoiseUnderCarrier(t *testing.T) {
	const rate, off = 240e3, 20e3
	const sigma2 = 4e-4 // complex noise power over the input band
	n0 := sigma2 / rate
	for _, c := range []struct {
		name   string
		cnrDB  float64
		devHz  float64
		signal bool
	}{
		{"noise", 0, 0, false},
		{"carrier 3 dB", 3, 0, true}, {"carrier 30 dB", 30, 0, true},
		{"fm 3 dB", 3, 2500, true}, {"fm 10 dB", 10, 2500, true}, {"fm 20 dB", 20, 2500, true}, {"fm 30 dB", 30, 2500, true},
	} {
		ch, err := NewChannelizer(rate, off, 48e3, 7000, 12000)
		if err != nil {
			t.Fatal(err)
		}
		bn, err := NewBandNoise(ch.OutRate(), 1024, ch.Response, 0.5, 2)
		if err != nil {
			t.Fatal(err)
		}
		amp := math.Sqrt(n0 * 12500 * math.Pow(10, c.cnrDB/10))
		rng := rand.New(rand.NewPCG(3, uint64(c.cnrDB*10+c.devHz)))
		s := math.Sqrt(sigma2 / 2)
		block := make([]complex64, 24000)
		var ph float64
		var y []complex64
		for b := 0; b < 40; b++ {
			for i := range block {
				v := complex(s*rng.NormFloat64(), s*rng.NormFloat64())
				if c.signal {
					k := float64(b*len(block) + i)
					f := off + 1500 + c.devHz*math.Sin(2*math.Pi*1000*k/rate)
					ph = math.Mod(ph+2*math.Pi*f/rate, 2*math.Pi)
					v += complex(amp*math.Cos(ph), amp*math.Sin(ph))
				}
				block[i] = complex64(v)
			}
			y = ch.Process(y, block)
			bn.Add(y)
		}
		got, sd, ok := bn.Density()
		if !ok {
			t.Fatalf("%s: no estimate", c.name)
		}
		free, usable := bn.freeBins()
		t.Logf("%s: density %+.3f dB from the truth (±%.2f %% est.), %d of %d bins free", c.name, 10*math.Log10(got/n0), 100*sd, free, usable)
		if e := math.Abs(10 * math.Log10(got/n0)); e > 0.15 {
			t.Errorf("%s: density off by %.2f dB", c.name, e)
		}
		if !(sd > 0 && sd < 0.02) {
			t.Errorf("%s: relative SD %.4f implausible", c.name, sd)
		}
		if c.signal && usable-free < 2 {
			t.Errorf("%s: %d of %d bins free: the carrier was not excluded", c.name, free, usable)
		}
	}
}
