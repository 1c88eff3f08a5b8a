// Geodesics on an ellipsoid of revolution by the method of
//
//	C. F. F. Karney, "Algorithms for geodesics", J. Geodesy 87:43–55 (2013),
//	https://doi.org/10.1007/s00190-012-0578-z
//
// This file is a Go port of the inverse and direct solutions in GeographicLib's
// C library (geographiclib-c, src/geodesic.c), reduced to what nullseek needs
// (distance and azimuths; no reduced length, geodesic scale or area outputs) and to
// oblate ellipsoids with flattening 0 ≤ f ≤ 1/50. The series are the 6th-order ones
// of the original, giving round-off-limited accuracy (≈15 nm) for the Earth.
//
// Original notice of the ported code:
//
//	Copyright (c) Charles Karney (2012-2022) <charles@karney.com> and licensed
//	under the MIT/X11 License. For more information, see
//	https://geographiclib.sourceforge.io/
//
// MIT/X11 License: Permission is hereby granted, free of charge, to any person
// obtaining a copy of this software and associated documentation files (the
// "Software"), to deal in the Software without restriction, including without
// limitation the rights to use, copy, modify, merge, publish, distribute,
// sublicense, and/or sell copies of the Software, and to permit persons to whom the
// Software is furnished to do so, subject to the following conditions: The above
// copyright notice and this permission notice shall be included in all copies or
// substantial portions of the Software. THE SOFTWARE IS PROVIDED "AS IS", WITHOUT
// WARRANTY OF ANY KIND, EXPRESS OR IMPLIED, INCLUDING BUT NOT LIMITED TO THE
// WARRANTIES OF MERCHANTABILITY, FITNESS FOR A PARTICULAR PURPOSE AND
// NONINFRINGEMENT. IN NO EVENT SHALL THE AUTHORS OR COPYRIGHT HOLDERS BE LIABLE FOR
// ANY CLAIM, DAMAGES OR OTHER LIABILITY, WHETHER IN AN ACTION OF CONTRACT, TORT OR
// OTHERWISE, ARISING FROM, OUT OF OR IN CONNECTION WITH THE SOFTWARE OR THE USE OR
// OTHER DEALINGS IN THE SOFTWARE.

package geodesic

import (
	"fmt"
	"math"
)

const (
	geodOrder = 6
	nA1       = geodOrder
	nC1       = geodOrder
	nC1p      = geodOrder
	nA2       = geodOrder
	nC2       = geodOrder
	nA3       = geodOrder
	nC3       = geodOrder
	nC3x      = (nC3 * (nC3 - 1)) / 2
	nC        = geodOrder + 1

	radPerDeg = math.Pi / 180
	maxit1    = 20
	maxit2    = maxit1 + 53 + 10 // 53 = mantissa digits of float64
	dblEps    = 2.220446049250313e-16
	realMin   = 2.2250738585072014e-308
)

var (
	geodTiny = math.Sqrt(realMin)
	tol0     = dblEps
	tol1     = 200 * tol0
	tol2     = math.Sqrt(tol0)
	tolb     = tol0
	xthresh  = 1000 * tol2
)

// Ellipsoid is an oblate ellipsoid of revolution on which geodesics are solved.
// Build one with NewEllipsoid or use WGS84 / GRS80. The zero value behaves as WGS84.
// An Ellipsoid is immutable and safe for concurrent use.
type Ellipsoid struct {
	p *ellipsoid
}

type ellipsoid struct {
	a, f, f1, e2, ep2, n, b, etol2 float64
	a3x                            [nA3]float64
	c3x                            [nC3x]float64
}

// WGS84 is the World Geodetic System 1984 ellipsoid (a = 6378137 m,
// 1/f = 298.257223563), the datum of GPS positions and of WMM.
var WGS84 = mustEllipsoid(6378137, 1/298.257223563)

// GRS80 is the Geodetic Reference System 1980 ellipsoid (a = 6378137 m,
// 1/f = 298.257222101), used e.g. by GDA94 and ETRS89.
var GRS80 = mustEllipsoid(6378137, 1/298.257222101)

func mustEllipsoid(aM, f float64) Ellipsoid {
	e, err := NewEllipsoid(aM, f)
	if err != nil {
		panic(err) // only reached for the constant parameters above
	}
	return e
}

