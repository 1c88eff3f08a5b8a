package dsp

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"testing"
)

// Reference: GNU Radio 3.10.5 analog.quadrature_demod_cf(gain), via
// testdata/dsp/make_quad_demod_ref.py.
func TestFMDiscriminatorGNURadio(t *testing.T) {
	var meta struct {
		Version string  `json:"gnuradio_version"`
		Gain    float64 `json:"gain"`
		Samples int     `json:"samples"`
	}
	if err := json.Unmarshal(readFixture(t, "quad_demod_ref.json"), &meta); err != nil {
		t.Fatal(err)
	}
	in := decodeCF32(readFixture(t, "quad_demod_in.cf32"))
	want := decodeF32(readFixture(t, "quad_demod_out.f32"))
	if len(in) != meta.Samples || len(want) != meta.Samples {
		t.Fatalf("fixture sizes %d/%d, want %d", len(in), len(want), meta.Samples)
	}
	for _, block := range []int{len(in), 1, 7, 1000} {
		d := &FMDiscriminator{Gain: float32(meta.Gain)}
		var got, out []float32
		for i := 0; i < len(in); i += block {
			out = d.Process(out, in[i:min(i+block, len(in))])
			got = append(got, out...)
		}
		worst := 0.0
		for i := range want {
			worst = math.Max(worst, math.Abs(float64(got[i]-want[i])))
		}
		// GNU Radio 3.10.5 quadrature_demod_cf: agree to 1e-3
		if worst > 1e-3 {
			t.Errorf("block %d: max |Go − GNU Radio %s| = %g", block, meta.Version, worst)
		}
	}
}

func TestFastAtan2(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	worst := 0.0
	for i := 0; i < 200000; i++ {
		y, x := rng.NormFloat64(), rng.NormFloat64()
		if i%4 == 0 {
			x *= 1e-4
		}
		got := float64(fastAtan2(float32(y), float32(x)))
		worst = math.Max(worst, math.Abs(got-math.Atan2(float64(float32(y)), float64(float32(x)))))
	}
	// Go's math.Atan2 as reference; polynomial bound 1.7e-6 plus float32 rounding.
	if worst > 3e-6 {
		t.Errorf("fastAtan2 max error %g rad", worst)
	}
	for _, c := range [][3]float64{{0, 0, 0}, {0, 1, 0}, {1, 0, math.Pi / 2}, {0, -1, math.Pi}, {-1, 0, -math.Pi / 2}, {1, 1, math.Pi / 4}, {-1, -1, -3 * math.Pi / 4}} {
		if got := float64(fastAtan2(float32(c[0]), float32(c[1]))); math.Abs(got-c[2]) > 3e-6 {
			t.Errorf("fastAtan2(%g,%g) = %g, want %g", c[0], c[1], got, c[2])
		}
	}
}

func TestAMEnvelope(t *testing.T) {
	x := []complex64{complex(3, 4), 0, complex(-1, 0), complex(0, -2)}
	got := AMEnvelope(nil, x)
	want := []float32{5, 0, 1, 2}
	for i := range want {
		if math.Abs(float64(got[i]-want[i])) > 1e-6 {
			t.Errorf("AMEnvelope[%d] = %g, want %g", i, got[i], want[i])
		}
	}
}
