package idmatch

import (
	"math"
	"sort"
	"strings"

	"nullseek/ident/morse"
)

// The text method. A transmission's decoded characters are read as
// background text (anything: a "DE", a tone tail read as "T", a closing
// "K", garbage from noise) with copies of the identifier among it, each
// copy possibly garbled. For one hypothesis h (an identifier's tokens
// p_1…p_L) the log-likelihood ratio against "all background" is the best
// path of a left-to-right model (Viterbi):
//
//   - a background character scores 0 (it is as likely under h as under
//     the background, a uniform draw from textAlphabet characters);
//   - a character c read where h sends p scores log(A·r) when c = p and
//     log(A·(1−r)/(A−1)) otherwise, r being the character's calibrated
//     probability of being read right (charReliability) and A the alphabet
//     size; an unreadable character ("*") scores 0;
//   - a character of h the decoder lost costs log(textDelete), an extra
//     character inside a copy log(textInsert);
//   - each copy costs log(1/(L+1)), the prior of a copy starting at a
//     given character; when the transmission was cut by the start (end)
//     of the recording, a copy cut there counts what it holds, otherwise
//     its missing characters cost as lost ones.
//
// Copies add up, so the evidence grows with every copy. The unlisted
// family (every identifier one character changed or left out from a
// listed one, not itself listed) is scored on h's best path.
// The posterior over the listed IDs, the unlisted family and "none"
// (nothing on the list was sent) is a softmax of the log-likelihood ratios
// over textTemperature with priors 1 per listed ID, 1 for none and
// textOtherPrior shared by the unlisted family.

const (
	// textAlphabet is the number of characters background text is drawn
	// from (letters, digits and the common punctuation of ITU-R M.1677-1).
	textAlphabet = 45.0
	// textDelete and textInsert are the chances that the decoder loses a
	// character of a copy or adds one to it (a gap read as two, a dropout
	// merging two): from the Monte-Carlo set of testdata/ident (see
	// charReliability), about 3 % of characters at 6–9 dB CNR.
	textDelete, textInsert = 0.03, 0.03
	// textTemperature divides the log-likelihood ratios and textOtherPrior
	// is the unlisted family's prior weight (against 1 for each listed ID
	// and for none), both fitted on the Monte-Carlo set with the
	// reliabilities below (TestTextCalibration checks they still fit).
	textTemperature = 1.0
	textOtherPrior  = 3.0
)

// Calibration of charReliability: logistic regression of "read right"
// (the character an edit-distance alignment pairs with the same character
// of the text sent) on the character's local SNR, the decoder's
// confidence and its unsure share, fitted on a make_field.py mc set
// (GNU Radio NBFM at 0–30 dB CNR, a quarter of the bursts Rayleigh-faded,
// 4,100 characters: --cnrs 0,2,4,6,8,10,12,15,20,30 --per-cnr 40
// --library 60 --seed 5). TestTextCalibration refits it on another draw
// and checks these still fit.
const (
	relIntercept = -5.35
	relSNR       = 0.458
	relConf      = 0.221
	relUnsure    = -5.75
)

// charReliability is the probability that a decoded character is the one
// sent: σ(relIntercept + relSNR·SNRDB + relConf·logit(Confidence) +
// relUnsure·Unsure), clamped to [0.02, 0.9999].
func charReliability(c morse.Char) float64 {
	conf := math.Min(1-1e-4, math.Max(1e-4, c.Confidence))
	z := relIntercept + relSNR*c.SNRDB + relConf*math.Log(conf/(1-conf)) + relUnsure*c.Unsure
	r := 1 / (1 + math.Exp(-z))
	return math.Min(0.9999, math.Max(0.02, r))
}

// textChar is one decoded character as the text method sees it.
type textChar struct {
	tok      string
	match    float64 // score when it is the character sent
	mismatch float64 // score when another was sent
	unread   bool    // "*": scores 0 either way
}

func textChars(chars []morse.Char) []textChar {
	out := make([]textChar, len(chars))
	for i, c := range chars {
		r := charReliability(c)
		out[i] = textChar{tok: c.Text, unread: c.Text == morse.UnknownChar,
			match: math.Log(textAlphabet * r), mismatch: math.Log(textAlphabet * (1 - r) / (textAlphabet - 1))}
	}
	return out
}

func (c textChar) score(p string) float64 {
	switch {
	case c.unread:
		return 0
	case c.tok == p:
		return c.match
	default:
		return c.mismatch
	}
}