// NewEllipsoid returns the ellipsoid with equatorial radius aM (metres, > 0) and
// flattening f (not its inverse), which must satisfy 0 ≤ f ≤ 1/50 (Earth-like
// and spherical bodies, where the series solution is accurate to round-off).
func NewEllipsoid(aM, f float64) (Ellipsoid, error) {
	if !(aM > 0) || math.IsInf(aM, 0) {
		return Ellipsoid{}, fmt.Errorf("geodesic: ellipsoid: equatorial radius %g m must be positive and finite", aM)
	}
	if !(f >= 0 && f <= 1.0/50) {
		return Ellipsoid{}, fmt.Errorf("geodesic: ellipsoid: flattening %g outside [0, 1/50]", f)
	}
	g := &ellipsoid{a: aM, f: f}
	g.f1 = 1 - f
	g.e2 = f * (2 - f)
	g.ep2 = g.e2 / sqx(g.f1)
	g.n = f / (2 - f)
	g.b = aM * g.f1
	// Threshold of sig12 for "really short" lines (see geodesic.c).
	g.etol2 = 0.1 * tol2 / math.Sqrt(math.Max(0.001, math.Abs(f))*math.Min(1, 1-f/2)/2)
	g.a3coeff()
	g.c3coeff()
	return Ellipsoid{p: g}, nil
}

func (e Ellipsoid) get() *ellipsoid {
	if e.p == nil {
		return WGS84.p
	}
	return e.p
}

// EquatorialRadiusM returns the semi-major axis a in metres.
func (e Ellipsoid) EquatorialRadiusM() float64 { return e.get().a }

// Flattening returns f = (a−b)/a.
func (e Ellipsoid) Flattening() float64 { return e.get().f }

// Inverse solves the inverse geodesic problem on WGS84: the shortest path from
// (lat1, lon1) to (lat2, lon2), all in degrees. It returns the length s12M in
// metres, the azimuth azi1Deg at point 1 and the forward azimuth azi2Deg at point 2
// (the direction of travel on arrival, GeographicLib's convention; add 180°
// for the direction from point 2 back to point 1). Azimuths are clockwise from true
// north in [−180°, 180°]. Accuracy is ≈15 nm for any pair, including nearly
// antipodal ones. A latitude outside [−90°, 90°] or a NaN input gives NaN results.
// For coincident points s12M is 0 and the azimuths are those of a meridian.
func Inverse(lat1, lon1, lat2, lon2 float64) (s12M, azi1Deg, azi2Deg float64) {
	return WGS84.Inverse(lat1, lon1, lat2, lon2)
}

// Direct solves the direct geodesic problem on WGS84: starting at (lat1, lon1) in
// degrees with azimuth azi1Deg (clockwise from north), travel s12M metres (negative
// travels backwards) along the geodesic. It returns the end point (lat2 in
// [−90, 90], lon2 in [−180, 180]) and the forward azimuth azi2Deg there, in
// [−180°, 180°]. A latitude outside [−90°, 90°] or a NaN input gives NaN results.
func Direct(lat1, lon1, azi1Deg, s12M float64) (lat2, lon2, azi2Deg float64) {
	return WGS84.Direct(lat1, lon1, azi1Deg, s12M)
}

// Inverse solves the inverse geodesic problem on this ellipsoid; see the package
// function Inverse for units, conventions and edge behaviour.
func (e Ellipsoid) Inverse(lat1, lon1, lat2, lon2 float64) (s12M, azi1Deg, azi2Deg float64) {
	s12, salp1, calp1, salp2, calp2 := e.get().inverse(lat1, lon1, lat2, lon2)
	return s12, atan2d(salp1, calp1), atan2d(salp2, calp2)
}

// Direct solves the direct geodesic problem on this ellipsoid; see the package
// function Direct for units, conventions and edge behaviour.
func (e Ellipsoid) Direct(lat1, lon1, azi1Deg, s12M float64) (lat2, lon2, azi2Deg float64) {
	return e.get().direct(lat1, lon1, azi1Deg, s12M)
}

// ---- small helpers (GeographicLib Math) ----

func sqx(x float64) float64 { return x * x }

// sumx is the error-free sum: u + v = s + t exactly.
func sumx(u, v float64) (s, t float64) {
	s = u + v
	up := s - v
	vpp := s - up
	up -= u
	vpp -= v
	if s != 0 {
		t = 0 - (up + vpp)
	} else {
		t = s
	}
	return s, t
}

// polyval evaluates the polynomial of radPerDeg n with coefficients p (highest first).
func polyval(n int, p []float64, x float64) float64 {
	if n < 0 {
		return 0
	}
	y := p[0]
	for i := 1; i <= n; i++ {
		y = y*x + p[i]
	}
	return y
}

func norm2(s, c float64) (float64, float64) {
	r := math.Hypot(s, c)
	return s / r, c / r
}

