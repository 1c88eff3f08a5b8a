package morse

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
)

// Char is one decoded character.
type Char struct {
	// Text is the character, a prosign such as "<AR>", or "*" for an
	// element pattern that is no Morse character.
	Text string
	// Confidence (0–1) combines how close each element and gap was to its
	// class and the envelope SNR; 0 for "*".
	Confidence float64
	// StartS and EndS bound the character's key-down time, seconds from the
	// start of the input.
	StartS, EndS float64
	// SNRDB is the local keying SNR at the character: the power of its
	// key-down samples over the key-up level there, minus one, in dB
	// (capped at 60; fading moves it from character to character).
	SNRDB float64
	// Level is the mean soft keying value of the character's key-down
	// samples (0 at the key-up level, 1 at the key-down level of the 3 s
	// around it) and Dip the lowest tenth of them: a character read in a
	// fade or through a dropout shows Level and Dip well below 1.
	Level, Dip float64
	// Unsure is the share of the character's samples, from its first
	// key-down to its last, whose soft keying value lies between 0.25 and
	// 0.75: neither clearly key-down nor clearly key-up (fading, noise
	// bursts below the FM threshold).
	Unsure float64
	// WordBefore says a word break (a word gap, a long tone or a pause)
	// comes between this character and the one before it.
	WordBefore bool
}

// Decoded is the result of decoding one burst.
type Decoded struct {
	// Text is the decoded text: characters, one space per word gap.
	Text  string
	Chars []Char
	// ToneHz is the (mean) audio pitch; 0 for keyed carrier.
	ToneHz float64
	// WPM is the character speed (PARIS, dot = 1.2/WPM s); FarnsworthWPM the
	// overall speed implied by the character gaps (equal to WPM for
	// standard spacing).
	WPM, FarnsworthWPM float64
	// DotS is the estimated dot length in seconds. WPM, FarnsworthWPM and
	// DotS are those of the stretch with the most key-down marks.
	DotS float64
	// Stretches are the parts of the keying between long steady tones and
	// long pauses, each with its own speed (one stretch when there are
	// none).
	Stretches []Stretch
	Mode      Mode
	// Keying is the on/off keying found, key-down and key-up intervals
	// alternating from the first key-down to the last. A key-down far
	// longer than a dash (a long steady tone) has Units 0 and is read as a
	// word break.
	Keying []Mark
	// Envelope is the key-down power envelope (linear, arbitrary scale) at
	// EnvRate samples a second, time 0 at the input's first sample.
	Envelope []float32
	EnvRate  float64
	// SNRDB is key-down over key-up power in the envelope, minus one.
	SNRDB    float64
	Warnings []string
}

// Stretch is a part of a transmission's keying with one speed.
type Stretch struct {
	// StartS and EndS bound its key-down marks (s, the input's time base).
	StartS, EndS float64
	// WPM is its character speed; Marks how many elements it holds.
	WPM   float64
	Marks int
}

// LongTones returns the key-down intervals far longer than a dash (Keying
// entries with Units 0).
func (d Decoded) LongTones() []Mark {
	var out []Mark
	for _, k := range d.Keying {
		if k.On && k.Units == 0 {
			out = append(out, k)
		}
	}
	return out
}

// DecodeOptions tunes the decoder; the zero value is fine.
type DecodeOptions struct {
	// MinWPM and MaxWPM bound the speed search (defaults 5 and 40).
	MinWPM, MaxWPM float64
	// ToneHz fixes the pitch; 0 finds it with FindTone.
	ToneHz float64
	// FixedTone turns tone tracking off: the oscillator stays at the one
	// pitch found for the whole burst.
	FixedTone bool
	// TrackHz is how far (±Hz) the tracker may follow a wandering tone from
	// the burst's overall pitch (default 150).
	TrackHz float64
	// EnvRateHz is the envelope rate (default 400 samples a second).
	EnvRateHz float64
	// Mode is copied into the result (DecodeKeyed always reports ModeCW).
	Mode Mode
}

