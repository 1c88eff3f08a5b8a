package idmatch

import (
	"fmt"
	"math"
	"nullseek/ident/morse"
	"sort"
	"strings"
	"sync"
)

// The template method: each listed identifier's ideal keying, repeated as a
// beacon sends it (ID, word gap, ID, …; ITU-R M.1677-1 timing), is slid
// over the burst's key-down envelope at every speed from 5 to 40 WPM and
// every time offset. It needs no decoded text, speed or noise estimate, so
// it still names a burst far below the level where free decoding fails.
//
// Model. a(t) is the envelope amplitude (square root of the key-down
// power) at about 100 samples a second. Under a keying hypothesis k(t)
// (1 key down, 0 key up) a(t) = N + S·k(t) + noise of variance σ²; the
// log-likelihood ratio of a template against "all key up" is
// (S/σ²)·Σ_{k=1}(a − N − S/2), divided by the noise's correlation length
// in samples (neighbouring envelope samples are not independent). N, S
// and σ² come from the envelope itself (first from its mean, then from the
// best template's own key-down and key-up samples); no decoder output is
// used. Each copy of the ID adds its score only when positive, so copies
// hanging over the burst's ends or lost in a fade cost nothing.
//
// Decision. Besides the listed IDs there are two more hypotheses: "none"
// (noise or something that is not keyed) at a fixed log-likelihood
// noneLL, and "unlisted", all identifiers one character away from a
// listed one (the usual way a beacon not on the list differs), each with
// an equal share of the prior otherPrior. The posterior is a softmax of
// the log-likelihoods divided by the temperature temperature. The
// constants were fitted to a Monte-Carlo of ebook2cw bursts in white
// noise; TestTemplateFit checks they still fit that Monte-Carlo, and
// TestConfidenceCalibration that a reported confidence c is right at
// least that often on GNU Radio bursts.
//
// Long steady tones are left out of the search (see maskTones).

const (
	// searchRateHz is the envelope rate of the search (samples a second).
	searchRateHz = 100.0
	// minWPM and maxWPM bound the speed search.
	minWPM, maxWPM = 5.0, 40.0
	// coarseStep and fineStep are the speed grid steps (ratios).
	coarseStep = 1.03
	fineStep   = 1.005
	// refinePeaks is how many coarse speeds per ID are refined.
	refinePeaks = 3
	// screenFull: a list longer than this is screened on a speed grid of
	// screenStep first, and only its screenFull best IDs searched fully.
	screenFull = 20
	screenStep = 1.1
	// variantTop is how many of the best-fitting listed IDs have their
	// unlisted variants scored.
	variantTop = 3
	// wordGapU is the gap between copies in dot units (a word gap).
	wordGapU = 7.0

	// Calibration: temperature, the "none" log-likelihood and the prior
	// weight of the unlisted family, fitted by tplFitCalibration (in the
	// tests) on 252 ebook2cw bursts at +6 … −12 dB and 300 pure-noise
	// bursts: the most probable truth, with no wrong ID at ≥ 0.5.
	// Pure noise gives a best log-likelihood of 18 (median) to 30 (worst
	// of 300), hence "none" at 28.
	temperature = 1.5
	noneLL      = 28.0
	otherPrior  = 30.0
)

// template is one identifier's ideal keying in dot units.
type template struct {
	on      [][2]float64 // key-down intervals from the copy's start
	lenU    float64      // first key-down to last key-up
	periodU float64      // lenU + word gap
}

// templateFromCodes builds a template from Morse codes such as ".-", one a
// character, with ITU-R M.1677-1 timing (dash 3, gaps 1, 3; word gap 7
// between copies).
func templateFromCodes(codes []string) template {
	var t template
	pos := 0.0
	for ci, c := range codes {
		if ci > 0 {
			pos += 3
		}
		for ei, e := range c {
			if ei > 0 {
				pos++
			}
			d := 1.0
			if e == '-' {
				d = 3
			}
			t.on = append(t.on, [2]float64{pos, pos + d})
			pos += d
		}
	}
	t.lenU = pos
	t.periodU = pos + wordGapU
	return t
}

