package ident

import (
	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
	"strings"
)

// Attribution is what naming decided for one burst.
type Attribution struct {
	// Transmitter is the fingerprint cluster's label ("T1", …; "" for a
	// burst cut by the recording that fits no transmitter).
	Transmitter string
	// Ident, Confidence and Method are the burst's own identification,
	// or, when that was Unknown and its cluster has an identifier, the
	// cluster's: Method "fingerprint" (the cluster's listed ID,
	// Confidence its share) or "repeated-text" (without a list, the word
	// the cluster's bursts repeat).
	Ident      string
	Confidence float64
	Method     string
	// Note explains a change ("" when there was none).
	Note string
}

// ListedHeard is one listed identifier and how many bursts were named
// with it.
type ListedHeard struct {
	ID     string `json:"id"`
	Bursts int    `json:"bursts"`
}

// Naming is the outcome of Name.
type Naming struct {
	// Bursts is parallel to Name's input.
	Bursts   []Attribution
	Clusters fingerprint.Result
	// Listed is Options.IDs with their burst counts; Heard and NotHeard
	// split it (list order).
	Listed          []ListedHeard
	Heard, NotHeard []string
}

// Name groups the bursts of a recording into transmitters by fingerprint
// (fingerprint.Cluster with Options.Cluster; bursts cut by the recording
// or split from an overlap join the transmitter they fit) and names them:
// a burst whose own identifier is unknown gets its cluster's. A cluster
// without one is named by the text its bursts repeat (discovery without a
// list): the word read in at least two of its bursts (words holds each
// burst's decoded words, parallel to obs; nil for none), with the chance
// that one of its readings was right (idmatch.RepeatedWord). Listed IDs
// are counted as heard or never heard.
func (id *Identifier) Name(obs []fingerprint.Observation, words [][]idmatch.Word) (Naming, error) {
	cr, err := fingerprint.Cluster(obs, id.opts.Cluster)
	if err != nil {
		return Naming{}, err
	}
	nm := Naming{Clusters: cr, Bursts: make([]Attribution, len(obs))}
	share := map[string]float64{}
	for _, c := range cr.Clusters {
		share[c.Label] = c.IdentShare
	}
	// Discovery: a cluster without an identifier, named by the word its
	// bursts repeat (one reading per burst: a word counts once a burst).
	found := map[string]idmatch.Word{}
	for ci, c := range cr.Clusters {
		if idmatch.Known(c.Ident) || words == nil {
			continue
		}
		var ws []idmatch.Word
		for _, i := range c.Members {
			if i >= len(words) {
				continue
			}
			best := map[string]idmatch.Word{}
			for _, w := range words[i] {
				if b, ok := best[w.Text]; !ok || w.Confidence > b.Confidence {
					best[w.Text] = w
				}
			}
			for _, w := range words[i] {
				if b, ok := best[w.Text]; ok {
					ws = append(ws, b)
					delete(best, w.Text)
				}
			}
		}
		if w, conf, n := idmatch.RepeatedWord(ws, 2); n >= 2 {
			found[c.Label] = idmatch.Word{Text: w, Confidence: conf}
			nm.Clusters.Clusters[ci].Ident = w
			nm.Clusters.Clusters[ci].IdentShare = conf
		}
	}
	for i, o := range obs {
		a := Attribution{Transmitter: cr.Labels[i], Ident: o.Ident, Confidence: o.IdentConfidence, Method: o.IdentMethod}
		if cr.Labels[i] == "" {
			a.Note = cr.Notes[i] // left unattributed
		}
		if !idmatch.Known(o.Ident) {
			a.Ident, a.Confidence, a.Method = idmatch.Unknown, 0, ""
			switch w, ok := found[cr.Labels[i]]; {
			case ok:
				a.Ident, a.Method, a.Confidence = w.Text, "repeated-text", w.Confidence
				a.Note = "named by the text " + cr.Labels[i] + "'s bursts repeat (no list given)"
			case cr.Labels[i] != "" && idmatch.Known(cr.Idents[i]):
				a.Ident, a.Method, a.Confidence = cr.Idents[i], "fingerprint", share[cr.Labels[i]]
				a.Note = "identifier not readable; attributed to " + cr.Labels[i] + " by carrier offset and tone"
			}
		}
		nm.Bursts[i] = a
	}
	count := map[string]int{}
	for _, a := range nm.Bursts {
		if idmatch.Known(a.Ident) {
			count[strings.ToUpper(a.Ident)]++
		}
	}
	for _, l := range id.opts.IDs {
		n := count[strings.ToUpper(strings.TrimSpace(l))]
		nm.Listed = append(nm.Listed, ListedHeard{ID: l, Bursts: n})
		if n > 0 {
			nm.Heard = append(nm.Heard, l)
		} else {
			nm.NotHeard = append(nm.NotHeard, l)
		}
	}
	return nm, nil
}
