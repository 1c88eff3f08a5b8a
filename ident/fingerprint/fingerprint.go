// Package fingerprint tells transmitters apart by what they sound like
// rather than what they send: each burst's carrier offset and tone pitch
// (its fingerprint) link it to the other bursts of the same transmitter
// (Cluster), so a burst whose identifier could not be read is still
// attributed, and two transmitters programmed with the same identifier are
// flagged. Frequencies are in Hz, times in seconds from the capture start.
package fingerprint

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"nullseek/ident/idmatch"
	"nullseek/ident/internal/stats"
	"slices"
	"strings"
	"time"
)

// Observation is what the receiver reports about one burst, as far as the
// identification and scheduling stages need it. ident never sees IQ.
type Observation struct {
	// Index is the receiver's burst number (informational; not required to
	// be unique or ordered).
	Index int
	// StartS and EndS are seconds from the capture start on the receiver's
	// clock. EndS must not be before StartS.
	StartS, EndS float64
	// Start is the UTC start time of the burst, or the zero time when the
	// capture start is unknown.
	Start time.Time
	// OffsetHz is the carrier offset from the channel centre in Hz (a few Hz
	// accuracy).
	OffsetHz float64
	// ToneHz is the modulating tone pitch in Hz, 0 when the burst has no tone
	// (keyed carrier) or none was found.
	ToneHz float64
	// LevelDB is the burst level in dBFS (informational here).
	LevelDB float64
	// Ident is the matched identifier, or "unknown" (or "") when unreadable.
	Ident string
	// IdentConfidence is the matcher's confidence in Ident, 0…1.
	IdentConfidence float64
	// IdentMethod says how Ident was found (informational here; see
	// ident.Burst.Method).
	IdentMethod string
	// DoubleCarrier is set by the receiver when it saw two carriers at once
	// during this burst (an overlap with an unidentified second transmitter).
	DoubleCarrier bool
	// CutStart and CutEnd say the burst's start or end is not the
	// transmitter's: the recording began or ended inside it, or it is where
	// a burst holding two transmitters was split.
	CutStart, CutEnd bool
	// OtherIdent is a second identifier read whole in the burst (two
	// transmitters on the air together that the fingerprint could not
	// split; DoubleCarrier is then set too).
	OtherIdent string
}

// Options tunes Cluster. Zero values select the defaults.
type Options struct {
	// OffsetTolHz is the carrier-offset distance in Hz at which two bursts
	// are still linked (default 30 Hz: cheap crystal beacons differ by tens
	// to hundreds of Hz, while one beacon's offset jitters by a few Hz and
	// drifts slowly with temperature).
	OffsetTolHz float64
	// ToneTolHz is the tone-pitch distance in Hz at which two bursts are
	// still linked (default 15 Hz).
	ToneTolHz float64
	// SpreadFactor widens the tolerances to SpreadFactor times the measured
	// burst-to-burst jitter inside the clusters when that is larger than the
	// configured tolerance (default 4; negative disables the widening).
	SpreadFactor float64
	// ConfidentMin is the ident confidence (0…1) from which a burst's ID
	// counts as confident when looking for a cluster that carries two
	// different IDs (default 0.8).
	ConfidentMin float64
	// EdgeFactor widens the offset and tone tolerances for attaching an
	// edge burst (cut by the recording, split from an overlap, or carrying
	// two carriers), whose fingerprint is measured on less or on a mix
	// (default 3); LevelTolDB is the level distance (dB) counted as one
	// tolerance when several transmitters fit it by offset and tone
	// (default 10; the level only breaks such ties, see attachEdges).
	EdgeFactor, LevelTolDB float64
}

// Resolved returns o with its zero fields replaced by the defaults.
func (o Options) Resolved() Options { return o.withDefaults() }

func (o Options) withDefaults() Options {
	if !(o.OffsetTolHz > 0) {
		o.OffsetTolHz = 30
	}
	if !(o.ToneTolHz > 0) {
		o.ToneTolHz = 15
	}
	if o.SpreadFactor == 0 || math.IsNaN(o.SpreadFactor) {
		o.SpreadFactor = 4
	}
	if !(o.ConfidentMin > 0) {
		o.ConfidentMin = 0.8
	}
	if !(o.EdgeFactor > 0) {
		o.EdgeFactor = 3
	}
	if !(o.LevelTolDB > 0) {
		o.LevelTolDB = 10
	}
	return o
}

