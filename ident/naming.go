package ident

import (
	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
)

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
