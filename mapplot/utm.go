package mapplot

import "math"

// UTM returns the WGS84 UTM easting and northing in metres of (lat, lon)
// in degrees on the given zone (1..60; north or south false northing),
// also outside the zone's own 6° (a sheet near a zone edge keeps one grid).
//
// Transverse Mercator by Krüger's series in the third flattening n, to n⁴
// (Karney, "Transverse Mercator with an accuracy of a few nanometers",
// J. Geodesy 85 (2011), eqs. 7–9, 11 and 35 with the α coefficients of
// eq. 35 truncated at n⁴): better than 1 mm within 1000 km of the central
// meridian, checked against PROJ (TestUTMAgainstCs2cs). UTM constants:
// k0 = 0.9996, false easting 500 km, false northing 10 000 km south
// (NGA.SIG.0012_2.0.0_UTMUPS, 2014, §2.1, §2.2).
func UTM(lat, lon float64, zone int, south bool) (eastM, northM float64) {
	const (
		a  = 6378137.0         // WGS84 semi-major axis, m (NIMA TR8350.2, 3.2)
		f  = 1 / 298.257223563 // WGS84 flattening
		k0 = 0.9996
	)
	n := f / (2 - f)
	n2, n3, n4 := n*n, n*n*n, n*n*n*n
	A := a / (1 + n) * (1 + n2/4 + n4/64)
	alpha := [4]float64{
		n/2 - 2*n2/3 + 5*n3/16 + 41*n4/180,
		13*n2/48 - 3*n3/5 + 557*n4/1440,
		61*n3/240 - 103*n4/140,
		49561 * n4 / 161280,
	}
	lon0 := float64(zone*6 - 183)
	phi := lat * math.Pi / 180
	lam := math.Remainder(lon-lon0, 360) * math.Pi / 180
	e := math.Sqrt(f * (2 - f))
	// conformal latitude: tan χ = sinh(atanh(sin φ) − e·atanh(e·sin φ))
	s := math.Sin(phi)
	t := math.Sinh(math.Atanh(s) - e*math.Atanh(e*s))
	xi := math.Atan2(t, math.Cos(lam))
	eta := math.Asinh(math.Sin(lam) / math.Hypot(t, math.Cos(lam)))
	x, y := xi, eta
	for j := 1; j <= 4; j++ {
		x += alpha[j-1] * math.Sin(2*float64(j)*xi) * math.Cosh(2*float64(j)*eta)
		y += alpha[j-1] * math.Cos(2*float64(j)*xi) * math.Sinh(2*float64(j)*eta)
	}
	eastM = 500000 + k0*A*y
	northM = k0 * A * x
	if south {
		northM += 10000000
	}
	return eastM, northM
}