// textFit is one hypothesis's best path.
type textFit struct {
	llr float64
	// copies counts the copies on the path holding at least half of the
	// identifier's characters, read right.
	copies int
	// aligned[k][j] is the decoded character (index) read where copy k
	// sends p_j, −1 where the decoder lost it; copies cut by the text's
	// ends leave −1 outside what they hold.
	aligned [][]int
}

// textStep is a Viterbi back-pointer: the state the step came from and
// what it did.
type textStep struct {
	prev int16
	op   int8
}

const (
	opInit   int8 = iota // the path's first state (before any character)
	opBG                 // a background character
	opMatch              // a character read as the copy's next one
	opInsert             // an extra character inside a copy
	opDelete             // the copy's next character lost (no character)
	opFinish             // a complete copy hands back to background
)

// fitText finds the best path of pattern pat through chars (see the text
// method's comment above). States after i characters: 0 background, j
// inside a copy with p_1…p_j behind it.
func fitText(chars []textChar, pat []string, cutStart, cutEnd bool) textFit {
	L, n := len(pat), len(chars)
	if L == 0 || L > MaxIDLen {
		return textFit{}
	}
	logQ := -math.Log(float64(L + 1))
	logDel, logIns := math.Log(textDelete), math.Log(textInsert)
	S := L + 1
	score := make([][]float64, n+1)
	back := make([][]textStep, n+1)
	for i := range score {
		score[i] = make([]float64, S)
		back[i] = make([]textStep, S)
	}
	// Before the first character: background, or, when the transmission
	// was cut by the recording's start, inside a copy begun before it.
	for st := range S {
		back[0][st] = textStep{prev: -1, op: opInit}
		if st > 0 && !cutStart {
			score[0][st] = math.Inf(-1)
		}
	}
	epsilon := func(i int) {
		row, bk := score[i], back[i]
		if row[L] > row[0] { // a complete copy hands back to background
			row[0], bk[0] = row[L], textStep{prev: int16(L), op: opFinish}
		}
		for st := 0; st < L; st++ { // p_{st+1} lost
			v := row[st] + logDel
			if st == 0 {
				v += logQ // a copy starting with its first characters lost
			}
			if v > row[st+1] {
				row[st+1], bk[st+1] = v, textStep{prev: int16(st), op: opDelete}
			}
		}
	}
	epsilon(0)
	for i, c := range chars {
		prev, row, bk := score[i], score[i+1], back[i+1]
		for st := range row {
			row[st] = math.Inf(-1)
		}
		set := func(st int, v float64, from int, op int8) {
			if v > row[st] {
				row[st], bk[st] = v, textStep{prev: int16(from), op: op}
			}
		}
		set(0, prev[0], 0, opBG)
		for st := 0; st < L; st++ {
			v := prev[st] + c.score(pat[st])
			if st == 0 {
				v += logQ
			}
			set(st+1, v, st, opMatch)
		}
		for st := 1; st < L; st++ {
			set(st, prev[st]+logIns, st, opInsert)
		}
		epsilon(i + 1)
	}
	// The end: background (a complete copy has handed back to it), or,
	// when cut by the recording's end, inside a copy.
	bs := 0
	if cutEnd {
		for st := range S {
			if score[n][st] > score[n][bs] {
				bs = st
			}
		}
	}
	fit := textFit{llr: score[n][bs]}
	// Walk the path back, then forward, collecting the copies.
	type step struct {
		to, ci int
		op     int8
		from   int
	}
	var path []step
	i, st := n, bs
	for {
		b := back[i][st]
		if b.op == opInit {
			path = append(path, step{to: st, op: opInit})
			break
		}
		ci := -1
		if b.op == opBG || b.op == opMatch || b.op == opInsert {
			ci = i - 1
		}
		path = append(path, step{to: st, ci: ci, op: b.op, from: int(b.prev)})
		if ci >= 0 {
			i--
		}
		st = int(b.prev)
	}
	var open []int
	flush := func() {
		if open != nil {
			fit.aligned = append(fit.aligned, open)
			open = nil
		}
	}
	for k := len(path) - 1; k >= 0; k-- {
		p := path[k]
		if p.to == 0 {
			flush()
			continue
		}
		if open == nil || (p.from == 0 && p.op != opInit) {
			flush()
			open = make([]int, L)
			for j := range open {
				open[j] = -1
			}
		}
		if p.op == opMatch {
			open[p.to-1] = p.ci
		}
	}
	flush()
	for _, a := range fit.aligned {
		right := 0
		for j, ci := range a {
			if ci >= 0 && chars[ci].tok == pat[j] {
				right++
			}
		}
		if 2*right >= L {
			fit.copies++
		}
	}
	return fit
}