// edgeBurst reports whether a burst's fingerprint or edges are not wholly
// its transmitter's: cut by the recording, split from an overlap, or
// carrying two carriers at once.
func edgeBurst(o Observation) bool { return o.CutStart || o.CutEnd || o.DoubleCarrier }

// attachEdges places the edge bursts (comp −2): with the cluster whose
// members fit it by offset and tone (tolerances widened EdgeFactor times,
// normalised distance ≤ 1); when members of several clusters fit, with the
// one nearest once the level is counted too (LevelTolDB a unit). The level
// only breaks ties: a burst cut short by the recording is measured over
// part of an antenna's turn, so its level can differ from its
// transmitter's by far more than LevelTolDB (a 4 s piece of a Yagi's turn
// reads 15 dB under the turn's mean) while its offset and tone are its
// transmitter's. Else it joins the cluster whose members read the same
// identifier confidently; else, when it reads an identifier of its own, a
// cluster of its own (a transmitter heard only cut); else nowhere (−1). A
// burst with two carriers never makes a cluster of its own.
func attachEdges(obs []Observation, comp []int, offTol, toneTol float64, opts Options) {
	for i, o := range obs {
		if comp[i] != -2 {
			continue
		}
		best, bestD := -1, math.Inf(1)
		for j, c := range comp {
			if c < 0 || edgeBurst(obs[j]) {
				continue
			}
			m := obs[j]
			if (o.ToneHz == 0) != (m.ToneHz == 0) {
				continue
			}
			ft := sq((o.OffsetHz-m.OffsetHz)/(opts.EdgeFactor*offTol)) + sq((o.ToneHz-m.ToneHz)/(opts.EdgeFactor*toneTol))
			if ft > 1 {
				continue
			}
			if d := math.Sqrt(ft + sq((o.LevelDB-m.LevelDB)/opts.LevelTolDB)); d < bestD {
				best, bestD = c, d
			}
		}
		switch {
		case best >= 0:
			comp[i] = best
		case idmatch.Known(o.Ident):
			comp[i] = -1
			for j, c := range comp {
				if c >= 0 && j != i && strings.EqualFold(strings.TrimSpace(obs[j].Ident), strings.TrimSpace(o.Ident)) &&
					clampConf(obs[j].IdentConfidence) >= opts.ConfidentMin {
					comp[i] = c
					break
				}
			}
			if comp[i] < 0 && !o.DoubleCarrier {
				comp[i] = i
			}
		default:
			comp[i] = -1
		}
	}
}

func sq(x float64) float64 { return x * x }

// FlagKind names a problem found while clustering.
type FlagKind string

const (
	// FlagSharedIdent: two or more clusters (transmitters told apart by
	// their fingerprint) carry the same majority ID — at an event, two
	// transmitters programmed with the same identifier.
	FlagSharedIdent FlagKind = "shared_ident"
	// FlagMixedIdent: one cluster holds confident bursts with two or more
	// different IDs — a transmitter re-programmed during the recording, or
	// fingerprints too close to separate.
	FlagMixedIdent FlagKind = "mixed_ident"
)

// Flag is one finding of Cluster.
type Flag struct {
	Kind    FlagKind `json:"kind"`
	Labels  []string `json:"labels"`
	Idents  []string `json:"idents"`
	Message string   `json:"message"`
}

// Transmitter summarises the bursts attributed to one transmitter.
type Transmitter struct {
	// Label is "T1", "T2", … in order of the cluster's first burst.
	Label string `json:"label"`
	// Ident is the confidence-weighted majority ID of the cluster's bursts,
	// idmatch.Unknown when none was readable.
	Ident string `json:"ident"`
	// IdentShare is Ident's share (0…1) of the cluster's total ident weight.
	IdentShare float64 `json:"ident_share"`
	// Members are positions in the input slice, in time order.
	Members []int `json:"members"`
	// OffsetHz and ToneHz are the medians over the members; OffsetSpreadHz
	// and ToneSpreadHz are max−min over the members (Hz).
	OffsetHz       float64 `json:"offset_hz"`
	OffsetSpreadHz float64 `json:"offset_spread_hz"`
	ToneHz         float64 `json:"tone_hz"`
	ToneSpreadHz   float64 `json:"tone_spread_hz"`
	// FirstS is the start (s from capture start) of the first member.
	FirstS float64 `json:"first_s"`
}

