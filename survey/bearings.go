package survey

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"

	"nullseek/bearing"
	"nullseek/heading"
)

// BurstBearing is the bearing fitted to one burst's level track.
type BurstBearing struct {
	Index       int
	Ident       string
	Transmitter string
	StartS      float64
	Est         bearing.Estimate
	Points      []bearing.Point
	// Err says why no bearing was fitted (the fit refuses rather than
	// inventing one); Est is then empty.
	Err error
}

// TxBearing is one transmitter's bearing combined over its bursts.
type TxBearing struct {
	Ident       string
	Transmitter string
	Combined    bearing.Combined
	// Bursts are the per-burst bearings that went into the combination
	// (indices into the BurstBearing slice).
	Bursts []int
	// NullDepthDB and CoverageDeg are the best of the used bursts.
	NullDepthDB, CoverageDeg float64
	// SigmaDeg is the bearing's 1-sigma: the combination's sigma and the
	// site error added in quadrature. The site error (multipath, a pattern
	// that differs at this site) repeats on every turn and every burst, so
	// the data of one site cannot show it; it is added after combining.
	SigmaDeg, SiteSigmaDeg float64
	Err                    error
}

// DefaultSiteSigmaDeg is the site error assumed for a VHF bearing from a
// turning antenna when none is given: operational accuracy of a few degrees
// RMS is what field VHF direction finding achieves (common practice, from
// memory; ITU-R SM.2060 separates it from the reflection-free system
// accuracy for this reason).
const DefaultSiteSigmaDeg = 3.0

// Points joins a burst's level track with the heading track. Readings the
// heading track does not cover (outside it or in a gap) are left out.
func Points(r Record, track *heading.Track) []bearing.Point {
	var pts []bearing.Point
	for _, l := range r.Level {
		h, ok := track.At(l.T)
		if !ok {
			continue
		}
		// A reading taken while the ADC was at its rails understates the
		// level; the fit leaves it out and warns.
		pts = append(pts, bearing.Point{T: l.T, HeadingDeg: h, LevelDB: l.LevelDB, Clipped: l.Clipped > 0})
	}
	return pts
}

