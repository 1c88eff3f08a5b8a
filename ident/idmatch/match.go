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
	// TextProb and TemplateProb are the identifier's posterior (0–1) by
	// the text and the template method; TemplateProb is 0 when the
	// template method did not run.
	TextProb, TemplateProb float64
	// TextLLR is the text method's log-likelihood ratio (nats) of the ID
	// against all-background text, summed over its copies; TextCopies how
	// many copies its best reading holds (at least half the characters
	// right).
	TextLLR    float64
	TextCopies int
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
	WPM float64
	// Others are further listed IDs that own whole copies in the same
	// burst (two transmitters on the air together), most copies first.
	Others   []string
	Scores   []Score
	Warnings []string
}

// Matcher matches decoded bursts to a list of known identifiers.
type Matcher struct {
	ids    []string       // as given, trimmed
	tokens [][]string     // Morse characters of each ID, spaces dropped
	keys   map[string]int // tokens joined by " " → index
	// MinConfidence is the least confidence reported as a match
	// (DefaultMinConfidence unless changed).
	MinConfidence float64

	planOnce  sync.Once
	templates *templatePlan // templates, built on first use
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
	mt := &Matcher{ids: p.ids, tokens: p.tokens, MinConfidence: DefaultMinConfidence, keys: map[string]int{}}
	for i, t := range p.tokens {
		mt.keys[strings.Join(t, " ")] = i
	}
	return mt, nil
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
// Text first: the decoded characters are read as background text with
// copies of each listed ID among it (see the text method in text.go), so
// an ID found as a token or near-token inside longer text ("DE N0CALL/2",
// "TN0CALL/2", a trailing "K") counts, and every copy adds evidence. The
// posterior weighs the listed IDs against the unlisted family (IDs one
// character away) and "none". When it is below MinConfidence, the
// template method (see MatchEnvelope) scores each ID's ideal keying
// against d.Envelope on its own: it takes no speed, timing or noise level
// from the decoded text; the words of a clean decode that fits no listed
// ID join it as unlisted candidates. Below MinConfidence the answer is
// Unknown with a warning naming the best guess. Two different IDs each
// owning a whole copy in one burst give the one with more copies and a
// warning naming both.
func (m *Matcher) Match(d morse.Decoded) Result {
	return m.Identify(Evidence{Decoded: d, Envelope: d.Envelope, EnvRate: d.EnvRate})
}

// Evidence is what the matcher weighs for one transmission.
type Evidence struct {
	// Decoded is the free decoding (its characters, text and long tones;
	// the zero value when nothing decoded). Its times share the
	// envelope's time base.
	Decoded morse.Decoded
	// Envelope is the key-down power envelope the template method scores
	// (linear, any scale) at EnvRate samples a second; nil for the text
	// method alone.
	Envelope []float32
	EnvRate  float64
	// CutStart and CutEnd say the recording began or ended inside the
	// transmission: a copy of the ID cut there counts what it holds.
	CutStart, CutEnd bool
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
	return m.Identify(Evidence{Decoded: d, Envelope: env, EnvRate: envRate})
}

// Identify names a transmission from its evidence, as Match describes.
func (m *Matcher) Identify(e Evidence) Result {
	d, env, envRate := e.Decoded, e.Envelope, e.EnvRate
	res := Result{ID: Unknown}
	res.Scores = make([]Score, len(m.ids))
	ev := m.textPosterior(d.Chars, e.CutStart, e.CutEnd)
	for i, id := range m.ids {
		res.Scores[i] = Score{ID: id, TextProb: ev.post[i], TextLLR: ev.fits[i].llr, TextCopies: ev.fits[i].copies}
	}
	res.Unlisted = ev.pOther + ev.pNone

	// Two different IDs in one burst?
	owned := m.ownedCopies(d.Chars, ev.fits)
	var present []int
	total := 0
	for i, c := range owned {
		if c > 0 {
			present = append(present, i)
			total += c
		}
	}
	if len(present) >= 2 {
		sort.SliceStable(present, func(a, b int) bool { return owned[present[a]] > owned[present[b]] })
		var names []string
		for _, i := range present {
			names = append(names, fmt.Sprintf("%s ×%d", m.ids[i], owned[i]))
		}
		w := present[0]
		for _, i := range present[1:] {
			res.Others = append(res.Others, m.ids[i])
		}
		res.ID, res.Method = m.ids[w], "text"
		res.Confidence = float64(owned[w]) / float64(total)
		res.Warnings = append(res.Warnings, "more than one identifier in one burst: "+strings.Join(names, ", "))
		return res
	}
	bt, _ := bestTwo(ev.post)
	if ev.post[bt] >= m.MinConfidence {
		res.ID, res.Confidence, res.Method = m.ids[bt], ev.post[bt], "text"
		return res
	}

	// A clean decode that fits no listed ID points to an unlisted ID: its
	// words join the template method's unlisted candidates, so the keying
	// decides between them and the listed IDs (a decoder can be confidently
	// wrong on noise, so the text alone does not settle it).
	clean := cleanRead(d.Chars) && ev.pOther+ev.pNone > 0.5
	var extra []template
	if clean {
		extra = m.wordTemplates(d.Text)
	}

	// Template method.
	tm, _ := m.matchEnvelope(env, envRate, extra, d.LongTones())
	if tm.Method == "" {
		if clean {
			res.Method = "text"
			res.Warnings = append(res.Warnings, fmt.Sprintf("decoded text %q fits no listed identifier well enough (best %s at %.2f)", d.Text, m.ids[bt], ev.post[bt]))
			return res
		}
		res.Warnings = append(res.Warnings, tm.Warnings...)
		res.Warnings = append(res.Warnings, fmt.Sprintf("best text guess %s at %.2f is below %.2f", m.ids[bt], ev.post[bt], m.MinConfidence))
		return res
	}
	if clean {
		res.Warnings = append(res.Warnings, fmt.Sprintf("decoded text %q fits no listed identifier (best %s at %.2f); keying template decides", d.Text, m.ids[bt], ev.post[bt]))
	}
	for i := range tm.Scores {
		tm.Scores[i].TextProb = res.Scores[i].TextProb
		tm.Scores[i].TextLLR = res.Scores[i].TextLLR
		tm.Scores[i].TextCopies = res.Scores[i].TextCopies
	}
	tm.Warnings = append(res.Warnings, tm.Warnings...)
	return tm
}

// cleanRead reports whether a decode is long enough and read with enough
// certainty to say what it is not: at least three characters, under 10 %
// unreadable, mean calibrated reliability at least 0.9.
func cleanRead(chars []morse.Char) bool {
	if len(chars) < 3 {
		return false
	}
	sum, unread := 0.0, 0
	for _, c := range chars {
		sum += charReliability(c)
		if c.Text == morse.UnknownChar {
			unread++
		}
	}
	return sum/float64(len(chars)) >= 0.9 && 10*unread < len(chars)
}

// ownedCopies counts, per listed ID, the whole copies it owns: copies on
// its best path read with at most max(1, 15 %) of its characters wrong or
// lost, that no other ID reads with fewer errors over the same characters.
func (m *Matcher) ownedCopies(chars []morse.Char, fits []textFit) []int {
	type cp struct {
		id, lo, hi, errs int
	}
	var cps []cp
	for i, f := range fits {
		pat := m.tokens[i]
		maxErr := max(1, int(0.15*float64(len(pat))))
		for _, a := range f.aligned {
			lo, hi, errs := len(chars), -1, 0
			for j, ci := range a {
				if ci < 0 || chars[ci].Text != pat[j] {
					errs++
				}
				if ci >= 0 {
					lo, hi = min(lo, ci), max(hi, ci)
				}
			}
			if errs <= maxErr && hi >= 0 && a[0] >= 0 && a[len(a)-1] >= 0 {
				cps = append(cps, cp{i, lo, hi, errs})
			}
		}
	}
	owned := make([]int, len(fits))
	for _, c := range cps {
		best := true
		for _, o := range cps {
			if o.id != c.id && o.lo <= c.hi && c.lo <= o.hi && o.errs <= c.errs {
				best = false
				break
			}
		}
		if best {
			owned[c.id]++
		}
	}
	return owned
}

// LoadList reads the --ids value: "" is no list, "@FILE" a file of one
// identifier a line (ReadList), anything else a comma-separated list
// (ParseList). The error starts with the file's name for a file.
func LoadList(spec string) ([]string, error) {
	switch {
	case spec == "":
		return nil, nil
	case spec[0] == '@':
		fh, err := os.Open(spec[1:])
		if err != nil {
			return nil, err
		}
		defer fh.Close()
		ids, err := ReadList(fh)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", spec[1:], err)
		}
		return ids, nil
	}
	return ParseList(spec)
}
