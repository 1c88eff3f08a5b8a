package bearing

import (
	"fmt"
	"math"
	"nullseek/internal/angle"
	"sort"

	"gonum.org/v1/gonum/dsp/fourier"
)

// coarse returns up to three candidate rotations (degrees) from the circular
// cross-correlation of the binned dB levels with the pattern (via FFT),
// refined by a parabola through the profile SSE around each minimum.
func coarse(p Pattern, pts []Point) []float64 {
	const n = PatternSteps
	d := make([]float64, n)
	m := make([]float64, n)
	cnt := make([]float64, n)
	for _, q := range pts {
		i := int(angle.Wrap360(q.HeadingDeg)) % n
		d[i] += q.LevelDB
		cnt[i]++
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := range d {
		if cnt[i] > 0 {
			d[i] /= cnt[i]
			m[i] = 1
			lo = math.Min(lo, d[i])
			hi = math.Max(hi, d[i])
		}
	}
	span := math.Max(hi-lo, 1)
	g := make([]float64, n)
	g2 := make([]float64, n)
	for k := range g {
		g[k] = math.Max(p.GainDB[k], -span)
		g2[k] = g[k] * g[k]
	}
	md := make([]float64, n)
	var nn, d1, d2 float64
	for i := range d {
		md[i] = m[i] * d[i]
		nn += m[i]
		d1 += md[i]
		d2 += md[i] * d[i]
	}
	fft := fourier.NewFFT(n)
	conv := func(a, b []float64) []float64 {
		fa := fft.Coefficients(nil, a)
		fb := fft.Coefficients(nil, b)
		for i := range fa {
			fa[i] *= fb[i]
		}
		out := fft.Sequence(nil, fa)
		for i := range out {
			out[i] /= n
		}
		return out
	}
	// (x*G)(θ) = Σ_j x_j G(θ−j): circular convolution.
	A := conv(m, g)
	B := conv(m, g2)
	C := conv(md, g)
	sse := make([]float64, n)
	for t := range sse {
		sse[t] = d2 - 2*C[t] + B[t] - (d1-A[t])*(d1-A[t])/nn
	}
	type cand struct{ t, v float64 }
	var cs []cand
	for t := 0; t < n; t++ {
		l, r := sse[(t+n-1)%n], sse[(t+1)%n]
		if sse[t] <= l && sse[t] < r {
			off := 0.0
			den := l - 2*sse[t] + r
			if den > 0 {
				off = 0.5 * (l - r) / den
			}
			cs = append(cs, cand{float64(t) + off, sse[t]})
		}
	}
	sort.Slice(cs, func(i, j int) bool { return cs[i].v < cs[j].v })
	var out []float64
	for _, c := range cs {
		if len(out) == 3 {
			break
		}
		out = append(out, angle.Wrap360(c.t))
	}
	if len(out) == 0 {
		out = append(out, 0)
	}
	return out
}

// smoothGrid returns mean dB per 1° heading (NaN where empty), smoothed by a
// 5° circular moving average over occupied cells.
func smoothGrid(pts []Point) []float64 {
	const n = PatternSteps
	sum := make([]float64, n)
	cnt := make([]float64, n)
	for _, q := range pts {
		i := int(angle.Wrap360(q.HeadingDeg)) % n
		sum[i] += q.LevelDB
		cnt[i]++
	}
	out := make([]float64, n)
	for i := range out {
		if cnt[i] == 0 {
			out[i] = math.NaN()
			continue
		}
		var s, c float64
		for d := -2; d <= 2; d++ {
			j := (i + d + n) % n
			if cnt[j] > 0 {
				s += sum[j] / cnt[j]
				c++
			}
		}
		out[i] = s / c
	}
	return out
}

// depth is the null depth (Null) or the level span (Peak) on the smoothed
// grid sm: for a Null pattern, the highest level minus the lowest level
// within halfW of a fitted null (the fit has checked that a reading lies
// there). Always finite: 0 when nothing can be measured.
func depth(sm []float64, p Pattern, theta, halfW float64) float64 {
	hi, lo := math.Inf(-1), math.Inf(1)
	for _, v := range sm {
		if !math.IsNaN(v) {
			hi = math.Max(hi, v)
			lo = math.Min(lo, v)
		}
	}
	if math.IsInf(hi, 0) {
		return 0
	}
	if p.Mode == Peak {
		return hi - lo
	}
	period := 360 / float64(p.Symmetry)
	f := p.FeatureDeg()
	at := math.Inf(1)
	w := int(math.Ceil(halfW))
	for k := 0; k < p.Symmetry; k++ {
		fh := angle.Wrap360(theta - f + float64(k)*period)
		for d := -w; d <= w; d++ {
			v := sm[(int(math.Round(fh))+d+2*PatternSteps)%PatternSteps]
			if !math.IsNaN(v) {
				at = math.Min(at, v)
			}
		}
	}
	if math.IsInf(at, 1) {
		return 0
	}
	return hi - at
}

// extrema finds local extrema (minima if wantMin) of a circular grid with
// NaN gaps, with their prominence over a ±30° window.
func extrema(v []float64, wantMin bool) (idx []int, prom []float64) {
	n := len(v)
	sgn := 1.0
	if !wantMin {
		sgn = -1
	}
	for i := range v {
		if math.IsNaN(v[i]) {
			continue
		}
		x := sgn * v[i]
		isExt := true
		for d := -3; d <= 3 && isExt; d++ {
			if d == 0 {
				continue
			}
			u := v[(i+d+n)%n]
			if !math.IsNaN(u) && (sgn*u < x || (sgn*u == x && d < 0)) {
				isExt = false
			}
		}
		if !isExt {
			continue
		}
		side := func(dir int) float64 {
			mx := x
			for d := 1; d <= 30; d++ {
				u := v[(i+dir*d+n)%n]
				if !math.IsNaN(u) {
					mx = math.Max(mx, sgn*u)
				}
			}
			return mx - x
		}
		idx = append(idx, i)
		prom = append(prom, math.Min(side(1), side(-1)))
	}
	return idx, prom
}

// multipathWarning looks for a second null (peak) in the smoothed data of
// comparable prominence that the fitted pattern does not explain.
func multipathWarning(sm []float64, m *model, p Pattern, theta, c float64, thermal bool, floorDB float64) string {
	wantMin := p.Mode == Null
	di, dp := extrema(sm, wantMin)
	fit := make([]float64, len(sm))
	for i := range fit {
		if math.IsNaN(sm[i]) {
			fit[i] = math.NaN()
		} else {
			fit[i] = levelAt(m, thermal, theta, c, floorDB, float64(i))
		}
	}
	mi, mp := extrema(fit, wantMin)
	var main float64
	period := 360 / float64(p.Symmetry)
	f := p.FeatureDeg()
	for k, i := range di {
		for s := 0; s < p.Symmetry; s++ {
			if math.Abs(angle.Wrap180(float64(i)-(theta-f+float64(s)*period))) <= 10 {
				main = math.Max(main, dp[k])
			}
		}
	}
	for k, i := range di {
		if dp[k] < 3 || dp[k] < 0.5*main {
			continue
		}
		explained := false
		for j, mIdx := range mi {
			if mp[j] >= 1 && math.Abs(angle.Wrap180(float64(i-mIdx))) <= 15 {
				explained = true
			}
		}
		if !explained {
			what := "null"
			if !wantMin {
				what = "peak"
			}
			return fmt.Sprintf("multipath: a second %s at heading %.0f° (%.1f dB) that the pattern does not explain", what, float64(i), dp[k])
		}
	}
	return ""
}