// Result is the outcome of Cluster. The per-burst slices
// are parallel to the input observations.
type Result struct {
	// Labels holds the transmitter label of each burst.
	Labels []string `json:"labels"`
	// Idents holds each burst's attributed ID: its own when readable,
	// otherwise its cluster's majority ID.
	Idents []string `json:"idents"`
	// Notes explains attributions that differ from the burst's own ID ("" when
	// there is nothing to say).
	Notes    []string      `json:"notes"`
	Clusters []Transmitter `json:"clusters"`
	Flags    []Flag        `json:"flags"`
	// Unattributed counts the edge bursts (see Cluster) left without a
	// transmitter (Label "").
	Unattributed int `json:"unattributed"`
	// OffsetTolHz and ToneTolHz are the tolerances actually used, after any
	// widening from the measured spread.
	OffsetTolHz float64 `json:"offset_tol_hz"`
	ToneTolHz   float64 `json:"tone_tol_hz"`
}

// Cluster groups bursts into transmitters by their fingerprint:
// carrier offset and tone pitch.
//
// Method: single-linkage agglomerative clustering on the normalised distance
//
//	d = sqrt((Δoffset/OffsetTolHz)² + (Δtone/ToneTolHz)²)
//
// cut at d = 1: two bursts belong to the same transmitter when a chain of
// bursts links them with every step at d ≤ 1. Single linkage follows slow
// temperature drift of a beacon's offset from burst to burst. A burst with
// ToneHz 0 (no tone) is never linked to one with a tone. After a first pass,
// the burst-to-burst jitter inside the clusters is measured (robustly, from
// successive differences in time order); when SpreadFactor times that jitter
// exceeds a tolerance, the tolerance is widened to it and the clustering is
// repeated once. The tolerances used are returned.
//
// Clusters are labelled "T1", "T2", … in order of their first burst's start.
// Each cluster's ID is the majority of its bursts' readable IDs weighted by
// IdentConfidence (clamped to 0…1, with a small floor so zero-confidence
// reads still break ties by count). Bursts whose ID is "unknown" or empty are
// attributed the cluster's ID, with a note. Flags report IDs shared by
// several clusters and clusters with several confident IDs.
//
// Edge bursts — cut by the start or end of the recording, split from a
// burst that held two transmitters (CutStart, CutEnd), or carrying two
// carriers (DoubleCarrier) — measure their fingerprint on less, or on a
// mix, and would otherwise make transmitters of their own: they neither
// form nor link clusters, and are attached afterwards (see attachEdges) to
// the transmitter they fit by offset, tone and level, or by the
// identifier they read; an edge burst that fits none and reads none is
// left unattributed (Label "", counted in Unattributed).
//
// Errors: an empty input, or a non-finite offset, tone or time, or a negative
// tone, is rejected with an error naming the burst.
func Cluster(obs []Observation, opts Options) (Result, error) {
	if len(obs) == 0 {
		return Result{}, errors.New("cluster transmitters: no bursts")
	}
	for i, o := range obs {
		if err := checkObservation(o); err != nil {
			return Result{}, fmt.Errorf("cluster transmitters: burst %d (index %d): %w", i, o.Index, err)
		}
	}
	opts = opts.withDefaults()
	offTol, toneTol := opts.OffsetTolHz, opts.ToneTolHz

	// Whole bursts make the clusters; bursts cut by the recording or split
	// from an overlap, and bursts carrying two carriers, join them after.
	var core []int
	for i, o := range obs {
		if !edgeBurst(o) {
			core = append(core, i)
		}
	}
	if len(core) == 0 {
		for i := range obs {
			core = append(core, i)
		}
	}
	sub := make([]Observation, len(core))
	for k, i := range core {
		sub[k] = obs[i]
	}
	subComp := singleLinkage(sub, offTol, toneTol)
	if opts.SpreadFactor > 0 {
		jOff, jTone := jitter(sub, subComp)
		widened := false
		if w := opts.SpreadFactor * jOff; w > offTol {
			offTol, widened = w, true
		}
		if w := opts.SpreadFactor * jTone; w > toneTol {
			toneTol, widened = w, true
		}
		if widened {
			subComp = singleLinkage(sub, offTol, toneTol)
		}
	}
	comp := make([]int, len(obs))
	for i := range comp {
		comp[i] = -2 // not yet placed
	}
	for k, i := range core {
		comp[i] = core[subComp[k]]
	}
	attachEdges(obs, comp, offTol, toneTol, opts)

	// Group members; order clusters by first start.
	groups := map[int][]int{}
	for i, c := range comp {
		if c >= 0 {
			groups[c] = append(groups[c], i)
		}
	}
	byTime := func(a, b int) int {
		if c := cmp.Compare(obs[a].StartS, obs[b].StartS); c != 0 {
			return c
		}
		return cmp.Compare(a, b)
	}
	var clusters [][]int
	for _, m := range groups {
		slices.SortFunc(m, byTime)
		clusters = append(clusters, m)
	}
	slices.SortFunc(clusters, func(a, b []int) int { return byTime(a[0], b[0]) })

	res := Result{
		Labels:      make([]string, len(obs)),
		Idents:      make([]string, len(obs)),
		Notes:       make([]string, len(obs)),
		OffsetTolHz: offTol,
		ToneTolHz:   toneTol,
	}
	for i, c := range comp {
		if c < 0 { // an edge burst that fits no transmitter
			res.Idents[i] = idmatch.Unknown
			if idmatch.Known(obs[i].Ident) {
				res.Idents[i] = strings.TrimSpace(obs[i].Ident)
			}
			res.Notes[i] = "cut by the recording or split from an overlap, and its fingerprint fits no transmitter: left unattributed"
			res.Unattributed++
		}
	}
	for ci, members := range clusters {
		tc := summarise(obs, members)
		tc.Label = fmt.Sprintf("T%d", ci+1)
		res.Clusters = append(res.Clusters, tc)
		for _, i := range members {
			res.Labels[i] = tc.Label
		}
		// Attribution per burst.
		for _, i := range members {
			own := strings.TrimSpace(obs[i].Ident)
			switch {
			case !idmatch.Known(own) && tc.Ident != idmatch.Unknown:
				res.Idents[i] = tc.Ident
				res.Notes[i] = fmt.Sprintf("ID unreadable; attributed %s from fingerprint cluster %s (weight share %.2f)", tc.Ident, tc.Label, tc.IdentShare)
			case !idmatch.Known(own):
				res.Idents[i] = idmatch.Unknown
			default:
				res.Idents[i] = own
				if own != tc.Ident {
					res.Notes[i] = fmt.Sprintf("ID %s differs from cluster %s majority %s", own, tc.Label, tc.Ident)
				}
			}
		}
		// Mixed confident IDs in one cluster.
		confident := map[string]bool{}
		for _, i := range members {
			if idmatch.Known(obs[i].Ident) && clampConf(obs[i].IdentConfidence) >= opts.ConfidentMin {
				confident[strings.TrimSpace(obs[i].Ident)] = true
			}
		}
		if len(confident) > 1 {
			ids := sortedKeys(confident)
			res.Flags = append(res.Flags, Flag{
				Kind:   FlagMixedIdent,
				Labels: []string{tc.Label},
				Idents: ids,
				Message: fmt.Sprintf("transmitter %s sent confident IDs %s: re-programmed during the recording, or fingerprints too close to separate",
					tc.Label, strings.Join(ids, ", ")),
			})
		}
	}
	// Same ID on several clusters.
	byIdent := map[string][]string{}
	var identOrder []string
	for _, tc := range res.Clusters {
		if tc.Ident == idmatch.Unknown {
			continue
		}
		if _, ok := byIdent[tc.Ident]; !ok {
			identOrder = append(identOrder, tc.Ident)
		}
		byIdent[tc.Ident] = append(byIdent[tc.Ident], tc.Label)
	}
	for _, id := range identOrder {
		if labels := byIdent[id]; len(labels) > 1 {
			res.Flags = append(res.Flags, Flag{
				Kind:   FlagSharedIdent,
				Labels: labels,
				Idents: []string{id},
				Message: fmt.Sprintf("ID %s is sent by %d transmitters with different fingerprints (%s): two transmitters programmed with the same ID?",
					id, len(labels), strings.Join(labels, ", ")),
			})
		}
	}
	return res, nil
}