func (o DecodeOptions) withDefaults() DecodeOptions {
	if !(o.MinWPM > 0) {
		o.MinWPM = 5
	}
	if !(o.MaxWPM > o.MinWPM) {
		o.MaxWPM = math.Max(40, o.MinWPM*2)
	}
	if !(o.TrackHz > 0) {
		o.TrackHz = 150
	}
	if !(o.EnvRateHz > 0) {
		o.EnvRateHz = 400
	}
	return o
}

// ErrNoMorse is wrapped by errors when an envelope holds no keying that
// can be read as Morse.
var ErrNoMorse = errors.New("no Morse keying found")

// DecodeTone decodes Morse sent as a keyed audio tone (FM discriminator
// audio for MCW, AM envelope audio for A2A) sampled at rate Hz.
//
// Method: FindTone gives the pitch (unless opts.ToneHz is set); a tracker
// re-estimates the pitch in 0.4 s blocks within ±opts.TrackHz and an
// oscillator following that track mixes the tone to 0 Hz, so a drifting
// oscillator stays inside the detection filter. A boxcar over ~15 ms gives
// a first power envelope at opts.EnvRateHz; once the dot length is known
// the envelope is remade with a boxcar of 0.6 dot (a filter matched to
// the dot) and decoded again by DecodeEnvelope.
func DecodeTone(audio []float32, rate float64, opts DecodeOptions) (Decoded, error) {
	opts = opts.withDefaults()
	if !(rate >= 2*MinToneHz) || math.IsInf(rate, 0) {
		return Decoded{}, fmt.Errorf("decode tone: sample rate %g Hz too low", rate)
	}
	clean := sanitize(audio)
	toneHz := opts.ToneHz
	var warns []string
	if !(toneHz > 0) {
		f, _, err := FindTone(clean, rate)
		if err != nil {
			return Decoded{}, fmt.Errorf("decode tone: %w", err)
		}
		toneHz = f
	}
	centres, freqs := []float64{0}, []float64{toneHz}
	if !opts.FixedTone {
		centres, freqs = toneTrack(clean, rate, toneHz, opts.TrackHz, 0.4)
	}
	lo, hi, mean := freqs[0], freqs[0], 0.0
	for _, f := range freqs {
		lo, hi, mean = math.Min(lo, f), math.Max(hi, f), mean+f
	}
	mean /= float64(len(freqs))
	if hi-lo > 20 {
		warns = append(warns, fmt.Sprintf("tone wandered %.0f–%.0f Hz; tracked", lo, hi))
	}
	env := toneEnvelope(clean, rate, centres, freqs, 0.015, opts.EnvRateHz)
	d, err := DecodeEnvelope(env, opts.EnvRateHz, opts)
	if err != nil {
		return Decoded{}, fmt.Errorf("decode tone at %.0f Hz: %w", mean, err)
	}
	box := math.Min(0.08, math.Max(0.008, 0.6*d.DotS))
	env2 := toneEnvelope(clean, rate, centres, freqs, box, opts.EnvRateHz)
	// Keep the second pass near the speeds the first pass found.
	lo, hi = d.WPM, d.WPM
	for _, st := range d.Stretches {
		lo, hi = math.Min(lo, st.WPM), math.Max(hi, st.WPM)
	}
	o2 := opts
	o2.MinWPM = math.Max(opts.MinWPM, 0.7*lo)
	o2.MaxWPM = math.Min(opts.MaxWPM, 1.4*hi)
	if o2.MaxWPM <= o2.MinWPM {
		o2.MinWPM, o2.MaxWPM = opts.MinWPM, opts.MaxWPM
	}
	if d2, err := DecodeEnvelope(env2, opts.EnvRateHz, o2); err == nil {
		d = d2
	}
	d.ToneHz = mean
	d.Mode = opts.Mode
	d.Warnings = append(warns, d.Warnings...)
	return d, nil
}

