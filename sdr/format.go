package sdr

import (
	"encoding/binary"
	"fmt"
	"math"
	"regexp"
)

// sampleFormat describes one SigMF datatype that nullseek can read as
// complex IQ.
type sampleFormat struct {
	name      string // canonical SigMF datatype ("cu8", "ci16_le", ...)
	compBytes int    // bytes per component (I or Q)
	kind      byte   // 'i' signed int, 'u' unsigned int, 'f' float
	bigEndian bool
	clip      float32
}

// bytesPerSample is the size of one complex sample (I and Q).
func (f sampleFormat) bytesPerSample() int { return 2 * f.compBytes }

func (f sampleFormat) isFloat() bool { return f.kind == 'f' }

// datatypeRE is the SigMF datatype grammar (SigMF v1.2.5, sigmf-schema.json
// core:datatype and the spec's ABNF): (r|c) then a sized type with an
// endianness suffix, or i8/u8 without one.
var datatypeRE = regexp.MustCompile(`^(r|c)((f32|f64|i32|i16|u32|u16)(_le|_be)|i8|u8)$`)

// ValidDatatype reports whether s follows the SigMF datatype grammar. It says
// nothing about whether nullseek can read it (real-valued types are valid
// SigMF but not IQ).
func ValidDatatype(s string) bool { return datatypeRE.MatchString(s) }

// parseFormat resolves a datatype string to a readable complex format.
// Errors name the datatype and say what is accepted.
func parseFormat(s string) (sampleFormat, error) {
	if !datatypeRE.MatchString(s) {
		return sampleFormat{}, fmt.Errorf("unknown datatype %q: want a SigMF datatype such as cu8, ci8, ci16_le, cf32_le", s)
	}
	if s[0] == 'r' {
		return sampleFormat{}, fmt.Errorf("datatype %q is real-valued: nullseek needs complex IQ (c...)", s)
	}
	f := sampleFormat{name: s}
	body := s[1:]
	if len(body) > 3 {
		f.bigEndian = body[3:] == "_be"
		body = body[:3]
	}
	f.kind = body[0]
	switch body[1:] {
	case "8":
		f.compBytes = 1
	case "16":
		f.compBytes = 2
	case "32":
		f.compBytes = 4
	case "64":
		f.compBytes = 8
	}
	switch {
	case f.kind == 'f':
		f.clip = 1
	case f.kind == 'u':
		f.clip = 1 // 0 and max map to -1 and +1 exactly
	case f.compBytes == 1:
		f.clip = 127.0 / 128
	case f.compBytes == 2:
		f.clip = 32767.0 / 32768
	default:
		f.clip = float32((1<<31 - 1) / float64(1<<31))
	}
	return f, nil
}

// cu8Table maps an RTL-SDR byte to its normalised value (x-127.5)/127.5:
// zero between codes 127 and 128, 0 → -1, 255 → +1 (RTL-SDR convention).
var cu8Table = func() (t [256]float32) {
	for i := range t {
		t[i] = float32((float64(i) - 127.5) / 127.5)
	}
	return
}()

// CU8Value returns the normalised value of one cu8 component byte:
// (x-127.5)/127.5, so 0 → -1.0 and 255 → +1.0.
func CU8Value(b byte) float32 { return cu8Table[b] }

// convert decodes len(dst) complex samples from src (which holds at least
// len(dst)*bytesPerSample bytes). For float formats it returns the index
// within dst of the first NaN or Inf sample, or -1.
func (f sampleFormat) convert(dst []complex64, src []byte) (bad int) {
	bad = -1
	var bo binary.ByteOrder = binary.LittleEndian
	if f.bigEndian {
		bo = binary.BigEndian
	}
	switch {
	case f.kind == 'u' && f.compBytes == 1:
		for i := range dst {
			dst[i] = complex(cu8Table[src[2*i]], cu8Table[src[2*i+1]])
		}
	case f.kind == 'i' && f.compBytes == 1:
		for i := range dst {
			dst[i] = complex(float32(int8(src[2*i]))/128, float32(int8(src[2*i+1]))/128)
		}
	case f.kind == 'i' && f.compBytes == 2:
		for i := range dst {
			re := int16(bo.Uint16(src[4*i:]))
			im := int16(bo.Uint16(src[4*i+2:]))
			dst[i] = complex(float32(re)/32768, float32(im)/32768)
		}
	case f.kind == 'u' && f.compBytes == 2:
		for i := range dst {
			re := bo.Uint16(src[4*i:])
			im := bo.Uint16(src[4*i+2:])
			dst[i] = complex(float32((float64(re)-32767.5)/32767.5), float32((float64(im)-32767.5)/32767.5))
		}
	case f.kind == 'i' && f.compBytes == 4:
		for i := range dst {
			re := int32(bo.Uint32(src[8*i:]))
			im := int32(bo.Uint32(src[8*i+4:]))
			dst[i] = complex(float32(float64(re)/(1<<31)), float32(float64(im)/(1<<31)))
		}
	case f.kind == 'u' && f.compBytes == 4:
		const mid = (1<<32 - 1) / 2.0
		for i := range dst {
			re := bo.Uint32(src[8*i:])
			im := bo.Uint32(src[8*i+4:])
			dst[i] = complex(float32((float64(re)-mid)/mid), float32((float64(im)-mid)/mid))
		}
	case f.kind == 'f' && f.compBytes == 4:
		for i := range dst {
			re := math.Float32frombits(bo.Uint32(src[8*i:]))
			im := math.Float32frombits(bo.Uint32(src[8*i+4:]))
			if bad < 0 && !finite32(re, im) {
				bad = i
			}
			dst[i] = complex(re, im)
		}
	case f.kind == 'f' && f.compBytes == 8:
		for i := range dst {
			re := math.Float64frombits(bo.Uint64(src[16*i:]))
			im := math.Float64frombits(bo.Uint64(src[16*i+8:]))
			// A finite float64 beyond float32 range becomes Inf: flag it too.
			dst[i] = complex(float32(re), float32(im))
			if bad < 0 && !finite32(real(dst[i]), imag(dst[i])) {
				bad = i
			}
		}
	}
	return bad
}

