package dsp

import (
	"errors"
	"fmt"
	"math"
)

// Design constants of the channelizer.
const (
	// chanStageAttenDB is the Kaiser design attenuation of every stage. The
	// channel specification is 60 dB; Kaiser's formula falls short by up to
	// about 1 dB, hence the margin. The matching passband deviation is
	// ±0.005 dB per stage, far inside the 0.1 dB ripple budget.
	chanStageAttenDB = 66.0
	// chanChunk is the number of input samples handled per inner pass; it
	// bounds the scratch buffers.
	chanChunk = 4096
	// chanMaxStages bounds the decimating stages tried by the planner.
	chanMaxStages = 4
	// chanMaxLUTTaps is the first-stage length above which its cu8 tables
	// (2 KiB per pair of symmetric taps) spill out of a 48 KiB L1 cache.
	chanMaxLUTTaps = 48
)

// Channelizer is a frequency-translating multi-stage decimator: it moves the
// channel centred offsetHz from the input centre to DC and reduces the
// sample rate by an integer factor, with ≥ 60 dB rejection of everything that
// would alias into [−stopHz, stopHz] (and of everything beyond stopHz) and
// ≤ 0.1 dB passband ripple over [−passHz, passHz].
//
// Structure: stage 1 is a polyphase FIR with complex (frequency-rotated)
// taps g[k] = h[k]·e^{+jωk}, ω = 2π·offsetHz/inRate, evaluated only at the
// kept output instants and followed by a rotator e^{−jωn} at its output
// rate; this is exactly mixing by e^{−jωn} followed by low-pass filtering.
// Stage 1 only has to protect the final channel, so its transition band is
// wide and it is short. For cu8 input each of its taps is a pair of
// 256-entry tables of h·(byte−127.5)/127.5 in 32.32 fixed point packed into
// one int64, so its inner loop is table loads and integer adds. Later stages
// are real-tap polyphase FIR decimators at low rate; when the channel's
// stopHz is below half the output rate a final non-decimating stage sets
// the stopband edge. All stages are Kaiser-windowed sinc designs
// (FirwinLowpass/KaiserOrd at 66 dB); the factorisation of the total
// decimation is chosen by minimising an estimated cost.
//
// Time convention: output sample j is computed at input sample j·Decimation()
// (counting from 0 at construction or Reset) and represents the input at
// j·Decimation() − DelayIn(). The mixer phase is 0 at input sample 0.
//
// A Channelizer is fed either by Process or by ProcessCU8; switching from one
// to the other resets it. It is not safe for concurrent use.
type Channelizer struct {
	inRate, outRate, offsetHz, passHz, stopHz float64
	dec                                       int
	delayIn                                   float64

	// stage 1
	d1      int
	h1      []float64   // prototype low-pass
	g1      []complex64 // rotated taps, reversed (for complex input)
	lut     []lutTab    // rotated taps as cu8 tables, first half of the reversed taps
	symC    complex128  // mirror-tap rotation e^{jω(k−1)}
	lutInv  float32     // 2^-lutShift
	hist8   []byte      // cu8 history + chunk
	histC   []complex64 // complex history + chunk
	pre8    int         // leading hist8 samples that stand for zeros before the start
	n1      int         // samples held in the history buffer
	next1   int         // buffer index of the newest input of the next output
	mode    int         // 0 fresh, 1 complex, 2 cu8
	cyc1    float64     // offsetHz/inRate·d1: rotator cycles per stage-1 output
	count1  int64       // stage-1 outputs so far
	s1out   []complex64 // stage-1 output scratch
	stages  []*firStage
	scratch [2][]complex64
}

// lutTab holds one stage-1 tap r as a table over byte values b of
// r·(b−127.5)/127.5 in fixed point, packed as im<<32 + re. The same table
// serves the I byte and (times j) the Q byte, and, conjugated and rotated,
// the mirror tap.
type lutTab [256]int64