// DecodeKeyed decodes keyed-carrier CW from the channel power track
// (linear power, rate ≥ 100 readings a second). Tracks faster than
// 1000/s are averaged down to about 400/s first.
func DecodeKeyed(power []float32, rate float64, opts DecodeOptions) (Decoded, error) {
	opts = opts.withDefaults()
	if !(rate >= 50) || math.IsInf(rate, 0) {
		return Decoded{}, fmt.Errorf("decode keyed carrier: power rate %g/s too low (need ≥ 100/s)", rate)
	}
	p := sanitize(power)
	envRate := rate
	if rate > 1000 {
		k := int(rate / 400)
		n := len(p) / k
		q := make([]float32, n)
		for i := range q {
			s := float32(0)
			for _, v := range p[i*k : i*k+k] {
				s += v
			}
			q[i] = s / float32(k)
		}
		p, envRate = q, rate/float64(k)
	}
	d, err := DecodeEnvelope(p, envRate, opts)
	if err != nil {
		return Decoded{}, fmt.Errorf("decode keyed carrier: %w", err)
	}
	d.Mode = ModeCW
	return d, nil
}

// sanitize copies x, replacing NaN, ±Inf and absurd values by 0.
func sanitize(x []float32) []float32 {
	out := make([]float32, len(x))
	for i, v := range x {
		if !math.IsNaN(float64(v)) && !math.IsInf(float64(v), 0) && math.Abs(float64(v)) < 1e30 {
			out[i] = v
		}
	}
	return out
}

// keyLevels holds per-sample key-up and key-down amplitude levels
// (square roots of envelope power).
type keyLevels struct {
	amp, lo, hi []float64
}

// isodata splits amplitudes into two levels (Ridler–Calvard iteration).
func isodata(a []float64) (lo, hi float64) {
	if len(a) == 0 {
		return 0, 0
	}
	s := append([]float64(nil), a...)
	sort.Float64s(s)
	lo, hi = s[len(s)/20], s[len(s)-1-len(s)/20]
	for it := 0; it < 20; it++ {
		t := (lo + hi) / 2
		var sl, sh float64
		var nl, nh int
		for _, v := range s {
			if v > t {
				sh += v
				nh++
			} else {
				sl += v
				nl++
			}
		}
		if nl == 0 || nh == 0 {
			break
		}
		lo, hi = sl/float64(nl), sh/float64(nh)
	}
	return lo, hi
}

// levelsOf computes the keying levels of a power envelope: global
// two-level split, refined in 3 s windows (50 % overlap) where the window
// itself shows a clear split, interpolated between window centres. This
// follows slow fading and noise-floor changes.
func levelsOf(env []float32, envRate float64) keyLevels {
	n := len(env)
	k := keyLevels{amp: make([]float64, n), lo: make([]float64, n), hi: make([]float64, n)}
	for i, v := range env {
		if v > 0 {
			k.amp[i] = math.Sqrt(float64(v))
		}
	}
	glo, ghi := isodata(k.amp)
	w := int(3 * envRate)
	if n < 2*w || w < 8 {
		for i := range k.lo {
			k.lo[i], k.hi[i] = glo, ghi
		}
		return k
	}
	var cs, los, his []float64
	for off := 0; off+w <= n; off += w / 2 {
		lo, hi := isodata(k.amp[off : off+w])
		if hi-lo < 0.5*(ghi-glo) {
			lo, hi = glo, ghi
		}
		cs = append(cs, float64(off)+float64(w)/2)
		los, his = append(los, lo), append(his, hi)
	}
	j := 0
	for i := range k.lo {
		x := float64(i)
		for j+1 < len(cs) && cs[j+1] <= x {
			j++
		}
		if j+1 >= len(cs) || x <= cs[j] {
			k.lo[i], k.hi[i] = los[j], his[j]
			continue
		}
		f := (x - cs[j]) / (cs[j+1] - cs[j])
		k.lo[i] = los[j]*(1-f) + los[j+1]*f
		k.hi[i] = his[j]*(1-f) + his[j+1]*f
	}
	return k
}

// soft returns the keying soft value of sample i: 0 at the key-up level,
// 1 at the key-down level.
func (k keyLevels) soft(i int) float64 {
	d := k.hi[i] - k.lo[i]
	if d <= 0 {
		return 0
	}
	return (k.amp[i] - k.lo[i]) / d
}

