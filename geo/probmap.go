package geo

import (
	"errors"
	"fmt"
	"math"
	"sort"
)

// CellProb is the probability that the transmitter is in one grid cell.
type CellProb struct {
	Cell        string  `json:"cell"`
	Col         int     `json:"-"`
	Row         int     `json:"-"`
	Probability float64 `json:"probability"`
}

// vmSet holds bearings prepared for fast von Mises evaluation on a plane,
// summed per station position: Σᵢ κᵢ cos(φᵢ − θ) = S sin θ + C cos θ with
// S = Σ κᵢ sin φᵢ and C = Σ κᵢ cos φᵢ, exactly, for the bearings of one
// station (θ, the direction to the point, is theirs in common).
type vmSet struct {
	e, n, s, c []float64
}

// prepareVM puts the stations on the tangent plane at (lat0, lon0). Each
// measured (geodesic) bearing is turned into a plane bearing by adding the
// difference between the plane and the geodesic azimuth from the station to
// (latRef, lonRef), a point in the area of interest; across an event map the
// remaining difference is far below any bearing sigma.
func prepareVM(lops []LOP, lat0, lon0, latRef, lonRef float64) vmSet {
	return prepareVMEach(func(yield func(*LOP)) {
		for i := range lops {
			yield(&lops[i])
		}
	}, lat0, lon0, latRef, lonRef)
}

// prepareVMEach is prepareVM over the LOPs that each yields.
func prepareVMEach(each func(func(*LOP)), lat0, lon0, latRef, lonRef float64) vmSet {
	v := vmSet{}
	re, rn := ENU(lat0, lon0, latRef, lonRef)
	type st struct {
		k    int
		turn float64
	}
	index := map[posKey]st{}
	each(func(l *LOP) {
		key := posKey{l.Station, l.Lat, l.Lon}
		g, ok := index[key]
		if !ok {
			e, n := ENU(lat0, lon0, l.Lat, l.Lon)
			g = st{k: len(v.e)}
			if d, azi1, _ := Inverse(l.Lat, l.Lon, latRef, lonRef); d > 1 {
				g.turn = wrapPi(math.Atan2(re-e, rn-n) - azi1*deg)
			}
			index[key] = g
			v.e, v.n = append(v.e, e), append(v.n, n)
			v.s, v.c = append(v.s, 0), append(v.c, 0)
		}
		phi := l.BearingDeg*deg + g.turn
		sg := l.SigmaDeg * deg
		kappa := 1 / (sg * sg)
		v.s[g.k] += kappa * math.Sin(phi)
		v.c[g.k] += kappa * math.Cos(phi)
	})
	return v
}

// logLik is Σ κᵢ cos(φᵢ − θᵢ(p)) at plane point p, where θᵢ is the bearing
// from station i to p: the von Mises log-likelihood up to a constant. A
// point on a station contributes nothing for that station.
func (v *vmSet) logLik(e, n float64) float64 {
	var ll float64
	for i := range v.e {
		de, dn := e-v.e[i], n-v.n[i]
		r := math.Sqrt(de*de + dn*dn)
		if r < 1e-9 {
			continue
		}
		ll += (v.s[i]*de + v.c[i]*dn) / r
	}
	return ll
}

// MaxProbMapSamples bounds the likelihood evaluations of one probability
// map (cells × samples per cell).
const MaxProbMapSamples = 20_000_000

// ProbMap is the probability of every cell of a grid, from the bearings
// alone (von Mises bearing errors with κ = 1/σ², σ in radians; a flat prior
// over the grid). P is row-major, P[row*Cols+col], and sums to 1: it is the
// probability GIVEN that the transmitter is inside the grid.
type ProbMap struct {
	Grid *Grid
	P    []float64
}

// NewProbMap evaluates the likelihood at sub×sub points spread evenly
// inside each cell (1 ≤ sub ≤ 64; sub < 1 is taken as 1: the cell centre)
// and normalises over the grid. Stations and bearings are put on the
// tangent plane at the grid origin (see prepareVM). Cells × sub² may not
// exceed MaxProbMapSamples. Memory is one number per cell.
func NewProbMap(lops []LOP, g *Grid, sub int) (*ProbMap, error) {
	return newProbMap(len(lops), func(yield func(*LOP)) {
		for i := range lops {
			yield(&lops[i])
		}
	}, g, sub)
}