// ChannelStage describes one stage of a Channelizer plan.
type ChannelStage struct {
	Decimation int     // integer rate reduction (1 for the final clean-up stage)
	Taps       int     // FIR length
	InRateHz   float64 // input sample rate of the stage
	PassHz     float64 // passband edge
	StopHz     float64 // stopband edge (≥ 66 dB design attenuation beyond it)
}

// NewChannelizer plans a channelizer for input sample rate inRate (Hz),
// channel centre offsetHz relative to the input centre (may be negative),
// output rate target outRateTarget, passband edge passHz and stopband edge
// stopHz (both one-sided, Hz at baseband).
//
// The total decimation is D = floor(inRate/outRateTarget): the output rate
// inRate/D is the largest integer division of inRate not below the target
// (2.4e6 and 48e3 give D = 50). Errors: non-positive or non-finite
// arguments; outRateTarget > inRate; stopHz ≤ passHz; passHz ≥ outRate/2;
// stopHz > outRate − passHz (anything between would alias into the
// passband); |offsetHz| + passHz > inRate/2.
func NewChannelizer(inRate, offsetHz, outRateTarget, passHz, stopHz float64) (*Channelizer, error) {
	for _, v := range []float64{inRate, offsetHz, outRateTarget, passHz, stopHz} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, errors.New("channelizer: arguments must be finite numbers")
		}
	}
	if inRate <= 0 || outRateTarget <= 0 || passHz <= 0 || stopHz <= 0 {
		return nil, fmt.Errorf("channelizer: rates and band edges must be positive (inRate %g, outRate %g, pass %g, stop %g)", inRate, outRateTarget, passHz, stopHz)
	}
	if outRateTarget > inRate {
		return nil, fmt.Errorf("channelizer: output rate %g Hz above input rate %g Hz", outRateTarget, inRate)
	}
	if stopHz <= passHz {
		return nil, fmt.Errorf("channelizer: stopband edge %g Hz must lie above passband edge %g Hz", stopHz, passHz)
	}
	dec := int(math.Floor(inRate/outRateTarget*(1+1e-12) + 1e-9))
	if dec < 1 {
		dec = 1
	}
	outRate := inRate / float64(dec)
	if passHz >= outRate/2 {
		return nil, fmt.Errorf("channelizer: passband edge %g Hz needs an output rate above %g Hz (have %g)", passHz, 2*passHz, outRate)
	}
	if stopHz > outRate-passHz {
		return nil, fmt.Errorf("channelizer: stopband edge %g Hz is above output rate − passband (%g Hz): signals in between would alias into the passband", stopHz, outRate-passHz)
	}
	if math.Abs(offsetHz)+passHz > inRate/2 {
		return nil, fmt.Errorf("channelizer: channel at %+g Hz with ±%g Hz passband does not fit in ±%g Hz", offsetHz, passHz, inRate/2)
	}
	plan := planChannel(inRate, dec, passHz, stopHz)
	c := &Channelizer{inRate: inRate, outRate: outRate, offsetHz: offsetHz, passHz: passHz, stopHz: stopHz, dec: dec}
	c.build(plan)
	return c, nil
}

// stageSpec designs one Kaiser low-pass for a stage.
func stageTaps(s ChannelStage) []float64 {
	nyq := s.InRateHz / 2
	n, beta := KaiserOrd(chanStageAttenDB, (s.StopHz-s.PassHz)/nyq)
	if n < 1 {
		n = 1
	}
	return FirwinLowpass(n, (s.PassHz+s.StopHz)/2/nyq, beta)
}

func stageLen(s ChannelStage) int {
	n, _ := KaiserOrd(chanStageAttenDB, (s.StopHz-s.PassHz)/(s.InRateHz/2))
	return n
}