// variantAlphabet is what an unlisted identifier's differing character is
// drawn from.
const variantAlphabet = "ABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789/"

// templatePlan holds the templates of a matcher's IDs and what is needed
// for their unlisted family (every ID with one character replaced, minus
// the listed ones). The family of a thousand IDs has some 300,000
// members: they are built only for the IDs that fit a burst best
// (variantsOf, cached for the last few).
type templatePlan struct {
	ids    []template
	codes  [][]string
	listed map[string]bool
	// familySize is the unlisted family's size: Σ over IDs of its
	// characters times the alphabet less one (members two IDs share, or
	// that are listed, counted as they come; an approximation that only
	// sets the family's prior share).
	familySize int
	mu         sync.Mutex
	cache      map[int][]variant
}

// variant is one unlisted family member: its code key (the characters'
// Morse codes joined by spaces) and its template.
type variant struct {
	key string
	t   template
}

// variantCacheIDs bounds the variants kept built (per ID).
const variantCacheIDs = 32

func newTemplatePlan(tokens [][]string) *templatePlan {
	p := &templatePlan{listed: map[string]bool{}, cache: map[int][]variant{}}
	p.codes = make([][]string, len(tokens))
	for i, toks := range tokens {
		for _, t := range toks {
			p.codes[i] = append(p.codes[i], code(t))
		}
		p.listed[strings.Join(p.codes[i], " ")] = true
		p.ids = append(p.ids, templateFromCodes(p.codes[i]))
		p.familySize += len(p.codes[i]) * (len(variantAlphabet) - 1)
	}
	return p
}

// variantsOf returns the unlisted variants of ID i (one character
// replaced from variantAlphabet, not a listed ID).
func (p *templatePlan) variantsOf(i int) []variant {
	p.mu.Lock()
	defer p.mu.Unlock()
	if v, ok := p.cache[i]; ok {
		return v
	}
	if len(p.cache) >= variantCacheIDs {
		clear(p.cache)
	}
	cs := p.codes[i]
	var out []variant
	seen := map[string]bool{}
	for pos := range cs {
		for _, r := range variantAlphabet {
			alt := append([]string(nil), cs...)
			alt[pos] = code(string(r))
			key := strings.Join(alt, " ")
			if p.listed[key] || seen[key] {
				continue
			}
			seen[key] = true
			out = append(out, variant{key, templateFromCodes(alt)})
		}
	}
	p.cache[i] = out
	return out
}

// placement is one scored placement of a template.
type placement struct {
	score  float64 // Σ over copies of max(0, copy score)
	unit   float64 // samples per dot
	origin float64 // start (samples) of one copy; others at ± k·period
	copies int     // copies with a positive score
}

// envSearch holds one burst's working envelope and scratch.
type envSearch struct {
	amp  []float64 // amplitude envelope at rate
	rate float64
	n    int
	off  []bool    // samples left out: long steady tones (see maskTones)
	pad  int       // zero-score padding on the left of ps
	ps   []float64 // prefix sums of amp − θ, padded
	c    []float64 // single-copy scores
	ia   []int
	ib   []int
	st   []int
}