// newProbMap is NewProbMap over the n LOPs that each yields.
func newProbMap(n int, each func(func(*LOP)), g *Grid, sub int) (*ProbMap, error) {
	if n == 0 {
		return nil, errors.New("probability map: no bearings")
	}
	if err := g.Validate(); err != nil {
		return nil, err
	}
	if sub < 1 {
		sub = 1
	}
	if sub > 64 {
		return nil, fmt.Errorf("probability map: %d samples per cell side is more than 64", sub)
	}
	if n := float64(g.Cols) * float64(g.Rows) * float64(sub*sub); n > MaxProbMapSamples {
		return nil, fmt.Errorf("probability map: %d×%d cells with %d×%d samples each is %.3g evaluations, more than %.0e: use fewer samples per cell or a smaller grid",
			g.Cols, g.Rows, sub, sub, n, float64(MaxProbMapSamples))
	}
	clat, clon := g.GridToLatLon(float64(g.Cols)/2, float64(g.Rows)/2)
	vm := prepareVMEach(each, g.OriginLat, g.OriginLon, clat, clon)
	ce, cn, re, rn := g.axes()
	ce, cn, re, rn = ce*g.CellM, cn*g.CellM, re*g.CellM, rn*g.CellM
	// Per cell: log Σ exp(ll) over its samples, by log-sum-exp about the
	// cell's own largest sample; then normalised over the grid.
	lc := make([]float64, g.Cols*g.Rows)
	vals := make([]float64, sub*sub)
	maxLC := math.Inf(-1)
	for row := 0; row < g.Rows; row++ {
		for col := 0; col < g.Cols; col++ {
			m := math.Inf(-1)
			k := 0
			for sy := 0; sy < sub; sy++ {
				y := float64(row) + (float64(sy)+0.5)/float64(sub)
				for sx := 0; sx < sub; sx++ {
					x := float64(col) + (float64(sx)+0.5)/float64(sub)
					v := vm.logLik(x*ce+y*re, x*cn+y*rn)
					vals[k] = v
					m = math.Max(m, v)
					k++
				}
			}
			var sum float64
			for _, v := range vals {
				sum += math.Exp(v - m)
			}
			c := row*g.Cols + col
			lc[c] = m + math.Log(sum)
			maxLC = math.Max(maxLC, lc[c])
		}
	}
	var total float64
	for c, v := range lc {
		lc[c] = math.Exp(v - maxLC)
		total += lc[c]
	}
	for c := range lc {
		lc[c] /= total
	}
	return &ProbMap{Grid: g, P: lc}, nil
}

// Top returns the most probable cells, best first: at most maxCells of them
// and none below minP.
func (m *ProbMap) Top(maxCells int, minP float64) []CellProb {
	var out []CellProb
	for i, p := range m.P {
		if p >= minP && p > 0 {
			col, row := i%m.Grid.Cols, i/m.Grid.Cols
			out = append(out, CellProb{Cell: m.Grid.CellLabel(col, row), Col: col, Row: row, Probability: p})
		}
	}
	sort.SliceStable(out, func(a, b int) bool { return out[a].Probability > out[b].Probability })
	if len(out) > maxCells {
		out = out[:maxCells]
	}
	return out
}

// DensityRaster evaluates the bearing likelihood on an nx×ny raster of
// points on the tangent plane at (lat0, lon0): point (i, j) is at east
// e0+(i+0.5)·stepM, north n0+(j+0.5)·stepM; the result is indexed [j*nx+i]
// (j = 0 southmost) and scaled so its largest value is 1. It is the shading
// of a map, not a probability.
func DensityRaster(lops []LOP, lat0, lon0, e0, n0, stepM float64, nx, ny int) []float64 {
	out := make([]float64, nx*ny)
	if len(lops) == 0 || nx < 1 || ny < 1 {
		return out
	}
	clat, clon := FromENU(lat0, lon0, e0+stepM*float64(nx)/2, n0+stepM*float64(ny)/2)
	vm := prepareVM(lops, lat0, lon0, clat, clon)
	maxLL := math.Inf(-1)
	for j := 0; j < ny; j++ {
		n := n0 + (float64(j)+0.5)*stepM
		for i := 0; i < nx; i++ {
			v := vm.logLik(e0+(float64(i)+0.5)*stepM, n)
			out[j*nx+i] = v
			maxLL = math.Max(maxLL, v)
		}
	}
	for k, v := range out {
		out[k] = math.Exp(v - maxLL)
	}
	return out
}