// angNormalize reduces x to [−180, 180], keeping the sign of x for ±180.
func angNormalize(x float64) float64 {
	y := math.Remainder(x, 360)
	if math.Abs(y) == 180 {
		return math.Copysign(180, x)
	}
	return y
}

func latFix(x float64) float64 {
	if math.Abs(x) > 90 {
		return math.NaN()
	}
	return x
}

// angDiff returns y − x reduced to [−180, 180] accurately, with the round-off e.
func angDiff(x, y float64) (d, e float64) {
	d, t := sumx(math.Remainder(-x, 360), math.Remainder(y, 360))
	d, t = sumx(math.Remainder(d, 360), t)
	if d == 0 || math.Abs(d) == 180 {
		sgn := -t
		if t == 0 {
			sgn = y - x
		}
		d = math.Copysign(d, sgn)
	}
	return d, t
}

// angRound rounds geodTiny values so that 1/16 − (1/16 − x) is exact, which keeps
// nearly-equatorial or nearly-meridional cases symmetric.
func angRound(x float64) float64 {
	const z = 1.0 / 16
	y := math.Abs(x)
	w := z - y
	if w > 0 {
		y = z - w
	}
	return math.Copysign(y, x)
}

// remquo90 returns r = x − 90q with |r| ≤ 45 and the quadrant q (exact).
func remquo90(x float64) (float64, int) {
	r := math.Remainder(x, 360)
	q := math.Round(r / 90)
	r -= 90 * q
	if math.IsNaN(q) {
		return r, 0
	}
	return r, int(q)
}

func sincosQuadrant(r float64, q int, x float64) (sinx, cosx float64) {
	s, c := math.Sincos(r * radPerDeg)
	switch uint(q) & 3 {
	case 0:
		sinx, cosx = s, c
	case 1:
		sinx, cosx = c, -s
	case 2:
		sinx, cosx = -s, -c
	default:
		sinx, cosx = -c, s
	}
	cosx += 0
	if sinx == 0 {
		sinx = math.Copysign(sinx, x)
	}
	return sinx, cosx
}

// sincosd is sin and cos of x degrees, reducing exactly to [−45°, 45°] first.
func sincosd(x float64) (float64, float64) {
	r, q := remquo90(x)
	return sincosQuadrant(r, q, x)
}

// sincosde is sincosd of x + t where t is a small correction.
func sincosde(x, t float64) (float64, float64) {
	r, q := remquo90(x)
	return sincosQuadrant(angRound(r+t), q, x)
}

// atan2d is atan2 in degrees, result in [−180, 180].
func atan2d(y, x float64) float64 {
	q := 0
	if math.Abs(y) > math.Abs(x) {
		x, y = y, x
		q = 2
	}
	if math.Signbit(x) {
		x = -x
		q++
	}
	ang := math.Atan2(y, x) / radPerDeg
	switch q {
	case 1:
		ang = math.Copysign(180, y) - ang
	case 2:
		ang = 90 - ang
	case 3:
		ang = -90 + ang
	}
	return ang
}

// sinCosSeries evaluates by Clenshaw summation
//
//	sinp: Σ c[i] sin(2i x), i = 1..n   (c[0] unused)
//	else: Σ c[i] cos((2i+1) x), i = 0..n−1
func sinCosSeries(sinp bool, sinx, cosx float64, c []float64, n int) float64 {
	k := n
	if sinp {
		k++
	}
	ar := 2 * (cosx - sinx) * (cosx + sinx)
	var y0, y1 float64
	if n&1 != 0 {
		k--
		y0 = c[k]
	}
	for n /= 2; n > 0; n-- {
		k--
		y1 = ar*y0 - y1 + c[k]
		k--
		y0 = ar*y1 - y0 + c[k]
	}
	if sinp {
		return 2 * sinx * cosx * y0
	}
	return cosx * (y0 - y1)
}

// ---- the direct problem ----