// newEnvSearch averages the power envelope down to about searchRateHz and
// takes its square root. It returns nil when there is too little.
func newEnvSearch(env []float32, envRate float64) *envSearch {
	if !(envRate >= 20) || math.IsInf(envRate, 0) || len(env) == 0 {
		return nil
	}
	k := max(1, int(math.Round(envRate/searchRateHz)))
	n := len(env) / k
	if n < 16 {
		return nil
	}
	s := &envSearch{amp: make([]float64, n), off: make([]bool, n), rate: envRate / float64(k), n: n}
	for i := range s.amp {
		p := 0.0
		for _, v := range env[i*k : i*k+k] {
			if f := float64(v); f > 0 && f < 1e30 {
				p += f
			}
		}
		s.amp[i] = math.Sqrt(p / float64(k))
	}
	// Scale-free: divide by the median amplitude.
	med := medianOf(s.amp)
	if !(med > 0) {
		med = meanOf(s.amp)
	}
	if !(med > 0) {
		return nil
	}
	for i := range s.amp {
		s.amp[i] /= med
	}
	// Room for a copy at the slowest speed hanging over either end.
	s.pad = int(math.Ceil(200*morse.DotSeconds(minWPM)*s.rate)) + 2
	s.ps = make([]float64, n+2*s.pad+1)
	return s
}

func medianOf(x []float64) float64 {
	c := append([]float64(nil), x...)
	sort.Float64s(c)
	return c[len(c)/2]
}