func checkObservation(o Observation) error {
	for _, v := range []struct {
		name string
		x    float64
	}{{"start", o.StartS}, {"end", o.EndS}, {"carrier offset", o.OffsetHz}, {"tone", o.ToneHz}, {"ident confidence", o.IdentConfidence}} {
		if math.IsNaN(v.x) || math.IsInf(v.x, 0) {
			return fmt.Errorf("%s is not a finite number", v.name)
		}
	}
	if o.ToneHz < 0 {
		return fmt.Errorf("tone %.1f Hz is negative", o.ToneHz)
	}
	if o.EndS < o.StartS {
		return fmt.Errorf("ends (%.3f s) before it starts (%.3f s)", o.EndS, o.StartS)
	}
	return nil
}

func clampConf(c float64) float64 {
	if math.IsNaN(c) || c < 0 {
		return 0
	}
	return min(c, 1)
}

// distance is the normalised fingerprint distance; +Inf between a toned and a
// toneless burst.
func distance(a, b Observation, offTol, toneTol float64) float64 {
	if (a.ToneHz == 0) != (b.ToneHz == 0) {
		return math.Inf(1)
	}
	do := (a.OffsetHz - b.OffsetHz) / offTol
	dt := (a.ToneHz - b.ToneHz) / toneTol
	return math.Hypot(do, dt)
}