func finite32(a, b float32) bool {
	return !math.IsNaN(float64(a)) && !math.IsInf(float64(a), 0) &&
		!math.IsNaN(float64(b)) && !math.IsInf(float64(b), 0)
}

// encode writes len(src) samples into dst in format f, saturating integer
// formats at their rails. It returns the number of components (I or Q
// counted separately) that saturated.
func (f sampleFormat) encode(dst []byte, src []complex64) (sat int) {
	var bo binary.ByteOrder = binary.LittleEndian
	if f.bigEndian {
		bo = binary.BigEndian
	}
	if f.kind == 'u' && f.compBytes == 1 {
		return encodeCU8(dst, src)
	}
	bps := f.bytesPerSample()
	for i, v := range src {
		out := dst[i*bps : (i+1)*bps]
		comps := [2]float32{real(v), imag(v)}
		for c, x := range comps {
			o := out[c*f.compBytes : (c+1)*f.compBytes]
			switch {
			case f.kind == 'f' && f.compBytes == 4:
				bo.PutUint32(o, math.Float32bits(x))
			case f.kind == 'f' && f.compBytes == 8:
				bo.PutUint64(o, math.Float64bits(float64(x)))
			case f.kind == 'u' && f.compBytes == 1:
				q, s := quantise(float64(x)*127.5+127.5, 0, 255)
				sat += s
				o[0] = byte(q)
			case f.kind == 'i' && f.compBytes == 1:
				q, s := quantise(float64(x)*128, -128, 127)
				sat += s
				o[0] = byte(int8(q))
			case f.kind == 'i' && f.compBytes == 2:
				q, s := quantise(float64(x)*32768, -32768, 32767)
				sat += s
				bo.PutUint16(o, uint16(int16(q)))
			case f.kind == 'u' && f.compBytes == 2:
				q, s := quantise(float64(x)*32767.5+32767.5, 0, 65535)
				sat += s
				bo.PutUint16(o, uint16(q))
			case f.kind == 'i' && f.compBytes == 4:
				q, s := quantise(float64(x)*(1<<31), -(1 << 31), 1<<31-1)
				sat += s
				bo.PutUint32(o, uint32(int32(q)))
			case f.kind == 'u' && f.compBytes == 4:
				const mid = (1<<32 - 1) / 2.0
				q, s := quantise(float64(x)*mid+mid, 0, 1<<32-1)
				sat += s
				bo.PutUint32(o, uint32(q))
			}
		}
	}
	return sat
}

// encodeCU8 is encode for cu8, the format of an RTL-SDR and of every
// --record pair, without the per-component format switch: the same codes
// as quantise(x*127.5+127.5, 0, 255) (TestEncodeCU8MatchesQuantise). y is
// exact in float64 (a float32 times 127.5 plus 127.5 needs at most 33
// significant bits), so for -0.5 < y < 255.5 truncating y+0.5 rounds half
// away from zero as math.Round does; y <= -0.5, y >= 255.5 and NaN (every
// comparison false) saturate.
func encodeCU8(dst []byte, src []complex64) (sat int) {
	dst = dst[:2*len(src)]
	for i, v := range src {
		for c, x := range [2]float32{real(v), imag(v)} {
			y := float64(x)*127.5 + 127.5
			switch {
			case y > -0.5 && y < 255.5:
				dst[2*i+c] = byte(int(y + 0.5))
			case y <= -0.5:
				dst[2*i+c], sat = 0, sat+1
			case y >= 255.5:
				dst[2*i+c], sat = 255, sat+1
			default: // NaN: the code nearest zero, as quantise
				dst[2*i+c], sat = 128, sat+1
			}
		}
	}
	return sat
}

// quantise rounds v to the nearest integer and clamps it to [lo, hi]; the
// second result is 1 when v was outside the range or NaN (NaN is written as
// the code nearest zero), else 0.
func quantise(v, lo, hi float64) (int64, int) {
	if math.IsNaN(v) {
		if lo < 0 {
			return 0, 1
		}
		return int64(math.Floor((lo + hi + 1) / 2)), 1
	}
	r := math.Round(v)
	switch {
	case r < lo:
		return int64(lo), 1
	case r > hi:
		return int64(hi), 1
	}
	return int64(r), 0
}