func meanOf(x []float64) float64 {
	s := 0.0
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

// setThreshold fills the prefix sums of amp − θ (0 outside the burst and
// on masked samples).
func (s *envSearch) setThreshold(theta float64) {
	acc := 0.0
	for i := range s.ps {
		s.ps[i] = acc
		if j := i - s.pad; j >= 0 && j < s.n && !s.off[j] {
			acc += s.amp[j] - theta
		}
	}
}

// meanOn is the mean amplitude of the samples not masked.
func (s *envSearch) meanOn() float64 {
	sum, n := 0.0, 0
	for i, v := range s.amp {
		if !s.off[i] {
			sum += v
			n++
		}
	}
	if n == 0 {
		return 0
	}
	return sum / float64(n)
}

// Long steady tones. Every template scores positively on a stretch that
// is all key-down, the more the more key-down it has, so such a stretch
// would name the ID with the most dashes. maskTones leaves out the long
// tones the decoder found and those found here on the envelope itself
// (the decoder may have read nothing): where the mean amplitude over
// toneWindowS stays above the key-up level plus toneFraction of the
// key-down level's lift for toneMinS or longer — Morse keying, on about
// half the time, stays well below it; the window is widened by half its
// length at each end, where the mean crosses the line while the tone is
// already on.
const (
	toneWindowS  = 1.5
	toneFraction = 0.88
	toneMinS     = 3.0
)

func (s *envSearch) maskTones(tones []morse.Mark) {
	for _, t := range tones {
		a := max(0, int(math.Floor(t.StartS*s.rate)))
		b := min(s.n, int(math.Ceil((t.StartS+t.DurS)*s.rate)))
		for i := a; i < b; i++ {
			s.off[i] = true
		}
	}
	w := int(toneWindowS * s.rate)
	if s.n < 2*w {
		return
	}
	srt := append([]float64(nil), s.amp...)
	sort.Float64s(srt)
	lo, hi := srt[s.n/10], srt[s.n*9/10]
	if !(hi > lo) {
		return
	}
	line := lo + toneFraction*(hi-lo)
	ps := make([]float64, s.n+1)
	for i, v := range s.amp {
		ps[i+1] = ps[i] + v
	}
	run := -1
	mark := func(a, b int) {
		if float64(b-a) >= toneMinS*s.rate {
			for i := max(0, a-w/2); i < min(s.n, b+w/2); i++ {
				s.off[i] = true
			}
		}
	}
	for c := w / 2; c+w-w/2 <= s.n; c++ {
		above := (ps[c+w-w/2]-ps[c-w/2])/float64(w) > line
		switch {
		case above && run < 0:
			run = c
		case !above && run >= 0:
			mark(run, c)
			run = -1
		}
	}
	if run >= 0 {
		mark(run, s.n-(w-w/2))
	}
}

// prep sets ia, ib to the template's key-down sample offsets at unit u
// samples a dot; it returns the copy length and period in samples.
func (s *envSearch) prep(t template, u float64) (L int, P float64) {
	s.ia, s.ib = s.ia[:0], s.ib[:0]
	for _, iv := range t.on {
		a := int(math.Round(iv[0] * u))
		b := max(a+1, int(math.Round(iv[1]*u)))
		s.ia, s.ib = append(s.ia, a), append(s.ib, b)
	}
	return int(math.Ceil(t.lenU * u)), t.periodU * u
}

// copyScore is Σ over the template's key-down samples of amp − θ for a
// copy starting at sample st (parts outside the burst count 0). st must
// lie in [−L, n) for the copy length L prep returned (the padding of ps
// covers copies hanging over either end).
func (s *envSearch) copyScore(st int) float64 {
	ps := s.ps[st+s.pad:]
	ib := s.ib[:len(s.ia)]
	sum := 0.0
	for k, a := range s.ia {
		sum += ps[ib[k]] - ps[a]
	}
	return sum
}

// scan finds the best placement of template t at unit u (samples a dot),
// trying copy origins every step samples.
func (s *envSearch) scan(t template, u float64, step int) placement {
	L, P := s.prep(t, u)
	first := -L + 1
	cnt := (s.n-first+step-1)/step + 1
	if cap(s.c) < cnt {
		s.c = make([]float64, cnt)
	}
	c := s.c[:cnt]
	for i := range c {
		c[i] = s.copyScore(first + i*step)
	}
	best := placement{score: math.Inf(-1), unit: u}
	span := int(math.Ceil(P / float64(step)))
	for i0 := 0; i0 < span && i0 < cnt; i0++ {
		o := float64(first + i0*step)
		tot, nc, bestOne := 0.0, 0, math.Inf(-1)
		for j := 0; ; j++ {
			idx := int(math.Round((o + float64(j)*P - float64(first)) / float64(step)))
			if idx >= cnt {
				break
			}
			v := c[idx]
			if v > 0 {
				tot += v
				nc++
			}
			bestOne = math.Max(bestOne, v)
		}
		if nc == 0 {
			tot = bestOne
		}
		if tot > best.score {
			best = placement{score: tot, unit: u, origin: o, copies: nc}
		}
	}
	return best
}

// starts lists the copy starts of a placement at unit u (samples a dot)
// and period P (samples): round(origin + j·P) for every copy that
// overlaps the burst, with the rounding scan uses.
func (s *envSearch) starts(origin, P float64, L int, out []int) []int {
	out = out[:0]
	j0 := int(math.Floor((float64(-L) - origin) / P))
	for j := j0; ; j++ {
		st := int(math.Round(origin + float64(j)*P))
		if st >= s.n {
			break
		}
		if st+L > 0 {
			out = append(out, st)
		}
	}
	return out
}

// placed reports the copy starts of a candidate with a positive score.
func (s *envSearch) placed(t template, cd placement) []int {
	L, P := s.prep(t, cd.unit)
	var out []int
	for _, st := range s.starts(cd.origin, P, L, nil) {
		if s.copyScore(st) > 0 {
			out = append(out, st)
		}
	}
	return out
}

// variantScore scores template t at unit u with copies from origin ± one
// dot (at least ±1 sample).
func (s *envSearch) variantScore(t template, u, origin float64) float64 {
	L, P := s.prep(t, u)
	bv := math.Inf(-1)
	// A listed ID's best fit may sit up to a dot off where its variant
	// fits (the changed character pulls it), so the variant searches a dot
	// either side.
	w := math.Max(1, math.Round(u))
	for d := -w; d <= w; d++ {
		tot, one := 0.0, math.Inf(-1)
		s.st = s.starts(origin+d, P, L, s.st)
		for _, st := range s.st {
			v := s.copyScore(st)
			if v > 0 {
				tot += v
			}
			one = math.Max(one, v)
		}
		if tot == 0 {
			tot = one
		}
		bv = math.Max(bv, tot)
	}
	return bv
}

// twoLevels are the two-level model's parameters fitted to a placement.
type twoLevels struct {
	noise, signal, sigma2, corr float64
}

// levels fits N, S, σ² and the noise correlation length to the envelope
// under a placed template (the span from the first copy's start to the
// last copy's end).
func (s *envSearch) levels(t template, cd placement) (twoLevels, bool) {
	starts := s.placed(t, cd)
	if len(starts) == 0 {
		return twoLevels{}, false
	}
	L, _ := s.prep(t, cd.unit)
	mask := make([]int8, s.n) // 0 outside, 1 key up, 2 key down
	for _, st := range starts {
		for i := max(0, st); i < min(s.n, st+L); i++ {
			mask[i] = 1
		}
	}
	a, b := max(0, starts[0]), min(s.n, starts[len(starts)-1]+L)
	for i := a; i < b; i++ {
		mask[i] = max(mask[i], 1) // word gaps between copies are key up
	}
	for _, st := range starts {
		for k, ia := range s.ia {
			for i := max(0, st+ia); i < min(s.n, st+s.ib[k]); i++ {
				mask[i] = 2
			}
		}
	}
	for i := range mask {
		if s.off[i] {
			mask[i] = 0
		}
	}
	var sum [3]float64
	var cnt [3]int
	for i, m := range mask {
		sum[m] += s.amp[i]
		cnt[m]++
	}
	if cnt[1] < 4 || cnt[2] < 4 {
		return twoLevels{}, false
	}
	lv := twoLevels{noise: sum[1] / float64(cnt[1])}
	lv.signal = sum[2]/float64(cnt[2]) - lv.noise
	// Residual variance and lag-1 correlation inside the span.
	var sq, lag float64
	prev, havePrev := 0.0, false
	m := 0
	for i := a; i < b; i++ {
		if s.off[i] {
			havePrev = false
			continue
		}
		ref := lv.noise
		if mask[i] == 2 {
			ref += lv.signal
		}
		r := s.amp[i] - ref
		sq += r * r
		if havePrev {
			lag += r * prev
		}
		prev, havePrev = r, true
		m++
	}
	if m < 8 || !(sq > 0) {
		return twoLevels{}, false
	}
	lv.sigma2 = sq / float64(m)
	rho := math.Max(0, math.Min(0.95, lag/sq))
	lv.corr = (1 + rho) / (1 - rho)
	return lv, lv.signal > 0
}

// templateEvidence is the template method's evidence for one burst.
type templateEvidence struct {
	ll     []float64 // log-likelihood ratio of each listed ID vs. all key up
	best   []placement
	vll    []float64 // log-likelihood ratio of each unlisted variant
	vRest  int       // family members not scored (counted at 0)
	xll    []float64 // … of each extra unlisted candidate (decoded words)
	post   []float64 // posterior of each listed ID
	pOther float64   // posterior of "an unlisted ID"
	pNone  float64   // posterior of "no listed keying"
	wpm    float64   // speed of the best ID
	snrDB  float64   // S²/σ² of the best fit (amplitude domain)
}

// run scores every template against the envelope.
func (p *templatePlan) run(s *envSearch, extra []template) (templateEvidence, bool) {
	var r templateEvidence
	all := append(p.ids[:len(p.ids):len(p.ids)], extra...)
	K := len(p.ids)
	// Coarse pass: θ from the mean amplitude (key down about half the time
	// puts it between the levels).
	s.setThreshold(s.meanOn())
	uLo, uHi := morse.DotSeconds(maxWPM)*s.rate, morse.DotSeconds(minWPM)*s.rate
	var units []float64
	for u := uLo; u <= uHi*1.0001; u *= coarseStep {
		units = append(units, u)
	}
	// A long list is screened first on a sparse speed grid: only the
	// screenFull best templates (and every extra candidate) get the coarse
	// grid and the refinement; the others keep their screening fit,
	// rescored at the final threshold.
	full := make([]bool, len(all))
	var screen []placement
	if len(p.ids) > screenFull {
		screen = make([]placement, len(all))
		for i, t := range all {
			screen[i] = placement{score: math.Inf(-1)}
			for u := uLo; u <= uHi*1.0001; u *= screenStep {
				if c := s.scan(t, u, max(1, int(u/3))); c.score > screen[i].score {
					screen[i] = c
				}
			}
		}
		order := make([]int, K)
		for i := range order {
			order[i] = i
		}
		sort.SliceStable(order, func(a, b int) bool { return screen[order[a]].score > screen[order[b]].score })
		for _, i := range order[:screenFull] {
			full[i] = true
		}
		for i := K; i < len(all); i++ {
			full[i] = true
		}
	} else {
		for i := range full {
			full[i] = true
		}
	}
	coarse := make([][]placement, len(all))
	gBest, gi := math.Inf(-1), -1
	for i, t := range all {
		if !full[i] {
			continue
		}
		coarse[i] = make([]placement, len(units))
		for k, u := range units {
			coarse[i][k] = s.scan(t, u, max(1, int(u/3)))
			if coarse[i][k].score > gBest {
				gBest, gi = coarse[i][k].score, i
			}
		}
	}
	if gi < 0 {
		return r, false
	}
	// Levels from the best coarse fit, then the refined pass at that θ.
	gc := coarse[gi][topPeaks(coarse[gi], 1)[0]]
	lv, ok := s.levels(all[gi], gc)
	if !ok {
		return r, false
	}
	s.setThreshold(lv.noise + lv.signal/2)
	best := make([]placement, len(all))
	bi := 0
	for i, t := range all {
		b := placement{score: math.Inf(-1)}
		if !full[i] {
			b = s.scan(t, screen[i].unit, 1)
			best[i] = b
			if i < K && b.score > best[bi].score {
				bi = i
			}
			continue
		}
		for _, k := range topPeaks(coarse[i], refinePeaks) {
			for f := -3; f <= 3; f++ {
				u := units[k] * math.Pow(fineStep, float64(f))
				if u < uLo*0.999 || u > uHi*1.001 {
					continue
				}
				if c := s.scan(t, u, 1); c.score > b.score {
					b = c
				}
			}
		}
		best[i] = b
		if i < K && b.score > best[bi].score {
			bi = i
		}
	}
	// Final levels from the best refined fit.
	r.best = best[:K]
	if lv2, ok := s.levels(p.ids[bi], r.best[bi]); ok {
		lv = lv2
	}
	scale := lv.signal / (lv.sigma2 * lv.corr)
	r.ll = make([]float64, K)
	for i, b := range best {
		if i < K {
			r.ll[i] = scale * math.Max(0, b.score)
		} else {
			r.xll = append(r.xll, scale*math.Max(0, b.score))
		}
	}
	r.wpm = 1.2 * s.rate / r.best[bi].unit
	r.snrDB = 10 * math.Log10(lv.signal*lv.signal/lv.sigma2)
	// Unlisted family, aligned with the best listed fit: same speed, the
	// same copy start ± a dot. A short list (screenFull IDs or fewer)
	// scores its whole family. A long one scores only the variants of the
	// variantTop best listed IDs, and the rest of the family counts at the
	// floor (log-likelihood ratio 0): scored at the best fit's alignment,
	// a variant of a poorly fitting ID scores about that anyway.
	top := make([]int, K)
	for i := range top {
		top[i] = i
	}
	sort.SliceStable(top, func(a, b int) bool { return r.ll[top[a]] > r.ll[top[b]] })
	if K > screenFull {
		top = top[:min(variantTop, K)]
	}
	var vll []float64
	seen := map[string]bool{} // a member two IDs share is scored once
	for _, i := range top {
		for _, vt := range p.variantsOf(i) {
			if seen[vt.key] {
				continue
			}
			seen[vt.key] = true
			v := s.variantScore(vt.t, r.best[bi].unit, r.best[bi].origin)
			vll = append(vll, scale*math.Max(0, v))
		}
	}
	r.vll = vll
	if K > screenFull {
		r.vRest = max(0, p.familySize-len(vll))
	}
	r.post, r.pOther, r.pNone = templatePosterior(r.ll, vll, r.vRest, r.xll, temperature, noneLL, otherPrior)
	return r, true
}

// templatePosterior turns log-likelihood ratios into posteriors at temperature
// temp: the listed IDs (ll, prior 1 each), the unlisted family (vll, plus
// vRest members at log-likelihood ratio 0, prior otherPrior shared evenly;
// xll, prior 1 each) and "none" (log-likelihood noneLL, prior 1).
func templatePosterior(ll, vll []float64, vRest int, xll []float64, temp, noneLL, otherPrior float64) (post []float64, pOther, pNone float64) {
	z := make([]float64, 0, len(ll)+2+len(xll))
	for _, v := range ll {
		z = append(z, v/temp)
	}
	z = append(z, noneLL/temp)
	if len(vll)+vRest > 0 {
		z = append(z, logMeanExpRest(vll, vRest, 1/temp)/temp+math.Log(otherPrior))
	}
	for _, v := range xll {
		z = append(z, v/temp)
	}
	p := softmax(z)
	post = p[:len(ll)]
	pNone = p[len(ll)]
	for _, v := range p[len(ll)+1:] {
		pOther += v
	}
	return post, pOther, pNone
}

// logMeanExpRest is logMeanExp over x and rest more values 0.
func logMeanExpRest(x []float64, rest int, k float64) float64 {
	if rest == 0 {
		return logMeanExp(x, k)
	}
	mx := 0.0
	for _, v := range x {
		mx = math.Max(mx, k*v)
	}
	s := float64(rest) * math.Exp(-mx)
	for _, v := range x {
		s += math.Exp(k*v - mx)
	}
	return (mx + math.Log(s/float64(len(x)+rest))) / k
}

// logMeanExp returns log(mean(exp(k·x))) / k, computed stably.
func logMeanExp(x []float64, k float64) float64 {
	if len(x) == 0 {
		return math.Inf(-1)
	}
	mx := math.Inf(-1)
	for _, v := range x {
		mx = math.Max(mx, k*v)
	}
	s := 0.0
	for _, v := range x {
		s += math.Exp(k*v - mx)
	}
	return (mx + math.Log(s/float64(len(x)))) / k
}

// topPeaks returns the indices of up to n local maxima of the scores,
// best first.
func topPeaks(c []placement, n int) []int {
	var idx []int
	for i := range c {
		l := i == 0 || c[i].score >= c[i-1].score
		r := i == len(c)-1 || c[i].score >= c[i+1].score
		if l && r {
			idx = append(idx, i)
		}
	}
	sort.Slice(idx, func(a, b int) bool { return c[idx[a]].score > c[idx[b]].score })
	if len(idx) > n {
		idx = idx[:n]
	}
	return idx
}

// plan returns the matcher's templates, building them on first use.
func (m *Matcher) plan() *templatePlan {
	m.planOnce.Do(func() { m.templates = newTemplatePlan(m.tokens) })
	return m.templates
}

// MatchEnvelope names the burst whose key-down power envelope (linear,
// any scale, ≥ 0; NaN and Inf count as 0) is env at envRate samples a
// second (≥ 20), by the template method alone: every listed ID's ideal
// keying, repeated with a word gap between copies, is scored over speeds
// 5–40 WPM (3 % grid, best speeds refined in 0.5 % steps) and all time
// offsets, with levels and noise taken from the envelope itself. The
// result's Confidence is the winner's calibrated posterior against the
// other listed IDs, "an unlisted ID one character away" and "no listed
// keying"; Unlisted is the posterior of the last two together. Below
// MinConfidence the ID is Unknown with a warning naming the best guess.
// Method is "template", or "" (with a warning) when the envelope is too
// short or flat to score. It never panics on bad input.
func (m *Matcher) MatchEnvelope(env []float32, envRate float64) Result {
	res, _ := m.matchEnvelope(env, envRate, nil, nil)
	return res
}

// matchEnvelope is MatchEnvelope that also returns the raw evidence (nil
// ll when nothing could be scored).
// extra are further unlisted candidates (Result passes the words of a clean
// decode that fit no listed ID), each searched like a listed ID.
func (m *Matcher) matchEnvelope(env []float32, envRate float64, extra []template, tones []morse.Mark) (Result, templateEvidence) {
	res := Result{ID: Unknown}
	res.Scores = make([]Score, len(m.ids))
	for i, id := range m.ids {
		res.Scores[i].ID = id
	}
	s := newEnvSearch(env, envRate)
	if s == nil {
		res.Warnings = append(res.Warnings, fmt.Sprintf("no usable envelope for the template method (%d samples at %g/s)", len(env), envRate))
		return res, templateEvidence{}
	}
	s.maskTones(tones)
	r, ok := m.plan().run(s, extra)
	if !ok {
		res.Warnings = append(res.Warnings, "envelope shows no keying the template method can fit")
		return res, templateEvidence{}
	}
	res.Method = "template"
	for i := range r.post {
		res.Scores[i].TemplateProb = r.post[i]
		res.Scores[i].Copies = r.best[i].copies
	}
	res.Unlisted = r.pOther + r.pNone
	b, _ := bestTwo(r.post)
	res.WPM = r.wpm
	switch {
	case r.post[b] >= m.MinConfidence:
		res.ID, res.Confidence = m.ids[b], r.post[b]
		res.Warnings = append(res.Warnings, fmt.Sprintf("identified by keying template at %.0f WPM (%d copies)", r.wpm, r.best[b].copies))
	case r.pNone >= r.pOther && r.pNone > r.post[b]:
		res.Warnings = append(res.Warnings, fmt.Sprintf("no listed identifier stands out of the noise (best %s at %.2f, none %.2f)", m.ids[b], r.post[b], r.pNone))
	case r.pOther > r.post[b]:
		res.Warnings = append(res.Warnings, fmt.Sprintf("keying fits an identifier not on the list better (best listed %s at %.2f, unlisted %.2f)", m.ids[b], r.post[b], r.pOther))
	default:
		res.Warnings = append(res.Warnings, fmt.Sprintf("best template guess %s at %.2f is below %.2f", m.ids[b], r.post[b], m.MinConfidence))
	}
	return res, r
}

// MatchTone decodes a keyed-tone burst (as morse.DecodeTone) and names it: by
// the decoded text when that is clear, else by the template method on the
// burst's own tone envelope (morse.ToneEnvelope), which works well below the
// level where free decoding fails. When free decoding fails (for instance
// with ErrNoMorse) the morse.Decoded holds only the envelope and a warning, and
// the Result comes from the template method. The error is non-nil only
// when the audio cannot be used at all (sample rate too low, too short).
func (m *Matcher) MatchTone(audio []float32, rate float64, opts morse.DecodeOptions) (morse.Decoded, Result, error) {
	env, envRate, toneHz, err := morse.ToneEnvelope(audio, rate, opts)
	if err != nil {
		return morse.Decoded{}, Result{ID: Unknown}, fmt.Errorf("match tone: %w", err)
	}
	d, derr := morse.DecodeTone(audio, rate, opts)
	if derr != nil {
		d = morse.Decoded{ToneHz: toneHz, Mode: opts.Mode, Envelope: env, EnvRate: envRate,
			Warnings: []string{"free decoding failed: " + derr.Error()}}
	}
	return d, m.Identify(Evidence{Decoded: d, Envelope: env, EnvRate: envRate}), nil
}
