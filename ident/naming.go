package ident

import (
	"math"
	"sort"
	"strings"

	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
	"nullseek/ident/morse"
)

// RepeatedWord names a transmission without a list: the word sent most
// often, when it was sent at least twice (words of three or more
// characters, none unreadable). The confidence is the mean character
// confidence times the word's share of the words; the method is
// "repeated-text". Otherwise it returns idmatch.Unknown, 0, "".
func RepeatedWord(d morse.Decoded) (ident string, confidence float64, method string) {
	words := strings.Fields(d.Text)
	count := map[string]int{}
	for _, w := range words {
		if len([]rune(w)) >= 3 && !strings.Contains(w, morse.UnknownChar) {
			count[w]++
		}
	}
	best, n := "", 0
	keys := make([]string, 0, len(count))
	for k := range count {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if count[k] > n {
			best, n = k, count[k]
		}
	}
	if n < 2 {
		return idmatch.Unknown, 0, ""
	}
	var conf float64
	for _, c := range d.Chars {
		conf += c.Confidence
	}
	if len(d.Chars) > 0 {
		conf /= float64(len(d.Chars))
	}
	share := float64(n) / float64(len(words))
	return best, math.Min(1, conf*share), "repeated-text"
}

// Attribution is what naming decided for one burst.
type Attribution struct {
	// Transmitter is the fingerprint cluster's label ("T1", …).
	Transmitter string
	// Ident, Confidence and Method are the burst's own identification,
	// or, when that was Unknown and its cluster has an identifier, the
	// cluster's (Method "fingerprint", Confidence the cluster's share).
	Ident      string
	Confidence float64
	Method     string
	// Note explains a change ("" when there was none).
	Note string
}

// Naming is the outcome of Name.
type Naming struct {
	// Bursts is parallel to Name's input.
	Bursts   []Attribution
	Clusters fingerprint.Result
}

// Name groups the bursts of a recording into transmitters by fingerprint
// (fingerprint.Cluster with Options.Cluster) and gives a burst whose own
// identifier is unknown its cluster's identifier.
func (id *Identifier) Name(obs []fingerprint.Observation) (Naming, error) {
	cr, err := fingerprint.Cluster(obs, id.opts.Cluster)
	if err != nil {
		return Naming{}, err
	}
	nm := Naming{Clusters: cr, Bursts: make([]Attribution, len(obs))}
	share := map[string]float64{}
	for _, c := range cr.Clusters {
		share[c.Label] = c.IdentShare
	}
	for i, o := range obs {
		a := Attribution{Transmitter: cr.Labels[i], Ident: o.Ident, Confidence: o.IdentConfidence, Method: o.IdentMethod}
		if !idmatch.Known(o.Ident) {
			a.Ident = idmatch.Unknown
			if idmatch.Known(cr.Idents[i]) {
				a.Ident, a.Method, a.Confidence = cr.Idents[i], "fingerprint", share[cr.Labels[i]]
				a.Note = "identifier not readable; attributed to " + cr.Labels[i] + " by carrier offset and tone"
			}
		}
		nm.Bursts[i] = a
	}
	return nm, nil
}