// planChannel chooses the stage factorisation of dec with the lowest
// estimated cost (taps evaluated per input sample; a stage-1 table tap
// counts 1, or 3 when the stage is too long for its tables to stay in the
// L1 cache, a later complex×real tap 1.5; weights measured on amd64).
func planChannel(inRate float64, dec int, passHz, stopHz float64) []ChannelStage {
	outRate := inRate / float64(dec)
	var best []ChannelStage
	bestCost := math.Inf(1)
	var try func(prefix []int, rem int)
	try = func(prefix []int, rem int) {
		if rem == 1 {
			for _, cleanup := range []bool{false, true} {
				st, ok := stagesFor(inRate, prefix, passHz, stopHz, outRate, cleanup)
				if !ok {
					continue
				}
				cost := 0.0
				rate := 1.0
				for i, s := range st {
					w := 1.5
					if i == 0 {
						w = 1
						if s.Taps > chanMaxLUTTaps {
							w = 3 // tables no longer fit in L1
						}
					}
					cost += w * float64(s.Taps) / (rate * float64(s.Decimation))
					rate *= float64(s.Decimation)
				}
				if cost < bestCost-1e-9 {
					bestCost, best = cost, st
				}
			}
			return
		}
		if len(prefix) == chanMaxStages {
			return
		}
		for f := 2; f <= rem; f++ {
			if rem%f == 0 {
				try(append(prefix[:len(prefix):len(prefix)], f), rem/f)
			}
		}
	}
	if dec == 1 {
		try([]int{1}, 1)
	} else {
		try(nil, dec)
	}
	return best
}

func stagesFor(inRate float64, factors []int, passHz, stopHz, outRate float64, cleanup bool) ([]ChannelStage, bool) {
	if cleanup && stopHz >= outRate/2 {
		return nil, false
	}
	var st []ChannelStage
	rate := inRate
	for i, f := range factors {
		ro := rate / float64(f)
		stop := ro - stopHz // protects [−stopHz, stopHz] after this stage
		if i == len(factors)-1 && !cleanup {
			stop = math.Min(stopHz, outRate-stopHz)
			if stopHz >= outRate/2 {
				stop = outRate - stopHz
			} else {
				stop = stopHz
			}
		}
		if f == 1 {
			stop = stopHz
		}
		if stop <= passHz || stop >= rate/2+passHz {
			return nil, false
		}
		s := ChannelStage{Decimation: f, InRateHz: rate, PassHz: passHz, StopHz: stop}
		s.Taps = stageLen(s)
		st = append(st, s)
		rate = ro
	}
	if cleanup {
		s := ChannelStage{Decimation: 1, InRateHz: outRate, PassHz: passHz, StopHz: stopHz}
		s.Taps = stageLen(s)
		st = append(st, s)
	}
	return st, true
}

func (c *Channelizer) build(plan []ChannelStage) {
	s0 := plan[0]
	c.d1 = s0.Decimation
	c.h1 = stageTaps(s0)
	if len(c.h1) < c.d1 {
		c.h1 = append(c.h1, make([]float64, c.d1-len(c.h1))...)
	}
	k := len(c.h1)
	om := 2 * math.Pi * c.offsetHz / c.inRate
	c.cyc1 = c.offsetHz / c.inRate * float64(c.d1)
	g := make([]complex128, k)
	sumAbs := 0.0
	for i, h := range c.h1 {
		g[i] = complex(h*math.Cos(om*float64(i)), h*math.Sin(om*float64(i)))
		sumAbs += math.Abs(real(g[i])) + math.Abs(imag(g[i]))
	}
	// fixed-point scale: |Σ re| and |Σ im| stay below 2^30
	shift := int(math.Floor(math.Log2(float64(1<<30) / sumAbs)))
	if shift > 40 {
		shift = 40
	}
	scale := math.Ldexp(1, shift)
	c.lutInv = float32(math.Ldexp(1, -shift))
	c.g1 = make([]complex64, k)
	for i := 0; i < k; i++ {
		c.g1[i] = complex64(g[k-1-i])
	}
	// Reversed taps r[i] = g[k-1-i] obey r[k-1-i] = c·conj(r[i]) with
	// c = e^{jω(k-1)} (h is symmetric), so one table serves a tap and its
	// mirror: tables for i < k/2, plus the middle tap when k is odd.
	c.symC = complex(math.Cos(om*float64(k-1)), math.Sin(om*float64(k-1)))
	c.lut = make([]lutTab, (k+1)/2)
	for i := range c.lut {
		t := g[k-1-i]
		for b := 0; b < 256; b++ {
			v := (float64(b) - 127.5) / 127.5 * scale
			c.lut[i][b] = pack(real(t)*v, imag(t)*v)
		}
	}
	c.hist8 = make([]byte, 2*(k-1+chanChunk))
	c.histC = make([]complex64, k-1+chanChunk)
	c.s1out = make([]complex64, 0, chanChunk/c.d1+2)
	c.delayIn = float64(k-1) / 2
	rate := c.d1
	maxOut := chanChunk/c.d1 + 2
	for _, s := range plan[1:] {
		st := newFIRStage(stageTaps(s), s.Decimation)
		c.stages = append(c.stages, st)
		c.delayIn += float64(len(st.taps)-1) / 2 * float64(rate)
		rate *= s.Decimation
	}
	c.scratch[0] = make([]complex64, 0, maxOut)
	c.scratch[1] = make([]complex64, 0, maxOut)
	c.Reset()
}

