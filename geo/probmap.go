package geo

import (
	"errors"
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

// vmSet holds bearings prepared for fast von Mises evaluation on a plane.
type vmSet struct {
	e, n, sin, cos, kappa []float64
}

// prepareVM puts the stations on the tangent plane at (lat0, lon0). Each
// measured (geodesic) bearing is turned into a plane bearing by adding the
// difference between the plane and the geodesic azimuth from the station to
// (latRef, lonRef), a point in the area of interest; across an event map the
// remaining difference is far below any bearing sigma.
func prepareVM(lops []LOP, lat0, lon0, latRef, lonRef float64) vmSet {
	v := vmSet{}
	re, rn := ENU(lat0, lon0, latRef, lonRef)
	for _, l := range lops {
		e, n := ENU(lat0, lon0, l.Lat, l.Lon)
		phi := l.BearingDeg * deg
		if d, azi1, _ := Inverse(l.Lat, l.Lon, latRef, lonRef); d > 1 {
			phi += wrapPi(math.Atan2(re-e, rn-n) - azi1*deg)
		}
		s := l.SigmaDeg * deg
		v.e = append(v.e, e)
		v.n = append(v.n, n)
		v.sin = append(v.sin, math.Sin(phi))
		v.cos = append(v.cos, math.Cos(phi))
		v.kappa = append(v.kappa, 1/(s*s))
	}
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
		ll += v.kappa[i] * (v.sin[i]*de + v.cos[i]*dn) / r
	}
	return ll
}

// ProbMap is the probability of every cell of a grid, from the bearings
// alone (von Mises bearing errors with κ = 1/σ², σ in radians; a flat prior
// over the grid). P is row-major, P[row*Cols+col], and sums to 1: it is the
// probability GIVEN that the transmitter is inside the grid.
type ProbMap struct {
	Grid *Grid
	P    []float64
}

// NewProbMap evaluates the likelihood at sub×sub points spread evenly
// inside each cell (sub < 1 is taken as 1: the cell centre) and normalises
// over the grid. Stations and bearings are put on the tangent plane at the
// grid origin (see prepareVM).
func NewProbMap(lops []LOP, g *Grid, sub int) (*ProbMap, error) {
	if len(lops) == 0 {
		return nil, errors.New("probability map: no bearings")
	}
	if err := g.Validate(); err != nil {
		return nil, err
	}
	if sub < 1 {
		sub = 1
	}
	clat, clon := g.GridToLatLon(float64(g.Cols)/2, float64(g.Rows)/2)
	vm := prepareVM(lops, g.OriginLat, g.OriginLon, clat, clon)
	ce, cn, re, rn := g.axes()
	ce, cn, re, rn = ce*g.CellM, cn*g.CellM, re*g.CellM, rn*g.CellM
	ns := sub * sub
	ll := make([]float64, g.Cols*g.Rows*ns)
	maxLL := math.Inf(-1)
	k := 0
	for row := 0; row < g.Rows; row++ {
		for col := 0; col < g.Cols; col++ {
			for sy := 0; sy < sub; sy++ {
				y := float64(row) + (float64(sy)+0.5)/float64(sub)
				for sx := 0; sx < sub; sx++ {
					x := float64(col) + (float64(sx)+0.5)/float64(sub)
					v := vm.logLik(x*ce+y*re, x*cn+y*rn)
					ll[k] = v
					if v > maxLL {
						maxLL = v
					}
					k++
				}
			}
		}
	}
	p := make([]float64, g.Cols*g.Rows)
	var total float64
	for c := range p {
		var s float64
		for _, v := range ll[c*ns : (c+1)*ns] {
			s += math.Exp(v - maxLL)
		}
		p[c] = s
		total += s
	}
	for c := range p {
		p[c] /= total
	}
	return &ProbMap{Grid: g, P: p}, nil
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
