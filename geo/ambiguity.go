package geo

import (
	"errors"
	"fmt"
	"math"
	"nullseek/internal/angle"
)

// maxAmbiguous bounds the orientations SolveFixAmbiguous tries (2^n).
const maxAmbiguous = 8

// SolveFixAmbiguous is SolveFix for a set in which some bearings are
// ambiguous by 180° (LOP.Ambiguous, e.g. a small loop's two nulls). It
// solves every choice of direction for the ambiguous bearings and keeps the
// fix the bearings agree with best (least chi-square; among equals, the one
// that needs no bearing rejected). The chosen directions are written into
// the returned fix's bearings, and a warning names any choice that the data
// could not make (two orientations fitting within one unit of chi-square),
// so an unresolvable ambiguity is never passed off as resolved. With no
// ambiguous bearing it is SolveFix.
func SolveFixAmbiguous(lops []LOP, opt FixOptions) (*Fix, error) {
	var amb []int
	for i, l := range lops {
		if l.Ambiguous {
			amb = append(amb, i)
		}
	}
	if len(amb) == 0 {
		return SolveFix(lops, opt)
	}
	if len(amb) > maxAmbiguous {
		return nil, fmt.Errorf("%s: %d ambiguous bearings; at most %d can be resolved together", identName(lops[0].Ident), len(amb), maxAmbiguous)
	}
	type cand struct {
		fix      *Fix
		score    float64
		rejected int
	}
	var best, second *cand
	var firstErr error
	trial := make([]LOP, len(lops))
	for mask := 0; mask < 1<<len(amb); mask++ {
		copy(trial, lops)
		for k, i := range amb {
			if mask&(1<<k) != 0 {
				trial[i].BearingDeg = math.Mod(trial[i].BearingDeg+180, 360)
			}
		}
		f, err := SolveFix(trial, opt)
		if err != nil {
			if firstErr == nil || !errors.Is(err, ErrBehind) {
				firstErr = err
			}
			continue
		}
		c := &cand{fix: f, score: f.Chi2}
		for _, b := range f.Bearings {
			if !b.Used {
				c.rejected++
			}
		}
		better := func(a, b *cand) bool {
			if a.rejected != b.rejected {
				return a.rejected < b.rejected
			}
			return a.score < b.score
		}
		switch {
		case best == nil || better(c, best):
			second, best = best, c
		case second == nil || better(c, second):
			second = c
		}
	}
	if best == nil {
		return nil, firstErr
	}
	f := best.fix
	if second != nil && second.rejected == best.rejected && second.score-best.score < 1 {
		f.Warnings = append(f.Warnings, fmt.Sprintf("the 180° ambiguity is not resolved by these bearings: a fix at %s fits as well", fmtLatLon(second.fix.Lat, second.fix.Lon)))
	}
	for _, i := range amb {
		if math.Abs(angle.Wrap180(f.Bearings[i].BearingDeg-lops[i].BearingDeg)) > 90 {
			f.Warnings = append(f.Warnings, fmt.Sprintf("%s: ambiguous bearing taken as %.1f° (not %.1f°)", lops[i].Station, f.Bearings[i].BearingDeg, lops[i].BearingDeg))
		}
	}
	return f, nil
}
