package idmatch

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"nullseek/ident/morse"
	"os"
	"sort"
	"strings"
	"sync"
)

// Unknown is the identifier of a burst nobody could name: the Result.ID
// when no listed identifier is convincing, and the ID every later stage
// (fingerprints, schedule, outputs) writes for such a burst. The empty
// string is read the same way (see Known).
const Unknown = "unknown"

// Known reports whether id names someone: not empty (after trimming white
// space) and not Unknown (compared case-insensitively).
func Known(id string) bool {
	id = strings.TrimSpace(id)
	return id != "" && !strings.EqualFold(id, Unknown)
}

// DefaultMinConfidence is the confidence below which Result answers
// Unknown instead of guessing.
const DefaultMinConfidence = 0.9

// Score is one listed identifier's evidence for a burst.
type Score struct {
	ID string
	// TextProb and TemplateProb are the identifier's share (0–1) of the
	// text and template likelihoods among the listed IDs; TemplateProb is
	// 0 when the template method did not run.
	TextProb, TemplateProb float64
	// TextCost is the weighted edit distance between the decoded text and
	// the identifier repeated (partial copies at the edges are free).
	TextCost float64
	// Copies is how many copies the template method fitted into the burst
	// (copies whose key-down carries more than the midpoint level).
	Copies int
}

// Result is the identifier a burst was matched to.
type Result struct {
	// ID is the listed identifier, or Unknown.
	ID string
	// Confidence (0–1) is the winner's posterior share against the other
	// listed IDs (softmax of log-likelihoods; see Matcher.Match).
	Confidence float64
	// Method is "text" or "template" ("" when nothing could be scored).
	Method string
	// Unlisted (0–1, template method only) is the posterior that the burst
	// holds no listed ID: noise, or an identifier not on the list.
	Unlisted float64
	// WPM is the speed of the best template (template method only).
	WPM      float64
	Scores   []Score
	Warnings []string
}

// Matcher matches decoded bursts to a list of known identifiers.
type Matcher struct {
	ids    []string   // as given, trimmed
	tokens [][]string // Morse characters of each ID, spaces dropped
	// MinConfidence is the least confidence reported as a match
	// (DefaultMinConfidence unless changed).
	MinConfidence float64

	planOnce  sync.Once
	templates templatePlan // templates, built on first use
}

// ErrBadList is wrapped by errors about the identifier list.
var ErrBadList = errors.New("bad identifier list")

// MaxIDs is the longest identifier list a Matcher takes: an event's
// transmitters, a club's beacons or a region's repeaters, with room to
// spare. Matching costs grow with the list (see BenchmarkMatchListSize).
const MaxIDs = 1000

// MaxIDLen is the most Morse characters one identifier may have. An
// identifier is a call with a suffix, such as N0CALL/12; 32 characters
// take about 20 s at 20 WPM, longer than any beacon's identifier.
const MaxIDLen = 32

// parsedList is a checked identifier list: the IDs as given (trimmed) and
// their decoder tokens (spaces dropped).
type parsedList struct {
	ids    []string
	tokens [][]string
}

// listBuilder checks identifiers one at a time (see parseList).
type listBuilder struct {
	parsedList
	seen map[string]string
}

// add checks one identifier (the n-th, from 1) against the rules and the
// ones added before.
func (lb *listBuilder) add(raw string, n int) error {
	if len(lb.ids) >= MaxIDs {
		return fmt.Errorf("more than %d identifiers; split the list by event or band: %w", MaxIDs, ErrBadList)
	}
	id := strings.TrimSpace(raw)
	if id == "" {
		return fmt.Errorf("identifier %d is empty: %w", n, ErrBadList)
	}
	if strings.ContainsFunc(id, func(r rune) bool { return r < 0x20 || r == 0x7f }) {
		return fmt.Errorf("identifier %q contains a control character or line break: %w", id, ErrBadList)
	}
	if len(id) > 8*MaxIDLen { // no need to tokenise a megabyte to refuse it
		return fmt.Errorf("identifier %.40q… is %d bytes long; at most %d characters are accepted: %w", id, len(id), MaxIDLen, ErrBadList)
	}
	keys, err := morse.Tokens(id)
	if err != nil {
		return fmt.Errorf("identifier %q: %w", id, err)
	}
	var toks []string
	for _, k := range keys {
		if k != " " {
			toks = append(toks, k)
		}
	}
	if len(toks) > MaxIDLen {
		return fmt.Errorf("identifier %.40q has %d characters; at most %d are accepted: %w", id, len(toks), MaxIDLen, ErrBadList)
	}
	key := strings.Join(toks, "")
	if lb.seen == nil {
		lb.seen = map[string]string{}
	}
	if prev, ok := lb.seen[key]; ok {
		return fmt.Errorf("identifier %q duplicates %q (Morse cannot tell them apart): %w", id, prev, ErrBadList)
	}
	lb.seen[key] = id
	lb.ids = append(lb.ids, id)
	lb.tokens = append(lb.tokens, toks)
	return nil
}