func (g *ellipsoid) direct(lat1, lon1, azi1, s12 float64) (lat2, lon2, azi2 float64) {
	azi1 = angNormalize(azi1)
	salp1, calp1 := sincosd(angRound(azi1))
	lat1 = latFix(lat1)
	sbet1, cbet1 := sincosd(angRound(lat1))
	sbet1 *= g.f1
	sbet1, cbet1 = norm2(sbet1, cbet1)
	cbet1 = math.Max(geodTiny, cbet1)

	// sin(alp1) cos(bet1) = sin(alp0)
	salp0 := salp1 * cbet1
	calp0 := math.Hypot(calp1, salp1*sbet1)
	// tan(bet1) = tan(sig1) cos(alp1); tan(omg1) = sin(alp0) tan(sig1)
	ssig1 := sbet1
	somg1 := salp0 * sbet1
	csig1 := 1.0
	if sbet1 != 0 || calp1 != 0 {
		csig1 = cbet1 * calp1
	}
	comg1 := csig1
	ssig1, csig1 = norm2(ssig1, csig1)

	k2 := sqx(calp0) * g.ep2
	eps := k2 / (2*(1+math.Sqrt(1+k2)) + k2)

	a1m1 := a1m1f(eps)
	var c1a, c1pa, c3a [nC]float64
	c1f(eps, c1a[:])
	c1pf(eps, c1pa[:])
	b11 := sinCosSeries(true, ssig1, csig1, c1a[:], nC1)
	s, c := math.Sincos(b11)
	stau1 := ssig1*c + csig1*s
	ctau1 := csig1*c - ssig1*s
	g.c3f(eps, c3a[:])
	a3c := -g.f * salp0 * g.a3f(eps)
	b31 := sinCosSeries(true, ssig1, csig1, c3a[:], nC3-1)

	// Distance to arc length on the auxiliary sphere.
	tau12 := s12 / (g.b * (1 + a1m1))
	s, c = math.Sincos(tau12)
	b12 := -sinCosSeries(true, stau1*c+ctau1*s, ctau1*c-stau1*s, c1pa[:], nC1p)
	sig12 := tau12 - (b12 - b11)
	ssig12, csig12 := math.Sincos(sig12)
	if math.Abs(g.f) > 0.01 {
		// The reverted series loses accuracy for |f| > 1/100: one Newton step.
		ssig2 := ssig1*csig12 + csig1*ssig12
		csig2 := csig1*csig12 - ssig1*ssig12
		b12 = sinCosSeries(true, ssig2, csig2, c1a[:], nC1)
		serr := (1+a1m1)*(sig12+(b12-b11)) - s12/g.b
		sig12 -= serr / math.Sqrt(1+k2*sqx(ssig2))
		ssig12, csig12 = math.Sincos(sig12)
	}

	ssig2 := ssig1*csig12 + csig1*ssig12
	csig2 := csig1*csig12 - ssig1*ssig12
	sbet2 := calp0 * ssig2
	cbet2 := math.Hypot(salp0, calp0*csig2)
	if cbet2 == 0 {
		cbet2, csig2 = geodTiny, geodTiny
	}
	salp2 := salp0
	calp2 := calp0 * csig2
	somg2 := salp0 * ssig2
	comg2 := csig2
	omg12 := math.Atan2(somg2*comg1-comg2*somg1, comg2*comg1+somg2*somg1)
	lam12 := omg12 + a3c*(sig12+(sinCosSeries(true, ssig2, csig2, c3a[:], nC3-1)-b31))
	lon12 := lam12 / radPerDeg
	lon2 = angNormalize(angNormalize(lon1) + angNormalize(lon12))
	lat2 = atan2d(sbet2, g.f1*cbet2)
	azi2 = atan2d(salp2, calp2)
	return lat2, lon2, azi2
}

// ---- the inverse problem ----