// charSNR is the keying SNR (dB, capped at 60) of the key-down samples in
// runs against the key-up level there: mean key-down power over key-up
// power, minus one.
func (k keyLevels) charSNR(runs [][2]int) float64 {
	var on, off float64
	n := 0
	for _, r := range runs {
		for i := r[0]; i < r[1] && i < len(k.amp); i++ {
			on += k.amp[i] * k.amp[i]
			off += k.lo[i] * k.lo[i]
			n++
		}
	}
	if n == 0 || !(on > off) {
		return 0
	}
	if !(off > 0) {
		return 60
	}
	return math.Min(60, 10*math.Log10(on/off-1))
}

// charLevel is the mean soft value of the key-down samples in runs and
// their 10th percentile.
func (k keyLevels) charLevel(runs [][2]int) (mean, dip float64) {
	var v []float64
	for _, r := range runs {
		for i := r[0]; i < r[1] && i < len(k.amp); i++ {
			v = append(v, k.soft(i))
		}
	}
	if len(v) == 0 {
		return 0, 0
	}
	for _, x := range v {
		mean += x
	}
	sort.Float64s(v)
	return mean / float64(len(v)), v[len(v)/10]
}

// unsure is the share of samples from the first run's start to the last
// run's end whose soft value lies in [0.25, 0.75].
func (k keyLevels) unsure(runs [][2]int) float64 {
	if len(runs) == 0 {
		return 0
	}
	a, b := runs[0][0], min(runs[len(runs)-1][1], len(k.amp))
	n := 0
	for i := a; i < b; i++ {
		if s := k.soft(i); s >= 0.25 && s <= 0.75 {
			n++
		}
	}
	if b <= a {
		return 0
	}
	return float64(n) / float64(b-a)
}

// keyRun is one interval of constant keying in envelope samples.
type keyRun struct {
	on   bool
	a, b int // [a, b)
}

func (r keyRun) len() int { return r.b - r.a }

// slice thresholds the soft keying at 0.5 with ±0.1 hysteresis.
func (k keyLevels) slice() []keyRun {
	var rs []keyRun
	on := false
	start := 0
	for i := range k.amp {
		s := k.soft(i)
		if (!on && s > 0.6) || (on && s < 0.4) {
			if i > start {
				rs = append(rs, keyRun{on, start, i})
			}
			on, start = !on, i
		}
	}
	if len(k.amp) > start {
		rs = append(rs, keyRun{on, start, len(k.amp)})
	}
	// Trim key-up at the edges.
	for len(rs) > 0 && !rs[0].on {
		rs = rs[1:]
	}
	for len(rs) > 0 && !rs[len(rs)-1].on {
		rs = rs[:len(rs)-1]
	}
	return rs
}

// deglitch merges runs shorter than minLen samples into their neighbours,
// shortest first.
func deglitch(rs []keyRun, minLen int) []keyRun {
	rs = append([]keyRun(nil), rs...)
	for {
		best := -1
		for i, r := range rs {
			if r.len() < minLen && (best < 0 || r.len() < rs[best].len()) {
				best = i
			}
		}
		if best < 0 {
			return rs
		}
		switch {
		case len(rs) == 1:
			return nil
		case best == 0:
			rs = rs[1:]
			for len(rs) > 0 && !rs[0].on {
				rs = rs[1:]
			}
		case best == len(rs)-1:
			rs = rs[:best]
			for len(rs) > 0 && !rs[len(rs)-1].on {
				rs = rs[:len(rs)-1]
			}
		default:
			m := keyRun{rs[best-1].on, rs[best-1].a, rs[best+1].b}
			rs = append(rs[:best-1], append([]keyRun{m}, rs[best+2:]...)...)
		}
	}
}

// Element timing. A key-down longer than longMarkUnits dots is a long
// steady tone (a direction-finding beacon's carrier between copies of its
// identifier), not a dash; a key-up longer than pauseUnits dots ends a
// stretch, whose speed is estimated on its own when it holds at least
// minStretchElements marks and short gaps. outlierCost caps one duration's cost in the
// speed search at (ln 2)²: a duration more than twice off both classes
// (a long tone, a pause, a glitch) counts the same however far off it
// is, so it cannot drag the estimate.
const (
	longMarkUnits      = 6.0
	pauseUnits         = 30.0
	minStretchElements = 10
	outlierCost        = 0.4805 // (ln 2)²
)

