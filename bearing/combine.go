package bearing

import (
	"fmt"
	"math"
	"nullseek/internal/angle"

	"gonum.org/v1/gonum/stat/distuv"
)

// CombineOptions tunes Combine. The zero value gives the defaults.
type CombineOptions struct {
	// Alpha is the significance level of the chi-square consistency test
	// (default 0.01): bursts are excluded while the set is inconsistent at
	// this level.
	Alpha float64
}

// Exclusion records a burst left out of a combination.
type Exclusion struct {
	Index        int     // position in the input slice
	BearingDeg   float64 // the burst's bearing
	SigmaDeg     float64 // the burst's sigma
	NormResidual float64 // (bearing − combined)/sigma at the time of exclusion
	Reason       string
}

// Combined is a bearing combined from several bursts of one transmitter.
type Combined struct {
	// BearingDeg is the weighted circular mean (weights 1/σ²), [0, 360).
	BearingDeg float64
	// SigmaDeg is 1/√Σ(1/σ²) scaled up by √(χ²/dof) when the bursts
	// scatter more than their sigmas say (never scaled down).
	SigmaDeg float64
	// AltBearingDeg is BearingDeg+180° when every input was ambiguous.
	AltBearingDeg *float64
	// BurstsUsed is the number of bursts in the combination; Used their indices.
	BurstsUsed int
	Used       []int
	// Excluded lists the bursts left out, with reasons.
	Excluded []Exclusion
	// Chi2, DOF and PValue describe the consistency of the used bursts.
	Chi2   float64
	DOF    int
	PValue float64
	// Warnings lists conditions worth a look (e.g. two bursts that disagree).
	Warnings []string
}

// Combine merges per-burst estimates of one transmitter. Ambiguous
// estimates (AltBearingDeg set) are resolved to the alternative nearer the
// combination of the unambiguous ones; if all are ambiguous the combination
// is done on doubled angles and stays ambiguous. While the chi-square of the
// normalised residuals is significant at opts.Alpha and more than two bursts
// remain, the burst with the largest normalised residual is excluded.
func Combine(ests []Estimate, opts CombineOptions) (Combined, error) {
	if len(ests) == 0 {
		return Combined{}, fmt.Errorf("combine bearings: %w: no estimates", ErrBadInput)
	}
	alpha := opts.Alpha
	if alpha == 0 {
		alpha = 0.01
	}
	if !(alpha > 0 && alpha < 1) {
		return Combined{}, fmt.Errorf("combine bearings: %w: alpha %g not in (0, 1)", ErrBadInput, alpha)
	}
	th := make([]float64, len(ests))
	sg := make([]float64, len(ests))
	allAmb := true
	for i, e := range ests {
		if math.IsNaN(e.BearingDeg) || math.IsInf(e.BearingDeg, 0) || !(e.SigmaDeg > 0) || math.IsInf(e.SigmaDeg, 0) {
			return Combined{}, fmt.Errorf("combine bearings: %w: estimate %d has bearing %g ± %g", ErrBadInput, i, e.BearingDeg, e.SigmaDeg)
		}
		th[i], sg[i] = e.BearingDeg, e.SigmaDeg
		if e.AltBearingDeg == nil {
			allAmb = false
		}
	}
	scale := 1.0 // 2 when working on doubled angles
	if allAmb {
		scale = 2
	} else {
		// Resolve ambiguous ones against the unambiguous mean.
		var sx, sy float64
		for i, e := range ests {
			if e.AltBearingDeg == nil {
				w := 1 / (sg[i] * sg[i])
				s, c := math.Sincos(th[i] * math.Pi / 180)
				sx += w * s
				sy += w * c
			}
		}
		ref := math.Atan2(sx, sy) * 180 / math.Pi
		for i, e := range ests {
			if e.AltBearingDeg != nil && math.Abs(angle.Wrap180(*e.AltBearingDeg-ref)) < math.Abs(angle.Wrap180(th[i]-ref)) {
				th[i] = *e.AltBearingDeg
			}
		}
	}
	used := make([]bool, len(ests))
	for i := range used {
		used[i] = true
	}
	var out Combined
	for {
		var sx, sy, sw float64
		n := 0
		for i := range th {
			if !used[i] {
				continue
			}
			w := 1 / (sg[i] * sg[i])
			s, c := math.Sincos(scale * th[i] * math.Pi / 180)
			sx += w * s
			sy += w * c
			sw += w
			n++
		}
		mean := math.Atan2(sx, sy) * 180 / math.Pi / scale
		var chi2 float64
		worst, worstR := -1, 0.0
		for i := range th {
			if !used[i] {
				continue
			}
			r := angle.Wrap180(scale*(th[i]-mean)) / scale / sg[i]
			chi2 += r * r
			if math.Abs(r) > math.Abs(worstR) {
				worst, worstR = i, r
			}
		}
		dof := n - 1
		pval := 1.0
		if dof > 0 {
			pval = 1 - distuv.ChiSquared{K: float64(dof)}.CDF(chi2)
		}
		if pval < alpha && n > 2 {
			used[worst] = false
			out.Excluded = append(out.Excluded, Exclusion{Index: worst, BearingDeg: ests[worst].BearingDeg, SigmaDeg: sg[worst], NormResidual: worstR,
				Reason: fmt.Sprintf("disagrees with the other %d bursts by %.1f° (%.1f sigma; set chi-square p = %.2g)", n-1, worstR*sg[worst], math.Abs(worstR), pval)})
			continue
		}
		out.BearingDeg = angle.Wrap360(mean)
		out.SigmaDeg = 1 / math.Sqrt(sw)
		if dof > 0 && chi2 > float64(dof) {
			out.SigmaDeg *= math.Sqrt(chi2 / float64(dof))
		}
		out.Chi2, out.DOF, out.PValue, out.BurstsUsed = chi2, dof, pval, n
		if pval < alpha {
			out.Warnings = append(out.Warnings, fmt.Sprintf("the %d bursts disagree (chi-square p = %.2g) and none can be singled out; sigma widened", n, pval))
		}
		break
	}
	for i, u := range used {
		if u {
			out.Used = append(out.Used, i)
		}
	}
	if allAmb {
		alt := angle.Wrap360(out.BearingDeg + 180)
		out.AltBearingDeg = &alt
	}
	return out, nil
}