// inverse returns s12 and the sines/cosines of the azimuths at both ends.
func (g *ellipsoid) inverse(lat1, lon1, lat2, lon2 float64) (s12, salp1, calp1, salp2, calp2 float64) {
	var ca [nC]float64
	lon12, lon12s := angDiff(lon1, lon2)
	// Make the longitude difference positive.
	lonsign := 1.0
	if math.Signbit(lon12) {
		lonsign = -1
	}
	lon12 *= lonsign
	lon12s *= lonsign
	lam12 := lon12 * radPerDeg
	slam12, clam12 := sincosde(lon12, lon12s)
	lon12s = (180 - lon12) - lon12s // supplementary longitude difference

	// Very close to the equator counts as on it.
	lat1 = angRound(latFix(lat1))
	lat2 = angRound(latFix(lat2))
	// Point 1 gets the larger |latitude|; a NaN latitude becomes lat1.
	swapp := 1.0
	if math.Abs(lat1) < math.Abs(lat2) || math.IsNaN(lat2) {
		swapp = -1
		lonsign *= -1
		lat1, lat2 = lat2, lat1
	}
	// Make lat1 <= −0.
	latsign := -1.0
	if math.Signbit(lat1) {
		latsign = 1
	}
	lat1 *= latsign
	lat2 *= latsign
	// Now 0 <= lon12 <= 180, −90 <= lat1 <= −0, lat1 <= lat2 <= −lat1.

	sbet1, cbet1 := sincosd(lat1)
	sbet1 *= g.f1
	sbet1, cbet1 = norm2(sbet1, cbet1)
	cbet1 = math.Max(geodTiny, cbet1)
	sbet2, cbet2 := sincosd(lat2)
	sbet2 *= g.f1
	sbet2, cbet2 = norm2(sbet2, cbet2)
	cbet2 = math.Max(geodTiny, cbet2)

	// Force bet2 = ±bet1 exactly when the difference vanishes.
	if cbet1 < -sbet1 {
		if cbet2 == cbet1 {
			sbet2 = math.Copysign(sbet1, sbet2)
		}
	} else if math.Abs(sbet2) == -sbet1 {
		cbet2 = cbet1
	}

	dn1 := math.Sqrt(1 + g.ep2*sqx(sbet1))
	dn2 := math.Sqrt(1 + g.ep2*sqx(sbet2))

	var sig12, s12x, m12x float64
	meridian := lat1 == -90 || slam12 == 0
	if meridian {
		// Both ends on one full meridian: the geodesic may follow it.
		calp1, salp1 = clam12, slam12 // head to the target longitude
		calp2, salp2 = 1, 0           // at the target we head north
		ssig1, csig1 := sbet1, calp1*cbet1
		ssig2, csig2 := sbet2, calp2*cbet2
		sig12 = math.Atan2(math.Max(0, csig1*ssig2-ssig1*csig2)+0, csig1*csig2+ssig1*ssig2)
		s12x, m12x = g.lengths(g.n, sig12, ssig1, csig1, dn1, ssig2, csig2, dn2, true, ca[:])
		if sig12 < 1 || m12x >= 0 {
			if sig12 < 3*geodTiny || (sig12 < tol0 && (s12x < 0 || m12x < 0)) {
				sig12, m12x, s12x = 0, 0, 0
			}
			s12x *= g.b
		} else {
			meridian = false // only for prolate ellipsoids, excluded here
		}
	}

	if !meridian && sbet1 == 0 && (g.f <= 0 || lon12s >= g.f*180) {
		// Geodesic runs along the equator.
		calp1, calp2 = 0, 0
		salp1, salp2 = 1, 1
		s12x = g.a * lam12
	} else if !meridian {
		// Neither meridional nor equatorial: Newton's method on alp1.
		var dnm float64
		sig12, salp1, calp1, salp2, calp2, dnm = g.inverseStart(sbet1, cbet1, sbet2, cbet2,
			lam12, slam12, clam12)
		if sig12 >= 0 {
			// Short line; inverseStart set salp2, calp2 and dnm.
			s12x = sig12 * g.b * dnm
		} else {
			var ssig1, csig1, ssig2, csig2, eps float64
			salp1a, calp1a := geodTiny, 1.0
			salp1b, calp1b := geodTiny, -1.0
			tripn, tripb := false, false
			for numit := 0; ; numit++ {
				var v, dv float64
				v, dv, salp2, calp2, sig12, ssig1, csig1, ssig2, csig2, eps = g.lambda12(
					sbet1, cbet1, dn1, sbet2, cbet2, dn2, salp1, calp1, slam12, clam12,
					numit < maxit1, ca[:])
				lim := 1.0
				if tripn {
					lim = 8
				}
				if tripb || !(math.Abs(v) >= lim*tol0) || numit == maxit2 {
					break
				}
				// Update the bracket.
				if v > 0 && (numit > maxit1 || calp1/salp1 > calp1b/salp1b) {
					salp1b, calp1b = salp1, calp1
				} else if v < 0 && (numit > maxit1 || calp1/salp1 < calp1a/salp1a) {
					salp1a, calp1a = salp1, calp1
				}
				if numit < maxit1 && dv > 0 {
					dalp1 := -v / dv
					if math.Abs(dalp1) < math.Pi {
						sdalp1, cdalp1 := math.Sincos(dalp1)
						nsalp1 := salp1*cdalp1 + calp1*sdalp1
						if nsalp1 > 0 {
							calp1 = calp1*cdalp1 - salp1*sdalp1
							salp1 = nsalp1
							salp1, calp1 = norm2(salp1, calp1)
							tripn = math.Abs(v) <= 16*tol0
							continue
						}
					}
				}
				// Bisect the bracket.
				salp1 = (salp1a + salp1b) / 2
				calp1 = (calp1a + calp1b) / 2
				salp1, calp1 = norm2(salp1, calp1)
				tripn = false
				tripb = math.Abs(salp1a-salp1)+(calp1a-calp1) < tolb ||
					math.Abs(salp1-salp1b)+(calp1-calp1b) < tolb
			}
			s12x, _ = g.lengths(eps, sig12, ssig1, csig1, dn1, ssig2, csig2, dn2, true, ca[:])
			s12x *= g.b
		}
	}
	s12 = 0 + s12x // −0 → 0

	// Undo the transformation to canonical form.
	if swapp < 0 {
		salp1, salp2 = salp2, salp1
		calp1, calp2 = calp2, calp1
	}
	salp1 *= swapp * lonsign
	calp1 *= swapp * latsign
	salp2 *= swapp * lonsign
	calp2 *= swapp * latsign
	return s12, salp1, calp1, salp2, calp2
}