// variantLLRs returns the log-likelihood ratios of the unlisted variants
// of listed ID i (one character changed or left out, not itself listed)
// on its best path fit: for each position j and each character v ≠ p_j,
// fit.llr minus what the copies' characters at j scored as p_j plus what
// they score as v; for p_j left out, what they scored is replaced by the
// cost of an extra character (or the refund of a lost one). Variants
// sharing a score are returned once with their count.
func (m *Matcher) variantLLRs(chars []textChar, i int, fit textFit) (llr []float64, count []int) {
	pat := m.tokens[i]
	listed := func(j int, v string) bool { return m.isListedVariant(i, j, v) }
	for j := range pat {
		// The characters the copies read at j.
		base := 0.0
		seen := map[string]bool{}
		var reads []int
		for _, a := range fit.aligned {
			if ci := a[j]; ci >= 0 {
				base += chars[ci].score(pat[j])
				reads = append(reads, ci)
				if !chars[ci].unread && chars[ci].tok != pat[j] {
					seen[chars[ci].tok] = true
				}
			}
		}
		scoreAs := func(v string) float64 {
			s := 0.0
			for _, ci := range reads {
				s += chars[ci].score(v)
			}
			return s
		}
		// The characters read at j (other than p_j) get their own score;
		// every other character scores as a mismatch everywhere.
		others := 0
		vs := make([]string, 0, len(seen))
		for v := range seen {
			vs = append(vs, v)
		}
		sort.Strings(vs)
		for _, v := range vs {
			if !listed(j, v) {
				llr = append(llr, fit.llr-base+scoreAs(v))
				count = append(count, 1)
			}
		}
		for _, r := range variantAlphabet {
			v := string(r)
			if v == pat[j] || seen[v] || listed(j, v) {
				continue
			}
			others++
		}
		if others > 0 {
			s := 0.0
			for _, ci := range reads {
				if !chars[ci].unread {
					s += chars[ci].mismatch
				}
			}
			llr = append(llr, fit.llr-base+s)
			count = append(count, others)
		}
	}
	// The ID with one character left out (an unlisted ID one character
	// shorter). Leaving out either character of a run of equal ones gives
	// the same ID, so a run counts as one: per copy, a character of the run
	// the decoder lost is no longer missing (the cost of losing it is
	// refunded); when it read them all, the cheapest one becomes an extra
	// character.
	for j0 := 0; j0 < len(pat) && len(pat) > 1; {
		j1 := j0 + 1
		for j1 < len(pat) && pat[j1] == pat[j0] {
			j1++
		}
		if !m.isListedDeletion(i, j0) {
			s := 0.0
			for _, a := range fit.aligned {
				lost, cheapest := false, math.Inf(1)
				for j := j0; j < j1; j++ {
					if a[j] < 0 {
						lost = true
					} else {
						cheapest = math.Min(cheapest, chars[a[j]].score(pat[j]))
					}
				}
				if lost {
					s -= math.Log(textDelete)
				} else {
					s += math.Log(textInsert) - cheapest
				}
			}
			llr = append(llr, fit.llr+s)
			count = append(count, 1)
		}
		j0 = j1
	}
	return llr, count
}

// textEvidence is the text method's evidence for one transmission.
type textEvidence struct {
	fits []textFit
	// vLogMass is log(mean over the unlisted family of exp(LLR)) (−Inf
	// when there is no family).
	vLogMass float64
	post     []float64 // posterior of each listed ID
	pOther   float64   // of the unlisted family
	pNone    float64   // of "none of them"
}

// textPosterior scores every listed ID and its unlisted family on chars
// (cutStart, cutEnd: the transmission was cut by the recording there).
func (m *Matcher) textPosterior(chars []morse.Char, cutStart, cutEnd bool) textEvidence {
	tc := textChars(chars)
	var ev textEvidence
	ev.fits = make([]textFit, len(m.tokens))
	for i, p := range m.tokens {
		ev.fits[i] = fitText(tc, p, cutStart, cutEnd)
	}
	// The unlisted family, each member scored on its listed ID's path.
	var vl, vw []float64
	nv := 0
	for i := range m.tokens {
		l, c := m.variantLLRs(tc, i, ev.fits[i])
		for k := range l {
			vl = append(vl, l[k])
			vw = append(vw, float64(c[k]))
			nv += c[k]
		}
	}
	ev.vLogMass = math.Inf(-1)
	if nv > 0 {
		mx := math.Inf(-1)
		for _, v := range vl {
			mx = math.Max(mx, v)
		}
		s := 0.0
		for k, v := range vl {
			s += vw[k] * math.Exp(v-mx)
		}
		ev.vLogMass = mx + math.Log(s/float64(nv))
	}
	ev.post, ev.pOther, ev.pNone = ev.posterior(textTemperature, textOtherPrior)
	return ev
}