// singleLinkage returns a component id per burst: the connected components
// of the graph linking bursts at normalised distance ≤ 1, which is exactly a
// single-linkage dendrogram cut at 1. Bursts are sorted by offset so that only
// neighbours within OffsetTol are compared.
func singleLinkage(obs []Observation, offTol, toneTol float64) []int {
	n := len(obs)
	parent := make([]int, n)
	for i := range parent {
		parent[i] = i
	}
	var find func(int) int
	find = func(i int) int {
		for parent[i] != i {
			parent[i] = parent[parent[i]]
			i = parent[i]
		}
		return i
	}
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	slices.SortFunc(idx, func(a, b int) int { return cmp.Compare(obs[a].OffsetHz, obs[b].OffsetHz) })
	for p, i := range idx {
		for _, j := range idx[p+1:] {
			if obs[j].OffsetHz-obs[i].OffsetHz > offTol {
				break
			}
			if distance(obs[i], obs[j], offTol, toneTol) <= 1 {
				ri, rj := find(i), find(j)
				if ri != rj {
					parent[max(ri, rj)] = min(ri, rj)
				}
			}
		}
	}
	out := make([]int, n)
	for i := range out {
		out[i] = find(i)
	}
	return out
}

// jitter estimates the burst-to-burst jitter (1σ, Hz) of offset and tone
// pooled over clusters, from successive differences in time order:
// σ ≈ 1.4826·median|Δ|/√2 (robust against drift steps and outliers).
func jitter(obs []Observation, comp []int) (offHz, toneHz float64) {
	groups := map[int][]int{}
	for i, c := range comp {
		groups[c] = append(groups[c], i)
	}
	var dOff, dTone []float64
	for _, m := range groups {
		slices.SortFunc(m, func(a, b int) int { return cmp.Compare(obs[a].StartS, obs[b].StartS) })
		for k := 1; k < len(m); k++ {
			a, b := obs[m[k-1]], obs[m[k]]
			dOff = append(dOff, math.Abs(b.OffsetHz-a.OffsetHz))
			if a.ToneHz > 0 && b.ToneHz > 0 {
				dTone = append(dTone, math.Abs(b.ToneHz-a.ToneHz))
			}
		}
	}
	const k = 1.4826 / math.Sqrt2
	if len(dOff) >= 3 {
		offHz = k * stats.Median(dOff)
	}
	if len(dTone) >= 3 {
		toneHz = k * stats.Median(dTone)
	}
	return offHz, toneHz
}

func summarise(obs []Observation, members []int) Transmitter {
	tc := Transmitter{Members: slices.Clone(members), FirstS: obs[members[0]].StartS}
	off := make([]float64, 0, len(members))
	tone := make([]float64, 0, len(members))
	weights := map[string]float64{}
	total := 0.0
	for _, i := range members {
		o := obs[i]
		off = append(off, o.OffsetHz)
		tone = append(tone, o.ToneHz)
		if idmatch.Known(o.Ident) {
			w := max(clampConf(o.IdentConfidence), 1e-3)
			weights[strings.TrimSpace(o.Ident)] += w
			total += w
		}
	}
	tc.OffsetHz = stats.Median(off)
	tc.ToneHz = stats.Median(tone)
	tc.OffsetSpreadHz = slices.Max(off) - slices.Min(off)
	tc.ToneSpreadHz = slices.Max(tone) - slices.Min(tone)
	tc.Ident = idmatch.Unknown
	best := 0.0
	for _, id := range sortedKeys(weights) {
		if w := weights[id]; w > best {
			best, tc.Ident = w, id
		}
	}
	if total > 0 {
		tc.IdentShare = best / total
	}
	return tc
}

func sortedKeys[V any](m map[string]V) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	return keys
}