// parseList checks ids: at least one and at most MaxIDs, none empty, none
// longer than MaxIDLen characters, no control characters, nothing Morse
// cannot send, no two that Morse cannot tell apart (compared after mapping
// to the decoder's tokens, so case and spacing do not matter).
func parseList(ids []string) (parsedList, error) {
	if len(ids) == 0 {
		return parsedList{}, fmt.Errorf("no identifiers given: %w", ErrBadList)
	}
	if len(ids) > MaxIDs {
		return parsedList{}, fmt.Errorf("%d identifiers; at most %d are accepted (split the list by event or band): %w", len(ids), MaxIDs, ErrBadList)
	}
	var lb listBuilder
	for i, raw := range ids {
		if err := lb.add(raw, i+1); err != nil {
			return parsedList{}, err
		}
	}
	return lb.parsedList, nil
}

// CheckList checks an identifier list as New does, without building a
// matcher.
func CheckList(ids []string) error {
	_, err := parseList(ids)
	return err
}

// New checks ids (see CheckList) and prepares a matcher. Errors name the
// ID and what is wrong with it.
func New(ids []string) (*Matcher, error) {
	p, err := parseList(ids)
	if err != nil {
		return nil, err
	}
	return &Matcher{ids: p.ids, tokens: p.tokens, MinConfidence: DefaultMinConfidence}, nil
}

// IDs returns the identifiers in list order.
func (m *Matcher) IDs() []string { return append([]string(nil), m.ids...) }

// ParseList splits a comma-separated list such as "N0CALL/1,N0CALL/2"
// and checks it as New does.
func ParseList(s string) ([]string, error) {
	var ids []string
	for _, p := range strings.Split(s, ",") {
		ids = append(ids, strings.TrimSpace(p))
	}
	if len(ids) == 1 && ids[0] == "" {
		return nil, fmt.Errorf("empty identifier list: %w", ErrBadList)
	}
	if err := CheckList(ids); err != nil {
		return nil, err
	}
	return ids, nil
}

// ReadList reads identifiers one per line; blank lines and text after
// '#' are ignored. Errors name the line.
func ReadList(r io.Reader) ([]string, error) {
	var lb listBuilder
	sc := bufio.NewScanner(r)
	line := 0
	for sc.Scan() {
		line++
		t := sc.Text()
		if i := strings.IndexByte(t, '#'); i >= 0 {
			t = t[:i]
		}
		t = strings.TrimSpace(t)
		if t == "" {
			continue
		}
		if err := lb.add(t, len(lb.ids)+1); err != nil {
			return nil, fmt.Errorf("line %d: %w", line, err)
		}
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("read identifier list: %w", err)
	}
	if len(lb.ids) == 0 {
		return nil, fmt.Errorf("identifier list has no entries: %w", ErrBadList)
	}
	return lb.ids, nil
}

// LoadFile reads an identifier file (see ReadList).
func LoadFile(path string) ([]string, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("identifier file: %w", err)
	}
	defer f.Close()
	ids, err := ReadList(f)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return ids, nil
}

// code returns the dots and dashes of a token the decoder writes ("" for
// anything else).
func code(tok string) string {
	c, _ := morse.Code(tok)
	return c
}

// textLambda converts weighted edit cost to log-likelihood (nats per
// error): a wrong character is taken to be about e^3 ≈ 20 times less
// likely than a right one, a deliberately modest figure so a single
// garbled digit does not give a near-certain answer.
const textLambda = 3.0

// charCost is the cost of a decoded character that does not fit the
// identifier: cheaper when the decoder itself was unsure.
func charCost(c morse.Char) float64 {
	if c.Text == morse.UnknownChar {
		return 0.5
	}
	return 0.4 + 0.6*c.Confidence
}

// cyclicCost is the least weighted edit cost of reading chars as copies of
// pat repeated, starting and ending anywhere in the pattern (partial copies
// at the edges are free). Substituted or extra decoded characters cost
// charCost, missing pattern characters cost 1.
func cyclicCost(chars []morse.Char, pat []string) float64 {
	P := len(pat)
	cur := make([]float64, P)
	next := make([]float64, P)
	relaxDeletions := func(row []float64) {
		for pass := 0; pass < 2; pass++ {
			for j := 0; j < P; j++ {
				if v := row[j] + 1; v < row[(j+1)%P] {
					row[(j+1)%P] = v
				}
			}
		}
	}
	for _, c := range chars {
		for j := range next {
			next[j] = math.Inf(1)
		}
		cc := charCost(c)
		for j := 0; j < P; j++ {
			sub := cc
			if c.Text == pat[j] {
				sub = 0
			}
			if v := cur[j] + sub; v < next[(j+1)%P] {
				next[(j+1)%P] = v
			}
			if v := cur[j] + cc; v < next[j] {
				next[j] = v
			}
		}
		relaxDeletions(next)
		cur, next = next, cur
	}
	best := math.Inf(1)
	for _, v := range cur {
		best = math.Min(best, v)
	}
	return best
}