// Bearings fits every burst of res against the heading track with pattern
// p, then combines the bursts of each transmitter.
// siteSigmaDeg (≥ 0) is added in quadrature to each combined sigma.
func Bearings(res *Result, track *heading.Track, p bearing.Pattern, opts bearing.FitOptions, siteSigmaDeg float64) ([]BurstBearing, []TxBearing) {
	var bbs []BurstBearing
	groups := map[string][]int{}
	for _, r := range res.Records {
		bb := BurstBearing{Index: r.Index, Ident: r.Ident, Transmitter: r.Transmitter, StartS: r.StartS}
		bb.Points = Points(r, track)
		o := opts
		nf := r.NoiseDB
		o.NoiseFloorDB = &nf
		if len(bb.Points) == 0 {
			bb.Err = fmt.Errorf("no heading readings during the burst (%.1f–%.1f s): the heading log does not overlap it", r.StartS, r.EndS)
		} else {
			bb.Est, bb.Err = bearing.Fit(bb.Points, p, o)
		}
		bbs = append(bbs, bb)
		key := txKey(r)
		if bb.Err == nil {
			groups[key] = append(groups[key], len(bbs)-1)
		} else if _, ok := groups[key]; !ok {
			groups[key] = nil
		}
	}
	keys := make([]string, 0, len(groups))
	for k := range groups {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var txs []TxBearing
	for _, k := range keys {
		idx := groups[k]
		tb := TxBearing{Ident: k}
		for _, r := range res.Records {
			if txKey(r) == k {
				tb.Transmitter = r.Transmitter
				break
			}
		}
		if len(idx) == 0 {
			tb.Err = fmt.Errorf("no burst of %s gave a bearing", k)
			txs = append(txs, tb)
			continue
		}
		ests := make([]bearing.Estimate, len(idx))
		for i, j := range idx {
			ests[i] = bbs[j].Est
		}
		tb.Combined, tb.Err = bearing.Combine(ests, bearing.CombineOptions{})
		tb.SiteSigmaDeg = siteSigmaDeg
		tb.SigmaDeg = math.Hypot(tb.Combined.SigmaDeg, siteSigmaDeg)
		for _, u := range tb.Combined.Used {
			tb.Bursts = append(tb.Bursts, idx[u])
			e := bbs[idx[u]].Est
			tb.NullDepthDB = math.Max(tb.NullDepthDB, e.NullDepthDB)
			tb.CoverageDeg = math.Max(tb.CoverageDeg, e.CoverageDeg)
		}
		txs = append(txs, tb)
	}
	return bbs, txs
}

// txKey names the transmitter a record belongs to: its identifier, or its
// fingerprint cluster when the identifier is unknown.
func txKey(r Record) string {
	if known(r.Ident) {
		return r.Ident
	}
	if r.Transmitter != "" {
		return r.Transmitter
	}
	return "unknown"
}

func optDeg(p *float64) *float64 {
	if p == nil {
		return nil
	}
	v := round(*p, 2)
	return &v
}

// MarshalJSON writes a `"type":"burst_bearing"` line.
func (b BurstBearing) MarshalJSON() ([]byte, error) {
	m := map[string]any{
		"type": "burst_bearing", "index": b.Index, "ident": b.Ident,
		"transmitter": b.Transmitter, "start_s": round(b.StartS, 3), "bursts_used": 0,
	}
	if b.Err != nil {
		m["error"] = b.Err.Error()
		m["bearing_deg"], m["sigma_deg"], m["alt_bearing_deg"] = nil, nil, nil
		return json.Marshal(m)
	}
	e := b.Est
	m["bearing_deg"] = round(e.BearingDeg, 2)
	m["sigma_deg"] = round(e.SigmaDeg, 2)
	m["alt_bearing_deg"] = optDeg(e.AltBearingDeg)
	m["null_depth_db"] = round(e.NullDepthDB, 1)
	m["coverage_deg"] = round(e.CoverageDeg, 1)
	m["residual_db"] = round(e.ResidualDB, 2)
	m["fisher_sigma_deg"] = round(e.FisherSigmaDeg, 2)
	m["bootstrap_sigma_deg"] = round(e.BootstrapSigmaDeg, 2)
	m["points"] = e.Points
	m["mode"] = e.Mode.String()
	m["bursts_used"] = 1
	if len(e.Warnings) > 0 {
		m["warnings"] = e.Warnings
	}
	return json.Marshal(m)
}

// MarshalJSON writes a `"type":"bearing"` line.
func (t TxBearing) MarshalJSON() ([]byte, error) {
	m := map[string]any{"type": "bearing", "ident": t.Ident, "transmitter": t.Transmitter}
	if t.Err != nil {
		m["error"] = t.Err.Error()
		m["bearing_deg"], m["sigma_deg"], m["alt_bearing_deg"] = nil, nil, nil
		m["bursts_used"] = 0
		return json.Marshal(m)
	}
	c := t.Combined
	m["bearing_deg"] = round(c.BearingDeg, 2)
	m["sigma_deg"] = round(t.SigmaDeg, 2)
	m["fit_sigma_deg"] = round(c.SigmaDeg, 2)
	m["site_sigma_deg"] = round(t.SiteSigmaDeg, 2)
	m["alt_bearing_deg"] = optDeg(c.AltBearingDeg)
	m["null_depth_db"] = round(t.NullDepthDB, 1)
	m["coverage_deg"] = round(t.CoverageDeg, 1)
	m["bursts_used"] = c.BurstsUsed
	m["p_value"] = round(c.PValue, 4)
	if len(c.Excluded) > 0 {
		var ex []map[string]any
		for _, e := range c.Excluded {
			ex = append(ex, map[string]any{"bearing_deg": round(e.BearingDeg, 2), "reason": e.Reason})
		}
		m["excluded"] = ex
	}
	if len(c.Warnings) > 0 {
		m["warnings"] = c.Warnings
	}
	return json.Marshal(m)
}

// EstimateLag estimates the lag between level and heading from the
// transmitter with the most readings (bearing.EstimateLag: sweeps must turn
// both ways). The sign is bearing's: positive means the level readings are
// late; remove it with track.WithLag(track.LagS − lagS).
func EstimateLag(res *Result, track *heading.Track, p bearing.Pattern, opts bearing.FitOptions) (lagS, sigmaS float64, err error) {
	byTx := map[string][]bearing.Point{}
	for _, r := range res.Records {
		byTx[txKey(r)] = append(byTx[txKey(r)], Points(r, track)...)
	}
	best := ""
	for k, pts := range byTx {
		if best == "" || len(pts) > len(byTx[best]) || (len(pts) == len(byTx[best]) && k < best) {
			best = k
		}
	}
	if best == "" {
		return 0, 0, fmt.Errorf("estimate lag: no bursts")
	}
	nf := math.Inf(1)
	for _, r := range res.Records {
		if txKey(r) == best {
			nf = math.Min(nf, r.NoiseDB)
		}
	}
	opts.NoiseFloorDB = &nf
	lag, sig, err := bearing.EstimateLag(byTx[best], p, bearing.LagOptions{Fit: opts})
	if err != nil {
		return 0, 0, fmt.Errorf("estimate lag from %s: %w", best, err)
	}
	return lag, sig, nil
}

// WriteBearingTable prints per-burst and per-transmitter bearings for people.
func WriteBearingTable(w io.Writer, bbs []BurstBearing, txs []TxBearing) error {
	tw := &errWriter{w: w}
	fmt.Fprintf(tw, "%-5s %-12s %-4s %9s %7s %9s %8s %8s  %s\n", "burst", "ident", "tx", "bearing", "±1σ", "alt", "null dB", "cover", "notes")
	for _, b := range bbs {
		if b.Err != nil {
			fmt.Fprintf(tw, "%-5d %-12s %-4s %9s  %s\n", b.Index, b.Ident, b.Transmitter, "-", b.Err)
			continue
		}
		e := b.Est
		alt := "-"
		if e.AltBearingDeg != nil {
			alt = fmt.Sprintf("%.1f°", *e.AltBearingDeg)
		}
		fmt.Fprintf(tw, "%-5d %-12s %-4s %8.1f° %6.2f° %9s %8.1f %7.0f°  %s\n", b.Index, b.Ident, b.Transmitter,
			e.BearingDeg, e.SigmaDeg, alt, e.NullDepthDB, e.CoverageDeg, strings.Join(e.Warnings, "; "))
	}
	fmt.Fprintln(tw)
	fmt.Fprintf(tw, "%-12s %-4s %9s %7s %9s %7s  %s\n", "ident", "tx", "bearing", "±1σ", "alt", "bursts", "notes")
	for _, t := range txs {
		if t.Err != nil {
			fmt.Fprintf(tw, "%-12s %-4s %9s  %s\n", t.Ident, t.Transmitter, "-", t.Err)
			continue
		}
		c := t.Combined
		alt := "-"
		if c.AltBearingDeg != nil {
			alt = fmt.Sprintf("%.1f°", *c.AltBearingDeg)
		}
		var notes []string
		notes = append(notes, c.Warnings...)
		for _, x := range c.Excluded {
			notes = append(notes, fmt.Sprintf("left out %.1f°: %s", x.BearingDeg, x.Reason))
		}
		fmt.Fprintf(tw, "%-12s %-4s %8.1f° %6.1f° %9s %7d  %s\n", t.Ident, t.Transmitter, c.BearingDeg, t.SigmaDeg, alt, c.BurstsUsed, strings.Join(notes, "; "))
	}
	fmt.Fprintf(tw, "(±1σ of a transmitter includes a %.1f° site error; bearings are from true north)\n", firstSite(txs))
	return tw.err
}

func firstSite(txs []TxBearing) float64 {
	for _, t := range txs {
		if t.Err == nil {
			return t.SiteSigmaDeg
		}
	}
	return 0
}
