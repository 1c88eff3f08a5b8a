package dsp

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestPowerMeterAndDBFS(t *testing.T) {
	// Full scale (common practice for complex baseband, documented here):
	// a complex sinusoid of amplitude 1 is 0 dBFS; amplitude 0.1 is −20 dBFS.
	cases := []struct {
		amp, wantDB float64
	}{{1, 0}, {0.1, -20}, {0.5, -6.0206}}
	for _, c := range cases {
		m := NewPowerMeter(100)
		x := tone(1050, 1234, 48000, c.amp, 0.3)
		var got []float32
		for i := 0; i < len(x); i += 37 { // streaming in odd blocks
			got = append(got, m.Process(nil, x[i:min(i+37, len(x))])...)
		}
		if len(got) != 10 {
			t.Fatalf("readings = %d, want 10", len(got))
		}
		for _, p := range got {
			if db := DBFS(float64(p)); math.Abs(db-c.wantDB) > 1e-3 {
				t.Errorf("amp %g: %.4f dBFS, want %.4f", c.amp, db, c.wantDB)
			}
		}
	}
	if DBFS(0) != -200 || DBFS(-1) != -200 || DBFS(1e-30) != -200 {
		t.Error("DBFS floor is not −200")
	}
}

// The noise floor of a known noise power with bursts 60 % of the time.
// Reference: the set noise power itself (power readings of complex
// Gaussian noise averaged over n samples are Gamma(n) distributed, common
// practice).
func TestNoiseFloorWithBursts(t *testing.T) {
	const rate = 100.0 // readings per second
	cases := []struct {
		name       string
		n          int     // samples per reading (1 = exponential readings)
		noiseDB    float64 // true noise power
		burstDB    float64 // burst power above noise
		onS, offS  float64 // burst on/off durations
		randomLens bool
		windowS    float64
	}{
		// Single-sample (exponential) readings need a long window: the
		// 20th-of-a-window average must hold enough readings.
		{"exponential readings, 6s/4s bursts", 1, -40, 30, 6, 4, false, 40},
		{"exponential readings, weak bursts", 1, -70, 6, 6, 4, false, 40},
		{"averaged readings, 6s/4s bursts", 48, -55, 20, 6, 4, false, 10},
		{"averaged readings, random bursts", 48, -30, 10, 3, 2, true, 10},
		{"averaged readings, 1.5s/1s bursts", 480, -90, 40, 1.5, 1, false, 5},
	}
	for _, c := range cases {
		rng := rand.New(rand.NewPCG(9, uint64(c.n)))
		nf := NewNoiseFloor(rate, c.windowS)
		pn := math.Pow(10, c.noiseDB/10)
		on, remain := false, c.offS*rate
		worst, onCount, total := 0.0, 0, 0
		biasSum, biasN := 0.0, 0
		for i := 0; i < int(200*rate); i++ {
			if remain <= 0 {
				on = !on
				d := c.offS
				if on {
					d = c.onS
				}
				if c.randomLens {
					d *= 0.5 + rng.Float64()
				}
				remain = d * rate
			}
			remain--
			p := pn
			if on {
				p *= 1 + math.Pow(10, c.burstDB/10)
				onCount++
			}
			total++
			// Gamma(n, p/n): mean of n exponential variates
			s := 0.0
			for k := 0; k < c.n; k++ {
				s += rng.ExpFloat64()
			}
			est := nf.Update(DBFS(p * s / float64(c.n)))
			if float64(i) > (c.windowS+2)*rate {
				worst = math.Max(worst, math.Abs(est-c.noiseDB))
				biasSum += est - c.noiseDB
				biasN++
			}
		}
		if frac := float64(onCount) / float64(total); frac < 0.5 || frac > 0.7 {
			t.Fatalf("%s: burst duty %.2f, test expects about 0.6", c.name, frac)
		}
		t.Logf("%s: mean error %+.3f dB, worst %.3f dB", c.name, biasSum/float64(biasN), worst)
		// within 0.5 dB of the true noise power at all times after warm-up
		if worst > 0.5 {
			t.Errorf("%s: worst noise-floor error %.2f dB", c.name, worst)
		}
	}
}