// lengths returns s12/b (when wantS) and the reduced length m12/b.
func (g *ellipsoid) lengths(eps, sig12, ssig1, csig1, dn1, ssig2, csig2, dn2 float64,
	wantS bool, ca []float64) (s12b, m12b float64) {
	var cb [nC]float64
	a1 := a1m1f(eps)
	c1f(eps, ca)
	a2 := a2m1f(eps)
	c2f(eps, cb[:])
	m0 := a1 - a2
	a1++
	a2++
	var j12 float64
	if wantS {
		b1 := sinCosSeries(true, ssig2, csig2, ca, nC1) - sinCosSeries(true, ssig1, csig1, ca, nC1)
		s12b = a1 * (sig12 + b1)
		b2 := sinCosSeries(true, ssig2, csig2, cb[:], nC2) - sinCosSeries(true, ssig1, csig1, cb[:], nC2)
		j12 = m0*sig12 + (a1*b1 - a2*b2)
	} else {
		for l := 1; l <= nC2; l++ {
			cb[l] = a1*ca[l] - a2*cb[l]
		}
		j12 = m0*sig12 + (sinCosSeries(true, ssig2, csig2, cb[:], nC2) -
			sinCosSeries(true, ssig1, csig1, cb[:], nC2))
	}
	// The explicit conversions stop fused multiply-add, keeping the
	// cancellation exact for coincident points.
	m12b = float64(dn2*float64(csig1*ssig2)) - float64(dn1*float64(ssig1*csig2)) - csig1*csig2*j12
	return s12b, m12b
}

// astroid solves k⁴+2k³−(x²+y²−1)k²−2y²k−y² = 0 for the positive root k.
func astroid(x, y float64) float64 {
	p := sqx(x)
	q := sqx(y)
	r := (p + q - 1) / 6
	if q == 0 && r <= 0 {
		// y = 0 with |x| <= 1.
		return 0
	}
	s := p * q / 4 // r³ s
	r2 := sqx(r)
	r3 := r * r2
	disc := s * (s + 2*r3) // zero on the evolute p^(1/3)+q^(1/3) = 1
	u := r
	if disc >= 0 {
		t3 := s + r3
		if t3 < 0 {
			t3 -= math.Sqrt(disc)
		} else {
			t3 += math.Sqrt(disc)
		}
		t := math.Cbrt(t3)
		if t != 0 {
			u += t + r2/t
		}
	} else {
		ang := math.Atan2(math.Sqrt(-disc), -(s + r3))
		u += 2 * r * math.Cos(ang/3)
	}
	v := math.Sqrt(sqx(u) + q)
	var uv float64
	if u < 0 {
		uv = q / (v - u)
	} else {
		uv = u + v
	}
	w := (uv - q) / (2 * v)
	return uv / (math.Sqrt(uv+sqx(w)) + w)
}