// unitCost scores a dot length u (seconds) against mark and key-up
// durations: squared log distance of each mark to 1 or 3 units and of each
// short key-up to 1 or 3 units, capped at outlierCost (longer key-ups are
// free, so Farnsworth spacing does not bias the estimate).
func unitCost(u float64, marks, spaces []float64) float64 {
	c := 0.0
	for _, d := range marks {
		a, b := math.Log(d/u), math.Log(d/(3*u))
		c += min(a*a, b*b, outlierCost)
	}
	for _, d := range spaces {
		if d < 3*u {
			a, b := math.Log(d/u), math.Log(d/(3*u))
			c += min(a*a, b*b, outlierCost)
		}
	}
	return c
}

// estimateUnit finds the dot length (s) and the keying bias δ (s; marks
// come out u+δ, gaps u−δ) from run durations, for speeds minWPM–maxWPM.
func estimateUnit(marks, spaces []float64, minWPM, maxWPM float64) (u, delta float64) {
	uMin, uMax := DotSeconds(maxWPM), DotSeconds(minWPM)
	const steps = 160
	best, bestC := uMin, math.Inf(1)
	cost := func(u float64) float64 { return unitCost(u, marks, spaces) }
	for i := 0; i <= steps; i++ {
		v := uMin * math.Pow(uMax/uMin, float64(i)/steps)
		if c := cost(v); c < bestC {
			best, bestC = v, c
		}
	}
	// A text without dashes fits u and u/3 equally; prefer the longer.
	n := float64(len(marks) + len(spaces))
	if 3*best <= uMax*1.05 && cost(3*best) <= bestC+0.05*n {
		best = 3 * best
	}
	// Least squares for u and δ: mark = k·u + δ, element gap = u − δ.
	var a11, a12, a22, b1, b2 float64
	add := func(k, s, d float64) {
		a11 += k * k
		a12 += k * s
		a22 += s * s
		b1 += k * d
		b2 += s * d
	}
	for _, d := range marks {
		if d > longMarkUnits*best {
			continue // a long tone
		}
		k := 1.0
		if d > 2*best {
			k = 3
		}
		add(k, 1, d)
	}
	for _, d := range spaces {
		if d < 2*best {
			add(1, -1, d)
		}
	}
	det := a11*a22 - a12*a12
	u, delta = best, 0
	if det > 1e-9*a11*a22 && a22 > 0 {
		u = (b1*a22 - b2*a12) / det
		delta = (a11*b2 - a12*b1) / det
	} else if a11 > 0 {
		u = b1 / a11
	}
	if !(u > 0.5*best && u < 2*best) {
		u, delta = best, 0
	}
	u = math.Max(uMin, math.Min(uMax, u)) // stay in the speed range
	delta = math.Max(-0.4*u, math.Min(0.4*u, delta))
	return u, delta
}

// timing is the element timing of one stretch: dot u and keying bias
// delta (s; marks come out u+δ, gaps u−δ), character and word gaps cg
// and wg (dots), and how many key-ups longer than two dots set the gaps.
type timing struct {
	u, delta, cg, wg float64
	nGaps            int
}

// stretchTiming completes a unit estimate with the gaps of the stretch.
func stretchTiming(marks, spaces []float64, u, delta float64) timing {
	var long []float64
	for _, s := range spaces {
		if x := (s + delta) / u; x >= 2 && x < pauseUnits {
			long = append(long, x)
		}
	}
	cg, wg := splitGaps(long)
	return timing{u: u, delta: delta, cg: cg, wg: wg, nGaps: len(long)}
}

// fallbackGaps takes the gaps from g when the stretch has too few of its
// own to tell character gaps from word gaps, scaled to this stretch's dot.
func (t *timing) fallbackGaps(g timing) {
	if t.nGaps < 4 {
		t.cg, t.wg = g.cg, g.wg
	}
}

