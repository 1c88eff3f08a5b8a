package dsp

import (
	"math"
	"math/rand/v2"
	"testing"
)

// RTL-SDR convention (librtlsdr offset-binary bytes, common practice):
// value = (b − 127.5)/127.5.
func TestCU8ToComplex(t *testing.T) {
	cases := []struct {
		i, q   byte
		re, im float64
	}{
		{0, 255, -1, 1},
		{255, 0, 1, -1},
		{127, 128, -0.5 / 127.5, 0.5 / 127.5},
		{64, 191, (64 - 127.5) / 127.5, (191 - 127.5) / 127.5},
	}
	for _, c := range cases {
		got := cu8ToComplex(nil, []byte{c.i, c.q, 7}) // odd trailing byte ignored
		if len(got) != 1 {
			t.Fatalf("len = %d", len(got))
		}
		if math.Abs(float64(real(got[0]))-c.re) > 1e-7 || math.Abs(float64(imag(got[0]))-c.im) > 1e-7 {
			t.Errorf("(%d,%d) → %v, want (%g,%g)", c.i, c.q, got[0], c.re, c.im)
		}
	}
	// 127.5 is the zero: the two nearest codes are symmetric about it.
	z := cu8ToComplex(nil, []byte{127, 128})
	if real(z[0])+imag(z[0]) != 0 {
		t.Errorf("127 and 128 not symmetric about 0: %v", z[0])
	}
}

func TestCountClipped(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := 0; trial < 50; trial++ {
		n := rng.IntN(300)
		b := make([]byte, 2*n+rng.IntN(2))
		for i := range b {
			switch rng.IntN(10) {
			case 0:
				b[i] = 0
			case 1:
				b[i] = 255
			default:
				b[i] = byte(1 + rng.IntN(254))
			}
		}
		want := 0
		for i := 0; i+1 < len(b); i += 2 {
			if b[i] == 0 || b[i] == 255 || b[i+1] == 0 || b[i+1] == 255 {
				want++
			}
		}
		if got := CountClippedCU8(b); got != want {
			t.Fatalf("CountClippedCU8 = %d, want %d (n=%d)", got, want, n)
		}
		x := cu8ToComplex(nil, b)
		if got := CountClipped(x, 1); got != want {
			t.Fatalf("CountClipped(level 1) = %d, want %d", got, want)
		}
	}
	x := []complex64{0.5, complex(0, -0.95), complex(0.2, 0.3), -0.99}
	if got := CountClipped(x, 0.95); got != 2 {
		t.Errorf("CountClipped = %d, want 2", got)
	}
}

// cu8ToComplex converts interleaved unsigned 8-bit I,Q bytes (RTL-SDR "cu8")
// to complex samples, each component mapped as (b − 127.5)/127.5. It returns
// append(dst[:0], ...) with len(src)/2 samples; a trailing odd byte is
// ignored.
func cu8ToComplex(dst []complex64, src []byte) []complex64 {
	n := len(src) / 2
	dst = growComplex(dst, n)
	for i := range dst {
		p := (*[2]byte)(src[2*i:])
		dst[i] = complex(cu8Value[p[0]], cu8Value[p[1]])
	}
	return dst
}

// growComplex returns dst[:n], reallocating only when cap(dst) < n.
func growComplex(dst []complex64, n int) []complex64 {
	if cap(dst) < n {
		return make([]complex64, n)
	}
	return dst[:n]
}
