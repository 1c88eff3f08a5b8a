package dsp

import (
	"encoding/binary"
	"math/bits"
)

// cu8Value maps an RTL-SDR byte to its sample value: (b − 127.5)/127.5, so
// 0 → −1, 255 → +1 and the (unreachable) midpoint 127.5 → 0. This is the
// RTL-SDR convention (librtlsdr delivers offset-binary 8-bit I,Q).
var cu8Value = func() (t [256]float32) {
	for i := range t {
		t[i] = float32((float64(i) - 127.5) / 127.5)
	}
	return
}()

func growFloat32(dst []float32, n int) []float32 {
	if cap(dst) < n {
		return make([]float32, n)
	}
	return dst[:n]
}

// CountClipped counts the samples of x whose in-phase or quadrature
// component has magnitude ≥ level (level in full-scale units, e.g. 0.99).
func CountClipped(x []complex64, level float32) int {
	c := 0
	for _, v := range x {
		re, im := real(v), imag(v)
		if re >= level || re <= -level || im >= level || im <= -level {
			c++
		}
	}
	return c
}

const (
	lo7 = 0x7f7f7f7f7f7f7f7f
	hi1 = 0x8080808080808080
)

// zeroBytes returns a word with the top bit of each byte set exactly where
// the corresponding byte of v is zero (no false positives).
func zeroBytes(v uint64) uint64 {
	t := (v & lo7) + lo7
	return ^(t | v | lo7)
}

// CountClippedCU8 counts the complex samples in interleaved cu8 data whose
// I or Q byte is at either rail (0 or 255). A trailing odd byte is ignored.
func CountClippedCU8(src []byte) int {
	n := len(src) / 2 * 2
	c := 0
	i := 0
	for ; i+8 <= n; i += 8 {
		v := binary.LittleEndian.Uint64(src[i:])
		// Bits 1..7 of each byte of v^(v<<1) are zero exactly when all 8
		// bits of that byte are equal, i.e. the byte is 0x00 or 0xFF.
		m := (v ^ (v << 1)) & 0xfefefefefefefefe
		if (m-0x0101010101010101)&^m&hi1 == 0 {
			continue // no zero byte in m: nothing railed (exact test)
		}
		z := zeroBytes(m) // bit 7 set per railed byte
		z |= z >> 8       // fold the Q flag onto the I position
		c += bits.OnesCount64(z & 0x0080008000800080)
	}
	for ; i < n; i += 2 {
		a, b := src[i], src[i+1]
		if a == 0 || a == 255 || b == 0 || b == 255 {
			c++
		}
	}
	return c
}