func pack(re, im float64) int64 {
	return int64(math.Round(im))<<32 + int64(math.Round(re))
}

func unpack(v int64) (re, im int32) {
	re = int32(uint32(v))
	im = int32((v - int64(re)) >> 32)
	return
}

// Reset clears all filter history and restarts the sample count (and the
// mixer phase) at 0.
func (c *Channelizer) Reset() {
	k := len(c.h1)
	clear(c.hist8)
	clear(c.histC)
	c.pre8 = k - 1
	c.n1 = k - 1
	c.next1 = k - 1
	c.count1 = 0
	c.mode = 0
	for _, s := range c.stages {
		s.reset()
	}
}

// OutRate returns the output sample rate in Hz (inRate/Decimation()).
func (c *Channelizer) OutRate() float64 { return c.outRate }

// Decimation returns the total integer decimation factor.
func (c *Channelizer) Decimation() int { return c.dec }

// DelayIn returns the total group delay of the filter chain in input
// samples: output j (computed at input sample j·Decimation()) represents the
// input at j·Decimation() − DelayIn(). All stages are linear-phase, so the
// delay is the same at every frequency.
func (c *Channelizer) DelayIn() float64 { return c.delayIn }

// Stages returns the plan: one entry per stage, first stage first.
func (c *Channelizer) Stages() []ChannelStage {
	out := []ChannelStage{{Decimation: c.d1, Taps: len(c.h1), InRateHz: c.inRate}}
	rate := c.inRate / float64(c.d1)
	for _, s := range c.stages {
		out = append(out, ChannelStage{Decimation: s.d, Taps: len(s.taps), InRateHz: rate})
		rate /= float64(s.d)
	}
	return out
}

// MaxOut returns the largest number of output samples a call with n input
// samples can return; a dst of that capacity makes Process and ProcessCU8
// allocation-free.
func (c *Channelizer) MaxOut(n int) int { return n/c.dec + 1 }

// Process translates and decimates the complex samples src and returns
// append(dst[:0], outputs...). State carries over between calls, so a
// stream may be cut into blocks of any length (including 0).
func (c *Channelizer) Process(dst, src []complex64) []complex64 {
	if c.mode != 1 {
		if c.mode != 0 {
			c.Reset()
		}
		c.mode = 1
	}
	dst = dst[:0]
	k := len(c.g1)
	for len(src) > 0 {
		m := min(len(src), len(c.histC)-c.n1)
		copy(c.histC[c.n1:], src[:m])
		src = src[m:]
		c.n1 += m
		out := c.s1out[:0]
		for c.next1 < c.n1 {
			out = append(out, dotCC(c.g1, c.histC[c.next1-k+1:c.next1+1]))
			c.next1 += c.d1
		}
		s := c.next1 - (k - 1)
		copy(c.histC, c.histC[s:c.n1])
		c.n1 -= s
		c.next1 -= s
		dst = c.finish(dst, out)
	}
	return dst
}