// countGaps counts the key-ups inside characters or between them (shorter
// than five dots): the ones that tell the dot.
func countGaps(spaces []float64, u float64) int {
	n := 0
	for _, d := range spaces {
		if d < 5*u {
			n++
		}
	}
	return n
}

// countElements counts the marks that are elements, not long tones.
func countElements(marks []float64, u float64) int {
	n := 0
	for _, d := range marks {
		if d <= longMarkUnits*u {
			n++
		}
	}
	return n
}

// splitStretches cuts the runs (key-down first, key-down last) into
// stretches at long tones (key-down longer than longMarkUnits dots, a
// stretch of its own) and at pauses (key-up longer than pauseUnits dots),
// u being the transmission's overall dot. It returns run ranges [a, b),
// each starting and ending with key-down.
func splitStretches(rs []keyRun, rate, u float64) [][2]int {
	var out [][2]int
	a := 0
	cut := func(b int) { // close [a, b) if it holds a key-down
		for a < b && !rs[a].on {
			a++
		}
		e := b
		for e > a && !rs[e-1].on {
			e--
		}
		if e > a {
			out = append(out, [2]int{a, e})
		}
		a = b
	}
	for i, r := range rs {
		dur := float64(r.len()) / rate
		switch {
		case r.on && dur > longMarkUnits*u:
			cut(i)
			a = i
			cut(i + 1)
		case !r.on && dur > pauseUnits*u:
			cut(i)
		}
	}
	cut(len(rs))
	return out
}

// gauss is an unnormalised Gaussian likelihood with a normalising 1/σ.
func gauss(x, mu, sigma float64) float64 {
	z := (x - mu) / sigma
	return math.Exp(-0.5*z*z) / sigma
}

// classify picks the most likely of the classes (means and sigmas, in
// units) and returns its index and posterior probability.
func classify(x float64, means, sigmas []float64) (int, float64) {
	best, tot, bl := 0, 0.0, 0.0
	for i := range means {
		l := gauss(x, means[i], sigmas[i])
		tot += l
		if l > bl {
			best, bl = i, l
		}
	}
	if tot <= 0 || math.IsNaN(tot) {
		// Far from every class: nearest mean, no confidence.
		for i := range means {
			if math.Abs(x-means[i]) < math.Abs(x-means[best]) {
				best = i
			}
		}
		return best, 0
	}
	return best, bl / tot
}

// splitGaps finds the character-gap length (in units) among key-ups ≥ 2
// units, allowing Farnsworth spacing: a two-class split of their logs
// (Otsu) whose class means differ by ≥ 1.6× is read as character and word
// gaps; otherwise all are character gaps.
func splitGaps(long []float64) (charGap, wordGap float64) {
	if len(long) == 0 {
		return 3, 7
	}
	l := make([]float64, len(long))
	for i, v := range long {
		l[i] = math.Log(v)
	}
	sort.Float64s(l)
	mean := func(a []float64) float64 {
		s := 0.0
		for _, v := range a {
			s += v
		}
		return s / float64(len(a))
	}
	bestK, bestV := 0, -1.0
	for k := 1; k < len(l); k++ {
		m1, m2 := mean(l[:k]), mean(l[k:])
		v := float64(k) * float64(len(l)-k) * (m2 - m1) * (m2 - m1)
		if v > bestV {
			bestK, bestV = k, v
		}
	}
	if bestK > 0 {
		m1, m2 := mean(l[:bestK]), mean(l[bestK:])
		if math.Exp(m2-m1) >= 1.6 {
			return math.Exp(m1), math.Exp(m2)
		}
	}
	// One class: character gaps, unless they are as long as standard word
	// gaps (a text of one-character words). A one-word Farnsworth text is
	// then read as separate words.
	c := math.Exp(mean(l))
	if c >= 5.5 {
		return 3, c
	}
	return c, math.Max(c*7/3, 7)
}