// posterior is the softmax over the listed IDs (prior 1 each), "none"
// (log-likelihood ratio 0, prior 1) and the unlisted family (prior
// other, shared) of the log-likelihood ratios divided by temp.
func (ev textEvidence) posterior(temp, other float64) (post []float64, pOther, pNone float64) {
	K := len(ev.fits)
	z := make([]float64, K, K+2)
	for i, f := range ev.fits {
		z[i] = f.llr / temp
	}
	z = append(z, 0)
	if !math.IsInf(ev.vLogMass, -1) {
		// log mean exp(l/T) ≈ (log mean exp l)/T is exact when one member
		// dominates, which is the case that matters.
		z = append(z, ev.vLogMass/temp+math.Log(other))
	}
	p := softmax(z)
	post = p[:K]
	pNone = p[K]
	if len(p) > K+1 {
		pOther = p[K+1]
	}
	return post, pOther, pNone
}

// isListedDeletion reports whether ID i with character j left out is
// itself a listed ID.
func (m *Matcher) isListedDeletion(i, j int) bool {
	toks := m.tokens[i]
	key := append(append([]string(nil), toks[:j]...), toks[j+1:]...)
	_, ok := m.keys[strings.Join(key, " ")]
	return ok
}

// isListedVariant reports whether ID i with character j replaced by v is
// itself a listed ID.
func (m *Matcher) isListedVariant(i, j int, v string) bool {
	toks := m.tokens[i]
	key := make([]string, len(toks))
	copy(key, toks)
	key[j] = v
	_, ok := m.keys[strings.Join(key, " ")]
	return ok
}

// Repeated names a transmission without a list: the word (three or more
// characters between word breaks, none unreadable) read most often, when
// it was read at least twice. Its confidence is the chance that at least
// one of its copies was read right, 1 − Π(1 − Π r) over the copies and
// their characters' reliabilities (charReliability): copies that agree
// are seldom all misread the same way. Ties go to the word read first.
// It returns "", 0, 0 when no word repeats.
func Repeated(chars []morse.Char) (word string, confidence float64, copies int) {
	return RepeatedWord(Words(chars), 2)
}

// RepeatedWord is the word of ws read most often, when it was read at
// least minCopies times, with the chance that at least one of its copies
// was read right, 1 − Π(1 − Confidence) (ties: the word read first); "",
// 0, 0 otherwise. Repeated uses it on one transmission; naming without a
// list uses it on the words of all the bursts of one fingerprint.
func RepeatedWord(ws []Word, minCopies int) (word string, confidence float64, copies int) {
	type agg struct {
		n    int
		miss float64
	}
	seen := map[string]*agg{}
	var order []string
	for _, w := range ws {
		e := seen[w.Text]
		if e == nil {
			e = &agg{miss: 1}
			seen[w.Text] = e
			order = append(order, w.Text)
		}
		e.n++
		e.miss *= 1 - w.Confidence
	}
	for _, k := range order {
		if e := seen[k]; e.n >= minCopies && e.n > copies {
			word, copies, confidence = k, e.n, 1-e.miss
		}
	}
	return word, confidence, copies
}

// Word is a decoded word with the chance it was read right.
type Word struct {
	Text string
	// Confidence is the product of its characters' reliabilities
	// (charReliability).
	Confidence float64
}

// Words splits decoded characters into words at word breaks and returns
// those of three or more characters with none unreadable.
func Words(chars []morse.Char) []Word {
	var out []Word
	start := 0
	end := func(i int) {
		cs := chars[start:i]
		start = i
		if len(cs) < 3 {
			return
		}
		var b strings.Builder
		p := 1.0
		for _, c := range cs {
			if c.Text == morse.UnknownChar {
				return
			}
			b.WriteString(c.Text)
			p *= charReliability(c)
		}
		out = append(out, Word{b.String(), p})
	}
	for i, c := range chars {
		if i > 0 && c.WordBefore {
			end(i)
		}
	}
	end(len(chars))
	return out
}