// ProcessCU8 is Process for raw RTL-SDR bytes (interleaved unsigned 8-bit
// I,Q; value (b − 127.5)/127.5). A trailing odd byte is ignored.
func (c *Channelizer) ProcessCU8(dst []complex64, src []byte) []complex64 {
	if c.mode != 2 {
		if c.mode != 0 {
			c.Reset()
		}
		c.mode = 2
	}
	dst = dst[:0]
	k := len(c.g1)
	src = src[:len(src)/2*2]
	for len(src) > 0 {
		m := min(len(src)/2, len(c.hist8)/2-c.n1)
		copy(c.hist8[2*c.n1:], src[:2*m])
		src = src[2*m:]
		c.n1 += m
		out := c.s1out[:0]
		for c.next1 < c.n1 {
			start := c.next1 - k + 1
			if start < c.pre8 {
				// No byte value means 0, so the zero history before the
				// first sample is skipped rather than stored (warm-up only).
				out = append(out, c.warmCU8(start))
			} else {
				out = append(out, c.lutOut(c.hist8[2*start:2*(c.next1+1)]))
			}
			c.next1 += c.d1
		}
		s := c.next1 - (k - 1)
		copy(c.hist8, c.hist8[2*s:2*c.n1])
		c.pre8 = max(0, c.pre8-s)
		c.n1 -= s
		c.next1 -= s
		dst = c.finish(dst, out)
	}
	return dst
}

// finish rotates the stage-1 outputs, runs the later stages and appends the
// result to dst.
func (c *Channelizer) finish(dst, s1 []complex64) []complex64 {
	if len(s1) == 0 {
		return dst
	}
	if c.cyc1 != 0 {
		// rotator e^{-j2π·cyc1·m} for stage-1 output m, re-anchored per chunk
		ph := -2 * math.Pi * fracPart(c.cyc1*float64(c.count1))
		rr, ri := math.Cos(ph), math.Sin(ph)
		sr, si := math.Cos(-2*math.Pi*c.cyc1), math.Sin(-2*math.Pi*c.cyc1)
		for i, v := range s1 {
			vr, vi := float64(real(v)), float64(imag(v))
			s1[i] = complex(float32(vr*rr-vi*ri), float32(vr*ri+vi*rr))
			rr, ri = rr*sr-ri*si, rr*si+ri*sr
		}
	}
	c.count1 += int64(len(s1))
	x := s1
	for i, st := range c.stages {
		if i == len(c.stages)-1 {
			return st.process(dst, x)
		}
		buf := c.scratch[i%2][:0]
		x = st.process(buf, x)
	}
	return append(dst, x...)
}

func fracPart(x float64) float64 { return x - math.Floor(x) }

// dotCC is Σ g[i]·x[i] for complex taps and samples.
func dotCC(g, x []complex64) complex64 {
	x = x[:len(g)]
	var ar, ai, br, bi float32
	i := 0
	for ; i+1 < len(g); i += 2 {
		g0, x0 := g[i], x[i]
		g1, x1 := g[i+1], x[i+1]
		ar += real(g0)*real(x0) - imag(g0)*imag(x0)
		ai += real(g0)*imag(x0) + imag(g0)*real(x0)
		br += real(g1)*real(x1) - imag(g1)*imag(x1)
		bi += real(g1)*imag(x1) + imag(g1)*real(x1)
	}
	if i < len(g) {
		ar += real(g[i])*real(x[i]) - imag(g[i])*imag(x[i])
		ai += real(g[i])*imag(x[i]) + imag(g[i])*real(x[i])
	}
	return complex(ar+br, ai+bi)
}