// DecodeEnvelope is the shared decoder core. env is a key-down power
// envelope (linear, any scale, ≥ 0) at envRate samples a second. It
// thresholds the envelope at half the key-down amplitude with hysteresis,
// against levels that follow the noise (3 s windows), removes glitches,
// estimates the dot length from marks and short gaps (ITU-R M.1677-1
// ratios 1:3; speeds opts.MinWPM–MaxWPM) separately from the character and
// word gaps (so Farnsworth spacing is read), classifies each interval
// with soft thresholds and maps the element patterns to characters.
func DecodeEnvelope(env []float32, envRate float64, opts DecodeOptions) (Decoded, error) {
	opts = opts.withDefaults()
	if !(envRate >= 50) || math.IsInf(envRate, 0) {
		return Decoded{}, fmt.Errorf("envelope rate %g/s too low (need ≥ 50/s)", envRate)
	}
	env = sanitize(env)
	for i, v := range env {
		if v < 0 {
			env[i] = 0
		}
	}
	d := Decoded{Envelope: env, EnvRate: envRate, Mode: opts.Mode}
	minMark := DotSeconds(opts.MaxWPM)
	if float64(len(env))/envRate < 2*minMark {
		return d, fmt.Errorf("%.3f s of envelope is too short: %w", float64(len(env))/envRate, ErrNoMorse)
	}
	lv := levelsOf(env, envRate)
	// SNR from the two levels: key-down power over key-up power, minus one.
	var hiP, loP float64
	for i := range lv.amp {
		hiP += lv.hi[i] * lv.hi[i]
		loP += lv.lo[i] * lv.lo[i]
	}
	if !(hiP > 0) || !(hiP > 1.0001*loP) {
		return d, fmt.Errorf("envelope never changes level: %w", ErrNoMorse)
	}
	d.SNRDB = 10 * math.Log10(math.Min(hiP/math.Max(loP, 1e-30)-1, 1e6))
	if d.SNRDB < 3 {
		d.Warnings = append(d.Warnings, fmt.Sprintf("weak keying: %.1f dB", d.SNRDB))
	}
	rs := deglitch(lv.slice(), int(math.Max(1, 0.3*minMark*envRate)))
	durs := func(rs []keyRun) (m, s []float64) {
		for _, r := range rs {
			if r.on {
				m = append(m, float64(r.len())/envRate)
			} else {
				s = append(s, float64(r.len())/envRate)
			}
		}
		return
	}
	marks, spaces := durs(rs)
	if len(marks) == 0 {
		return d, fmt.Errorf("no key-down found: %w", ErrNoMorse)
	}
	u, delta := estimateUnit(marks, spaces, opts.MinWPM, opts.MaxWPM)
	// Second round: glitches are now measured against the dot.
	rs = deglitch(lv.slice(), int(math.Max(1, 0.35*u*envRate)))
	marks, spaces = durs(rs)
	if len(marks) == 0 {
		return d, fmt.Errorf("only glitches, no key-down: %w", ErrNoMorse)
	}
	u, delta = estimateUnit(marks, spaces, opts.MinWPM, opts.MaxWPM)
	global := stretchTiming(marks, spaces, u, delta)
	snrConf := 1 / (1 + math.Exp(-(d.SNRDB-6)/2))

	// Stretches: each with its own timing when it holds enough elements.
	type stretchRuns struct {
		a, b int // runs [a, b)
		tm   timing
	}
	var sts []stretchRuns
	for _, ab := range splitStretches(rs, envRate, u) {
		m, sp := durs(rs[ab[0]:ab[1]])
		tm := global
		if n := countElements(m, u) + countGaps(sp, u); n >= minStretchElements {
			su, sd := estimateUnit(m, sp, opts.MinWPM, opts.MaxWPM)
			tm = stretchTiming(m, sp, su, sd)
			tm.fallbackGaps(global)
		}
		sts = append(sts, stretchRuns{ab[0], ab[1], tm})
	}
	best := 0
	for i, st := range sts {
		first, last := rs[st.a], rs[st.b-1]
		m, _ := durs(rs[st.a:st.b])
		n := countElements(m, st.tm.u)
		d.Stretches = append(d.Stretches, Stretch{StartS: float64(first.a) / envRate, EndS: float64(last.b) / envRate,
			WPM: 1.2 / st.tm.u, Marks: n})
		if n > d.Stretches[best].Marks {
			best = i
		}
	}
	bt := sts[best].tm
	d.DotS, d.WPM = bt.u, 1.2/bt.u
	d.FarnsworthWPM = d.WPM
	if bt.cg > 3.6 {
		// Bloom: tc = 3ta/19 → ta; s = 60c/(ta·c + 37.2).
		ta := 19 * bt.cg * bt.u / 3
		d.FarnsworthWPM = 60 * d.WPM / (ta*d.WPM + 37.2)
	}
	lo, hi := d.WPM, d.WPM
	for _, st := range d.Stretches {
		lo, hi = math.Min(lo, st.WPM), math.Max(hi, st.WPM)
	}
	if hi > 1.15*lo {
		d.Warnings = append(d.Warnings, fmt.Sprintf("speed changes inside the transmission: %.1f–%.1f WPM", lo, hi))
	}

	// Classify and assemble characters.
	var b strings.Builder
	var pattern []byte
	conf := 1.0
	var cStart, cEnd float64
	var onSamples [][2]int // key-down runs of the character being read
	wordBreak := false     // a word break since the last character
	flush := func() {
		if len(pattern) == 0 {
			return
		}
		t, ok := reverseTable[string(pattern)]
		c := conf * snrConf
		if !ok {
			t, c = UnknownChar, 0
		}
		b.WriteString(t)
		lvl, dip := lv.charLevel(onSamples)
		d.Chars = append(d.Chars, Char{Text: t, Confidence: c, StartS: cStart, EndS: cEnd, SNRDB: lv.charSNR(onSamples),
			Level: lvl, Dip: dip, Unsure: lv.unsure(onSamples), WordBefore: wordBreak && len(d.Chars) > 0})
		wordBreak = false
		pattern, conf = pattern[:0], 1
		onSamples = onSamples[:0]
	}
	for _, st := range sts {
		tm := st.tm
		sepMeans := []float64{1, tm.cg, tm.wg}
		sepSig := []float64{0.35, 0.2*tm.cg + 0.3, 0.2*tm.wg + 0.3}
		for _, r := range rs[st.a:st.b] {
			t0, dur := float64(r.a)/envRate, float64(r.len())/envRate
			if r.on {
				x := (dur - tm.delta) / tm.u
				if x > longMarkUnits {
					// A long steady tone: a word break, no character.
					flush()
					b.WriteByte(' ')
					wordBreak = true
					d.Keying = append(d.Keying, Mark{On: true, StartS: t0, DurS: dur, Units: 0})
					continue
				}
				k, p := classify(x, []float64{1, 3}, []float64{0.3, 0.6})
				if len(pattern) == 0 {
					cStart = t0
				}
				cEnd = t0 + dur
				if k == 0 {
					pattern = append(pattern, '.')
				} else {
					pattern = append(pattern, '-')
				}
				conf *= p
				onSamples = append(onSamples, [2]int{r.a, r.b})
				d.Keying = append(d.Keying, Mark{On: true, StartS: t0, DurS: dur, Units: 1 + 2*k})
				continue
			}
			x := (dur + tm.delta) / tm.u
			k, p := classify(x, sepMeans, sepSig)
			d.Keying = append(d.Keying, Mark{On: false, StartS: t0, DurS: dur, Units: []int{1, 3, 7}[k]})
			if k == 0 {
				conf *= p
				if len(pattern) >= maxCodeLen+2 { // runaway pattern: cut it
					flush()
				}
				continue
			}
			if len(pattern) > 0 {
				conf *= p // the closing gap's own certainty
			}
			flush()
			if k == 2 {
				b.WriteByte(' ')
				wordBreak = true
			}
		}
		flush()
		b.WriteByte(' ')
		wordBreak = true
	}
	flush()
	d.Text = strings.Join(strings.Fields(b.String()), " ")

	if d.WPM < opts.MinWPM*1.05 || d.WPM > opts.MaxWPM*0.95 {
		d.Warnings = append(d.Warnings, fmt.Sprintf("speed %.1f WPM at the edge of the search range %g–%g", d.WPM, opts.MinWPM, opts.MaxWPM))
	}
	return d, nil
}