// inverseStart returns a starting alp1 for Newton's method (sig12 = −1) or, for
// short lines, the solution itself (sig12 ≥ 0 with alp2 and dnm).
func (g *ellipsoid) inverseStart(sbet1, cbet1, sbet2, cbet2,
	lam12, slam12, clam12 float64) (sig12, salp1, calp1, salp2, calp2, dnm float64) {
	sig12 = -1
	sbet12 := sbet2*cbet1 - cbet2*sbet1
	cbet12 := cbet2*cbet1 + sbet2*sbet1
	sbet12a := sbet2*cbet1 + cbet2*sbet1
	shortline := cbet12 >= 0 && sbet12 < 0.5 && cbet2*lam12 < 0.5
	var somg12, comg12 float64
	if shortline {
		sbetm2 := sqx(sbet1 + sbet2)
		sbetm2 /= sbetm2 + sqx(cbet1+cbet2)
		dnm = math.Sqrt(1 + g.ep2*sbetm2)
		omg12 := lam12 / (g.f1 * dnm)
		somg12, comg12 = math.Sincos(omg12)
	} else {
		somg12, comg12 = slam12, clam12
	}

	salp1 = cbet2 * somg12
	if comg12 >= 0 {
		calp1 = sbet12 + cbet2*sbet1*sqx(somg12)/(1+comg12)
	} else {
		calp1 = sbet12a - cbet2*sbet1*sqx(somg12)/(1-comg12)
	}
	ssig12 := math.Hypot(salp1, calp1)
	csig12 := sbet1*sbet2 + cbet1*cbet2*comg12

	if shortline && ssig12 < g.etol2 {
		// Really short lines.
		salp2 = cbet1 * somg12
		t := 1 - comg12
		if comg12 >= 0 {
			t = sqx(somg12) / (1 + comg12)
		}
		calp2 = sbet12 - cbet1*sbet2*t
		salp2, calp2 = norm2(salp2, calp2)
		sig12 = math.Atan2(ssig12, csig12)
	} else if math.Abs(g.n) > 0.1 || csig12 >= 0 || ssig12 >= 6*math.Abs(g.n)*math.Pi*sqx(cbet1) {
		// The zeroth-order spherical approximation is good enough.
	} else {
		// Nearly antipodal (f > 0 here): scale to the astroid problem.
		lam12x := math.Atan2(-slam12, -clam12) // lam12 − π
		k2 := sqx(sbet1) * g.ep2
		eps := k2 / (2*(1+math.Sqrt(1+k2)) + k2)
		lamscale := g.f * cbet1 * g.a3f(eps) * math.Pi
		betscale := lamscale * cbet1
		x := lam12x / lamscale
		y := sbet12a / betscale
		if y > -tol1 && x > -1-xthresh {
			// Strip near the cut.
			salp1 = math.Min(1, -x)
			calp1 = -math.Sqrt(1 - sqx(salp1))
		} else {
			k := astroid(x, y)
			omg12a := lamscale * (-x * k / (1 + k))
			somg12, comg12 = math.Sincos(omg12a)
			comg12 = -comg12
			salp1 = cbet2 * somg12
			calp1 = sbet12a - cbet2*sbet1*sqx(somg12)/(1-comg12)
		}
	}
	// Sanity check on the starting guess (written to let NaN through).
	if !(salp1 <= 0) {
		salp1, calp1 = norm2(salp1, calp1)
	} else {
		salp1, calp1 = 1, 0
	}
	return sig12, salp1, calp1, salp2, calp2, dnm
}

// lambda12 evaluates lam12(alp1) − lam12 (as v) and, if diffp, its derivative.
func (g *ellipsoid) lambda12(sbet1, cbet1, dn1, sbet2, cbet2, dn2, salp1, calp1,
	slam120, clam120 float64, diffp bool, ca []float64) (
	v, dlam12, salp2, calp2, sig12, ssig1, csig1, ssig2, csig2, eps float64) {
	if sbet1 == 0 && calp1 == 0 {
		// Break the degeneracy of the equatorial line.
		calp1 = -geodTiny
	}
	salp0 := salp1 * cbet1
	calp0 := math.Hypot(calp1, salp1*sbet1)

	ssig1 = sbet1
	somg1 := salp0 * sbet1
	csig1 = calp1 * cbet1
	comg1 := csig1
	ssig1, csig1 = norm2(ssig1, csig1)

	// Enforce symmetries when |bet2| = −bet1.
	if cbet2 != cbet1 {
		salp2 = salp0 / cbet2
	} else {
		salp2 = salp1
	}
	if cbet2 != cbet1 || math.Abs(sbet2) != -sbet1 {
		var d float64
		if cbet1 < -sbet1 {
			d = (cbet2 - cbet1) * (cbet1 + cbet2)
		} else {
			d = (sbet1 - sbet2) * (sbet1 + sbet2)
		}
		calp2 = math.Sqrt(sqx(calp1*cbet1)+d) / cbet2
	} else {
		calp2 = math.Abs(calp1)
	}
	ssig2 = sbet2
	somg2 := salp0 * sbet2
	csig2 = calp2 * cbet2
	comg2 := csig2
	ssig2, csig2 = norm2(ssig2, csig2)

	sig12 = math.Atan2(math.Max(0, csig1*ssig2-ssig1*csig2)+0, csig1*csig2+ssig1*ssig2)
	somg12 := math.Max(0, comg1*somg2-somg1*comg2) + 0
	comg12 := comg1*comg2 + somg1*somg2
	eta := math.Atan2(somg12*clam120-comg12*slam120, comg12*clam120+somg12*slam120)
	k2 := sqx(calp0) * g.ep2
	eps = k2 / (2*(1+math.Sqrt(1+k2)) + k2)
	g.c3f(eps, ca)
	b312 := sinCosSeries(true, ssig2, csig2, ca, nC3-1) - sinCosSeries(true, ssig1, csig1, ca, nC3-1)
	domg12 := -g.f * g.a3f(eps) * salp0 * (sig12 + b312)
	v = eta + domg12

	if diffp {
		if calp2 == 0 {
			dlam12 = -2 * g.f1 * dn1 / sbet1
		} else {
			_, dlam12 = g.lengths(eps, sig12, ssig1, csig1, dn1, ssig2, csig2, dn2, false, ca)
			dlam12 *= g.f1 / (calp2 * cbet2)
		}
	}
	return v, dlam12, salp2, calp2, sig12, ssig1, csig1, ssig2, csig2, eps
}