// editDistance is the plain Levenshtein distance between token slices.
func editDistance(a, b []string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			s := prev[j-1]
			if a[i-1] != b[j-1] {
				s++
			}
			cur[j] = min(s, prev[j]+1, cur[j-1]+1)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

// occurrence is a stretch of decoded text read as one whole copy of an ID.
type occurrence struct {
	id, start, end, dist int
}

// occurrences finds non-overlapping, nearly exact whole copies of the IDs
// in the decoded tokens (distance ≤ 15 % of the ID, at least 1), each
// credited to the one ID that fits it strictly best.
func (m *Matcher) occurrences(toks []string) []occurrence {
	var cands []occurrence
	for s := range toks {
		for i, pat := range m.tokens {
			P := len(pat)
			maxD := max(1, int(0.15*float64(P)))
			for l := max(1, P-maxD); l <= P+maxD && s+l <= len(toks); l++ {
				d := editDistance(toks[s:s+l], pat)
				if d > maxD {
					continue
				}
				// Credit it only if no other ID fits this stretch as well.
				unique := true
				for j, other := range m.tokens {
					if j != i && editDistance(toks[s:s+l], other) <= d {
						unique = false
						break
					}
				}
				if unique {
					cands = append(cands, occurrence{i, s, s + l, d})
				}
			}
		}
	}
	sort.SliceStable(cands, func(a, b int) bool {
		if cands[a].dist != cands[b].dist {
			return cands[a].dist < cands[b].dist
		}
		return cands[a].end-cands[a].start > cands[b].end-cands[b].start
	})
	used := make([]bool, len(toks))
	var out []occurrence
	for _, c := range cands {
		free := true
		for k := c.start; k < c.end; k++ {
			free = free && !used[k]
		}
		if !free {
			continue
		}
		for k := c.start; k < c.end; k++ {
			used[k] = true
		}
		out = append(out, c)
	}
	return out
}

// softmax turns log-likelihoods into shares.
func softmax(ll []float64) []float64 {
	mx := math.Inf(-1)
	for _, v := range ll {
		mx = math.Max(mx, v)
	}
	p := make([]float64, len(ll))
	s := 0.0
	for i, v := range ll {
		p[i] = math.Exp(v - mx)
		s += p[i]
	}
	for i := range p {
		p[i] /= s
	}
	return p
}

// bestTwo returns the indices of the largest and second largest values.
func bestTwo(p []float64) (int, int) {
	a, b := 0, -1
	for i := 1; i < len(p); i++ {
		if p[i] > p[a] {
			a, b = i, a
		} else if b < 0 || p[i] > p[b] {
			b = i
		}
	}
	return a, b
}

// Match decides which listed identifier sent a burst.
//
// Text first: the decoded characters are aligned against each ID repeated
// (weighted edit distance; partial copies at the burst edges are free;
// unsure characters cost less), costs become log-likelihoods at 3 nats per
// error and a softmax over the list gives each ID's share. When the text
// is too short or garbled for a confident answer, the template method
// (see MatchEnvelope) scores each ID's ideal keying against d.Envelope on
// its own: it takes no speed, timing or noise level from the decoded
// text. Below MinConfidence the answer is Unknown with a warning naming
// the best guess. Two different IDs found whole in one burst give the one
// with more copies and a warning naming both. A clean decode that fits no
// listed ID is reported as Unknown without trying the template.
func (m *Matcher) Match(d morse.Decoded) Result {
	return m.match(d, d.Envelope, d.EnvRate)
}

// wordTemplates returns templates of up to three of the longest distinct
// words of a decoded text (≥ 3 characters, no unreadable ones) that are
// not listed IDs.
func (m *Matcher) wordTemplates(text string) []template {
	listed := map[string]bool{}
	for _, toks := range m.tokens {
		var cs []string
		for _, t := range toks {
			cs = append(cs, code(t))
		}
		listed[strings.Join(cs, " ")] = true
	}
	words := strings.Fields(text)
	sort.SliceStable(words, func(a, b int) bool { return len(words[a]) > len(words[b]) })
	var out []template
	for _, w := range words {
		keys, err := morse.Tokens(w)
		if err != nil || len(keys) < 3 {
			continue
		}
		var cs []string
		for _, k := range keys {
			cs = append(cs, code(k))
		}
		key := strings.Join(cs, " ")
		if listed[key] {
			continue
		}
		listed[key] = true
		out = append(out, templateFromCodes(cs))
		if len(out) == 3 {
			break
		}
	}
	return out
}

// match is Match with the template method run on env (power at envRate).
func (m *Matcher) match(d morse.Decoded, env []float32, envRate float64) Result {
	res := Result{ID: Unknown}
	res.Scores = make([]Score, len(m.ids))
	for i, id := range m.ids {
		res.Scores[i].ID = id
	}
	var chars []morse.Char
	var toks []string
	for _, c := range d.Chars {
		chars = append(chars, c)
		toks = append(toks, c.Text)
	}
	minLen := math.MaxInt
	for _, p := range m.tokens {
		minLen = min(minLen, len(p))
	}

	// Two different IDs in one burst?
	occ := m.occurrences(toks)
	count := make([]int, len(m.ids))
	for _, o := range occ {
		count[o.id]++
	}
	var present []int
	for i, c := range count {
		if c > 0 {
			present = append(present, i)
		}
	}

	// Text likelihoods.
	ll := make([]float64, len(m.ids))
	for i, p := range m.tokens {
		c := cyclicCost(chars, p)
		res.Scores[i].TextCost = c
		ll[i] = -textLambda * c
	}
	// The "other" hypothesis: an identifier not on the list, which fits all
	// but 0.75 of a character per copy of the listed ones.
	pBest := len(m.tokens[0])
	for i, c := range ll {
		if c > ll[0] {
			pBest = len(m.tokens[i])
		}
	}
	nCopies := math.Max(1, float64(len(chars))/float64(pBest))
	pt := softmax(append(ll, -textLambda*0.75*nCopies))
	for i := range m.ids {
		res.Scores[i].TextProb = pt[i]
	}
	pt = pt[:len(m.ids)]
	if len(present) >= 2 {
		sort.SliceStable(present, func(a, b int) bool { return count[present[a]] > count[present[b]] })
		var names []string
		for _, i := range present {
			names = append(names, fmt.Sprintf("%s ×%d", m.ids[i], count[i]))
		}
		w := present[0]
		res.ID, res.Method = m.ids[w], "text"
		res.Confidence = float64(count[w]) / float64(len(occ))
		res.Warnings = append(res.Warnings, "more than one identifier in one burst: "+strings.Join(names, ", "))
		return res
	}
	bt, _ := bestTwo(pt)
	textOK := len(chars) >= (minLen*3+4)/5 && res.Scores[bt].TextCost <= 0.3*float64(len(chars))
	if textOK && pt[bt] >= m.MinConfidence {
		res.ID, res.Confidence, res.Method = m.ids[bt], pt[bt], "text"
		return res
	}

	// A clean decode that fits no listed ID points to an unlisted ID: its
	// words join the template method's unlisted candidates, so the keying
	// decides between them and the listed IDs (a decoder can be confidently
	// wrong on noise, so the text alone does not settle it). An exact read
	// of a listed ID that is merely too short for MinConfidence is no such
	// sign.
	meanConf, nUnknown := 0.0, 0
	for _, c := range chars {
		meanConf += c.Confidence
		if c.Text == morse.UnknownChar {
			nUnknown++
		}
	}
	if len(chars) > 0 {
		meanConf /= float64(len(chars))
	}
	clean := len(chars) >= (minLen*3+4)/5 && meanConf >= 0.6 && float64(nUnknown) < 0.1*float64(len(chars)) && res.Scores[bt].TextCost >= 0.5
	var extra []template
	if clean {
		extra = m.wordTemplates(d.Text)
	}

	// Template method.
	tm, _ := m.matchEnvelope(env, envRate, extra)
	if tm.Method == "" {
		if clean {
			res.Method = "text"
			res.Warnings = append(res.Warnings, fmt.Sprintf("decoded text %q fits no listed identifier well enough (best %s at %.2f)", d.Text, m.ids[bt], pt[bt]))
			return res
		}
		res.Warnings = append(res.Warnings, tm.Warnings...)
		if len(chars) < (minLen*3+4)/5 {
			res.Warnings = append(res.Warnings, fmt.Sprintf("burst too short to hold an identifier (%d characters decoded, shortest ID has %d)", len(chars), minLen))
		}
		res.Warnings = append(res.Warnings, fmt.Sprintf("best text guess %s at %.2f is below %.2f", m.ids[bt], pt[bt], m.MinConfidence))
		return res
	}
	if clean {
		res.Warnings = append(res.Warnings, fmt.Sprintf("decoded text %q fits no listed identifier (best %s at %.2f); keying template decides", d.Text, m.ids[bt], pt[bt]))
	}
	for i := range tm.Scores {
		tm.Scores[i].TextProb = res.Scores[i].TextProb
		tm.Scores[i].TextCost = res.Scores[i].TextCost
	}
	tm.Warnings = append(res.Warnings, tm.Warnings...)
	return tm
}