// lutOut evaluates stage 1 on one window of interleaved cu8 bytes
// (len(w) == 2·taps) from the symmetric tables.
func (c *Channelizer) lutOut(w []byte) complex64 {
	k := len(c.g1)
	p := k / 2
	var a, b, cc, d int64
	front := w[:2*p]
	back := w[2*(k-p) : 2*k]
	lut := c.lut[:p]
	for i := range lut {
		t := &lut[i]
		f := (*[2]byte)(front[2*i:])
		r := (*[2]byte)(back[2*(p-1-i):])
		a += t[f[0]]
		b += t[f[1]]
		cc += t[r[0]]
		d += t[r[1]]
	}
	if k%2 == 1 {
		t := &c.lut[p]
		a += t[w[2*p]]
		b += t[w[2*p+1]]
	}
	ar, ai := unpack(a)
	br, bi := unpack(b)
	cr, ci := unpack(cc)
	dr, di := unpack(d)
	// front: A + jB ; back: symC·(conj(C) + j·conj(D))
	fr := float64(ar) - float64(bi)
	fi := float64(ai) + float64(br)
	ur := float64(cr) + float64(di)
	ui := float64(dr) - float64(ci)
	sr, si := real(c.symC), imag(c.symC)
	inv := float64(c.lutInv)
	return complex(float32((fr+ur*sr-ui*si)*inv), float32((fi+ur*si+ui*sr)*inv))
}

// warmCU8 evaluates stage 1 in floating point for a window starting at
// buffer index start that reaches back before the first sample.
func (c *Channelizer) warmCU8(start int) complex64 {
	var acc complex64
	for i := max(c.pre8-start, 0); i < len(c.g1); i++ {
		j := start + i
		acc += c.g1[i] * complex(cu8Value[c.hist8[2*j]], cu8Value[c.hist8[2*j+1]])
	}
	return acc
}

// firStage is a real-tap polyphase FIR decimator on complex samples.
type firStage struct {
	taps  []float32 // reversed
	d     int
	buf   []complex64
	n     int
	next  int
	chunk int
}

func newFIRStage(h []float64, d int) *firStage {
	if len(h) < d {
		h = append(h, make([]float64, d-len(h))...)
	}
	s := &firStage{d: d, chunk: 2048}
	s.taps = make([]float32, len(h))
	for i := range h {
		s.taps[i] = float32(h[len(h)-1-i])
	}
	s.buf = make([]complex64, len(h)-1+s.chunk)
	s.reset()
	return s
}

func (s *firStage) reset() {
	clear(s.buf)
	s.n = len(s.taps) - 1
	s.next = s.n
}

// process appends the outputs for src to dst.
func (s *firStage) process(dst, src []complex64) []complex64 {
	k := len(s.taps)
	for len(src) > 0 {
		m := min(len(src), len(s.buf)-s.n)
		copy(s.buf[s.n:], src[:m])
		src = src[m:]
		s.n += m
		for s.next < s.n {
			dst = append(dst, dotRC(s.taps, s.buf[s.next-k+1:s.next+1]))
			s.next += s.d
		}
		sh := s.next - (k - 1)
		copy(s.buf, s.buf[sh:s.n])
		s.n -= sh
		s.next -= sh
	}
	return dst
}

// dotRC is Σ h[i]·x[i] for real taps and complex samples.
func dotRC(h []float32, x []complex64) complex64 {
	x = x[:len(h)]
	var ar, ai, br, bi float32
	i := 0
	for ; i+1 < len(h); i += 2 {
		x0, x1 := x[i], x[i+1]
		ar += h[i] * real(x0)
		ai += h[i] * imag(x0)
		br += h[i+1] * real(x1)
		bi += h[i+1] * imag(x1)
	}
	if i < len(h) {
		ar += h[i] * real(x[i])
		ai += h[i] * imag(x[i])
	}
	return complex(ar+br, ai+bi)
}