// ---- series coefficients (Karney 2013, eqs. 17, 18, 20, 21, 24, 25) ----

func (g *ellipsoid) a3f(eps float64) float64 { return polyval(nA3-1, g.a3x[:], eps) }

// c3f sets c[1] … c[nC3−1].
func (g *ellipsoid) c3f(eps float64, c []float64) {
	mult := 1.0
	o := 0
	for l := 1; l < nC3; l++ {
		m := nC3 - l - 1
		mult *= eps
		c[l] = mult * polyval(m, g.c3x[o:], eps)
		o += m + 1
	}
}

// a1m1f is A1 − 1.
func a1m1f(eps float64) float64 {
	coeff := [...]float64{1, 4, 64, 0, 256}
	m := nA1 / 2
	t := polyval(m, coeff[:], sqx(eps)) / coeff[m+1]
	return (t + eps) / (1 - eps)
}

var c1Coeff = [...]float64{
	-1, 6, -16, 32,
	-9, 64, -128, 2048,
	9, -16, 768,
	3, -5, 512,
	-7, 1280,
	-7, 2048,
}

var c1pCoeff = [...]float64{
	205, -432, 768, 1536,
	4005, -4736, 3840, 12288,
	-225, 116, 384,
	-7173, 2695, 7680,
	3467, 7680,
	38081, 61440,
}

var c2Coeff = [...]float64{
	1, 2, 16, 32,
	35, 64, 384, 2048,
	15, 80, 768,
	7, 35, 512,
	63, 1280,
	77, 2048,
}

// evenSeries fills c[1..n] from a coefficient table in eps² (C1, C1', C2).
func evenSeries(coeff []float64, n int, eps float64, c []float64) {
	eps2 := sqx(eps)
	d := eps
	o := 0
	for l := 1; l <= n; l++ {
		m := (n - l) / 2
		c[l] = d * polyval(m, coeff[o:], eps2) / coeff[o+m+1]
		o += m + 2
		d *= eps
	}
}

func c1f(eps float64, c []float64)  { evenSeries(c1Coeff[:], nC1, eps, c) }
func c1pf(eps float64, c []float64) { evenSeries(c1pCoeff[:], nC1p, eps, c) }
func c2f(eps float64, c []float64)  { evenSeries(c2Coeff[:], nC2, eps, c) }

// a2m1f is A2 − 1.
func a2m1f(eps float64) float64 {
	coeff := [...]float64{-11, -28, -192, 0, 256}
	m := nA2 / 2
	t := polyval(m, coeff[:], sqx(eps)) / coeff[m+1]
	return (t - eps) / (1 + eps)
}

func (g *ellipsoid) a3coeff() {
	coeff := [...]float64{
		-3, 128,
		-2, -3, 64,
		-1, -3, -1, 16,
		3, -1, -2, 8,
		1, -1, 2,
		1, 1,
	}
	o, k := 0, 0
	for j := nA3 - 1; j >= 0; j-- {
		m := min(nA3-j-1, j)
		g.a3x[k] = polyval(m, coeff[o:], g.n) / coeff[o+m+1]
		k++
		o += m + 2
	}
}

func (g *ellipsoid) c3coeff() {
	coeff := [...]float64{
		3, 128,
		2, 5, 128,
		-1, 3, 3, 64,
		-1, 0, 1, 8,
		-1, 1, 4,
		5, 256,
		1, 3, 128,
		-3, -2, 3, 64,
		1, -3, 2, 32,
		7, 512,
		-10, 9, 384,
		5, -9, 5, 192,
		7, 512,
		-14, 7, 512,
		21, 2560,
	}
	o, k := 0, 0
	for l := 1; l < nC3; l++ {
		for j := nC3 - 1; j >= l; j-- {
			m := min(nC3-j-1, j)
			g.c3x[k] = polyval(m, coeff[o:], g.n) / coeff[o+m+1]
			k++
			o += m + 2
		}
	}
}
