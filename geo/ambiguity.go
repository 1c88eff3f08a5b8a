package geo

import (
	"errors"
	"fmt"
	"math"
	"nullseek/internal/angle"
	"sort"
	"strings"
)

// maxAmbiguous bounds the ambiguous stations SolveFixAmbiguous resolves
// together (it tries 2^n orientations).
const maxAmbiguous = 8

// Ambiguity is how the 180° ambiguity of one station's bearings was
// resolved.
type Ambiguity struct {
	Station  string
	Lat, Lon float64
	// TakenDeg is the station's (weighted mean) bearing as used, OtherDeg the
	// reciprocal that was not taken; true bearings in [0, 360).
	TakenDeg, OtherDeg float64
	// Flipped is true when the taken direction is the reciprocal of the
	// bearings as given.
	Flipped bool
	// DecidedBy lists the other stations whose bearings made the choice
	// (the used stations of the fix, this one left out).
	DecidedBy []string
	// Other is the best fix with this station's bearings the other way
	// round, nil when that choice gives no fix at all.
	Other *Candidate
}

// Candidate is a fix that the bearings support less well.
type Candidate struct {
	Lat, Lon float64
	Chi2     float64
	// Rejected counts the bearings that this fix had to reject.
	Rejected int
}

// SolveFixAmbiguous is SolveFix for a set in which some bearings are
// ambiguous by 180° (LOP.Ambiguous, e.g. a small loop's two nulls). The
// ambiguous bearings of one station position turn together: they are first
// put on the same side of their common axis (the doubled-angle mean), then
// every choice of direction per station (at most maxAmbiguous stations) is
// solved and the fix the bearings agree with best is kept (least bearings
// rejected, then least chi-square). The chosen directions are written into
// the returned fix's bearings and described in Fix.Ambiguities. Warnings:
// an ambiguity that the data could not resolve (two choices fitting within
// one unit of chi-square), an ambiguity resolved by one other station only
// (the other choice and its fix, if any, are named), and each station whose
// bearings were taken reversed. With no ambiguous bearing it is SolveFix.
func SolveFixAmbiguous(lops []LOP, opt FixOptions) (*Fix, error) {
	if err := opt.Validate(); err != nil {
		return nil, err
	}
	type unit struct {
		key     posKey
		members []int
		axisDeg float64 // the direction the members were aligned to
	}
	var units []*unit
	byKey := map[posKey]*unit{}
	for i, l := range lops {
		if !l.Ambiguous || l.Validate() != nil {
			continue
		}
		k := posKey{l.Station, l.Lat, l.Lon}
		u := byKey[k]
		if u == nil {
			u = &unit{key: k}
			byKey[k] = u
			units = append(units, u)
		}
		u.members = append(u.members, i)
	}
	if len(units) == 0 {
		return SolveFix(lops, opt)
	}
	if len(units) > maxAmbiguous {
		return nil, fmt.Errorf("%s: %d stations with ambiguous bearings; at most %d can be resolved together", identName(lops[0].Ident), len(units), maxAmbiguous)
	}
	base := make([]LOP, len(lops))
	copy(base, lops)
	for _, u := range units {
		// Axis by the doubled-angle mean (weights 1/σ²); each member goes to
		// the side of the axis nearest to the first member.
		var s2, c2 float64
		for _, i := range u.members {
			w := 1 / sq(lops[i].SigmaDeg)
			s2 += w * math.Sin(2*lops[i].BearingDeg*deg)
			c2 += w * math.Cos(2*lops[i].BearingDeg*deg)
		}
		axis := angle.Wrap360(math.Atan2(s2, c2) / 2 * rad)
		if math.Abs(angle.Diff(axis, lops[u.members[0]].BearingDeg)) > 90 {
			axis = angle.Wrap360(axis + 180)
		}
		u.axisDeg = axis
		for _, i := range u.members {
			if math.Abs(angle.Diff(axis, base[i].BearingDeg)) > 90 {
				base[i].BearingDeg = angle.Wrap360(base[i].BearingDeg + 180)
			}
		}
	}
	type cand struct {
		mask     int
		fix      *Fix
		rejected int
	}
	better := func(a, b *cand) bool {
		if a.rejected != b.rejected {
			return a.rejected < b.rejected
		}
		return a.fix.Chi2 < b.fix.Chi2
	}
	var all []*cand
	var best *cand
	var firstErr error
	trial := make([]LOP, len(lops))
	for mask := 0; mask < 1<<len(units); mask++ {
		copy(trial, base)
		for k, u := range units {
			if mask&(1<<k) != 0 {
				for _, i := range u.members {
					trial[i].BearingDeg = angle.Wrap360(trial[i].BearingDeg + 180)
				}
			}
		}
		f, err := SolveFix(trial, opt)
		if err != nil {
			if firstErr == nil || !errors.Is(err, ErrBehind) {
				firstErr = err
			}
			continue
		}
		c := &cand{mask: mask, fix: f}
		for _, b := range f.Bearings {
			if !b.Used {
				c.rejected++
			}
		}
		all = append(all, c)
		if best == nil || better(c, best) {
			best = c
		}
	}
	if best == nil {
		return nil, firstErr
	}
	f := best.fix
	var second *cand
	for _, c := range all {
		if c != best && (second == nil || better(c, second)) {
			second = c
		}
	}
	if second != nil && second.rejected == best.rejected && second.fix.Chi2-best.fix.Chi2 < 1 {
		f.Warnings = append(f.Warnings, fmt.Sprintf("the 180° ambiguity is not resolved by these bearings: a fix at %s fits as well", fmtLatLon(second.fix.Lat, second.fix.Lon)))
	}
	// The used stations of the chosen fix.
	usedSt := map[posKey]bool{}
	var usedNames []string
	for _, b := range f.Bearings {
		k := posKey{b.Station, b.Lat, b.Lon}
		if b.Used && !usedSt[k] {
			usedSt[k] = true
			usedNames = append(usedNames, b.Station)
		}
	}
	for k, u := range units {
		a := Ambiguity{Station: u.key.station, Lat: u.key.lat, Lon: u.key.lon}
		var s, c, ws, wsTaken float64
		flipped := 0
		for _, i := range u.members {
			b := f.Bearings[i]
			w := 1 / sq(b.SigmaDeg)
			s += w * math.Sin(b.BearingDeg*deg)
			c += w * math.Cos(b.BearingDeg*deg)
			ws += w
			if math.Abs(angle.Diff(b.BearingDeg, lops[i].BearingDeg)) > 90 {
				flipped++
				wsTaken += w
			}
		}
		a.TakenDeg = angle.Wrap360(math.Atan2(s, c) * rad)
		a.OtherDeg = angle.Wrap360(a.TakenDeg + 180)
		a.Flipped = wsTaken > ws/2
		for _, n := range usedNames {
			if n != u.key.station {
				a.DecidedBy = append(a.DecidedBy, n)
			}
		}
		var alt *cand
		for _, c := range all {
			if (c.mask^best.mask)&(1<<k) != 0 && (alt == nil || better(c, alt)) {
				alt = c
			}
		}
		if alt != nil {
			a.Other = &Candidate{Lat: alt.fix.Lat, Lon: alt.fix.Lon, Chi2: alt.fix.Chi2, Rejected: alt.rejected}
		}
		f.Ambiguities = append(f.Ambiguities, a)
		if flipped > 0 {
			what := "ambiguous bearing taken as"
			if len(u.members) > 1 {
				what = fmt.Sprintf("%d of %d ambiguous bearings taken reversed, the station's bearing as", flipped, len(u.members))
			}
			f.Warnings = append(f.Warnings, fmt.Sprintf("%s: %s %.1f° (not %.1f°)", u.key.station, what, a.TakenDeg, a.OtherDeg))
		}
		if usedSt[u.key] && len(a.DecidedBy) == 1 {
			other := "gives no fix (the lines would not cross in front of the stations)"
			if a.Other != nil {
				other = fmt.Sprintf("would put the transmitter at %s (chi-square %.1f, %d bearings rejected)", fmtLatLon(a.Other.Lat, a.Other.Lon), a.Other.Chi2, a.Other.Rejected)
			}
			f.Warnings = append(f.Warnings, fmt.Sprintf("%s: the 180° ambiguity is resolved by station %s alone: if that bearing is wrong, the other null (%.1f°) %s; take a bearing from a third station",
				u.key.station, a.DecidedBy[0], a.OtherDeg, other))
		}
	}
	sort.SliceStable(f.Ambiguities, func(i, j int) bool {
		return strings.Compare(f.Ambiguities[i].Station, f.Ambiguities[j].Station) < 0
	})
	return f, nil
}
