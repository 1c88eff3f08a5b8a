package geo

import (
	_ "embed"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"nullseek/internal/angle"
	"nullseek/internal/geodesic"
	"sync"
	"time"
)

// World Magnetic Model 2025 (NOAA NCEI / BGS, "The US/UK World Magnetic Model for
// 2025-2030", technical report). The coefficients are public-domain data; the
// embedded file wmm2025.json is data/wmm-2025.json of the npm package geomagnetism
// 0.2.0 (sha256 dbe6da60…dda43), which carries WMM.COF of WMM2025 as arrays
// indexed n(n+1)/2 + m. Evaluation follows the report's equations: geodetic to
// geocentric spherical coordinates on WGS84, Schmidt semi-normalised associated
// Legendre functions, the secular variation g(t) = g + (t − 2025.0)·ġ, and
// rotation of the field back to the geodetic frame.

//go:embed wmm2025.json
var wmm2025JSON []byte

const (
	wmmEpoch     = 2025.0
	wmmValidEnd  = 2030.0
	wmmRefRadius = 6371200.0 // geomagnetic reference radius, m
	wmmMaxDeg    = 12
	wmmNumCoef   = (wmmMaxDeg + 1) * (wmmMaxDeg + 2) / 2
)

// ErrOutsideModelSpan is wrapped by the warning that WMM and Declination return
// for dates outside 2025.0–2030.0, the validity span of WMM2025. The returned
// values are still computed (extrapolated with the secular variation) and usable
// with reduced accuracy.
var ErrOutsideModelSpan = errors.New("date outside the WMM2025 validity span 2025.0-2030.0")

// Field is the geomagnetic main field at a point, in the geodetic (WGS84) frame:
// X north, Y east, Z down, H horizontal intensity, F total intensity, all in nT;
// InclDeg the inclination (dip, positive downward) and DeclDeg the declination
// (positive east of true north), in degrees.
type Field struct{ X, Y, Z, H, F, InclDeg, DeclDeg float64 }

type wmmModel struct {
	g, h, gdot, hdot [wmmNumCoef]float64
}

var (
	wmmOnce   sync.Once
	wmmCoef   *wmmModel
	wmmLoadEr error
)

func loadWMM() (*wmmModel, error) {
	wmmOnce.Do(func() {
		var raw struct {
			G    []float64 `json:"main_field_coeff_g"`
			H    []float64 `json:"main_field_coeff_h"`
			GDot []float64 `json:"secular_var_coeff_g"`
			HDot []float64 `json:"secular_var_coeff_h"`
			NMax int       `json:"n_max"`
			Ep   float64   `json:"epoch"`
		}
		if err := json.Unmarshal(wmm2025JSON, &raw); err != nil {
			wmmLoadEr = fmt.Errorf("wmm: embedded coefficients: %w", err)
			return
		}
		if raw.NMax != wmmMaxDeg || raw.Ep != wmmEpoch || len(raw.G) != wmmNumCoef ||
			len(raw.H) != wmmNumCoef || len(raw.GDot) != wmmNumCoef || len(raw.HDot) != wmmNumCoef {
			wmmLoadEr = fmt.Errorf("wmm: embedded coefficients have unexpected shape (n_max %d, epoch %g)", raw.NMax, raw.Ep)
			return
		}
		m := &wmmModel{}
		copy(m.g[:], raw.G)
		copy(m.h[:], raw.H)
		copy(m.gdot[:], raw.GDot)
		copy(m.hdot[:], raw.HDot)
		wmmCoef = m
	})
	return wmmCoef, wmmLoadEr
}

// DecimalYear converts t to a decimal year as the WMM software does
// (MAG_DateToYear): year + (day of year − 1 + fraction of the day)/days in year,
// in UTC, so 2025-01-01T00:00Z is 2025.0 and 2025-07-02T12:00Z is 2025.5.
func DecimalYear(t time.Time) float64 {
	u := t.UTC()
	y := u.Year()
	days := 365.0
	if y%4 == 0 && (y%100 != 0 || y%400 == 0) {
		days = 366
	}
	secOfDay := float64(u.Hour()*3600+u.Minute()*60+u.Second()) + float64(u.Nanosecond())/1e9
	return float64(y) + (float64(u.YearDay()-1)+secOfDay/86400)/days
}

// WMM evaluates the World Magnetic Model 2025 at geodetic latitude latDeg
// ([−90, 90]), longitude lonDeg (any finite value) and height heightM metres above
// the WGS84 ellipsoid, at time t (see DecimalYear). Bad input (NaN, infinite,
// |lat| > 90, |height| > 10 000 km) gives an error and a zero Field. For dates
// outside 2025.0–2030.0 it returns the extrapolated field together with a warning
// wrapping ErrOutsideModelSpan. At the geographic poles, where the declination is
// defined relative to the meridian lonDeg, the field is evaluated 1e-9° away from
// the pole along that meridian.
func WMM(latDeg, lonDeg, heightM float64, t time.Time) (Field, error) {
	return wmmAt(latDeg, lonDeg, heightM, DecimalYear(t))
}

// Declination returns the magnetic declination in degrees (positive east, in
// [−180, 180]) from WMM2025; see WMM for arguments and edge behaviour. If warn
// wraps ErrOutsideModelSpan, declDeg is still valid (extrapolated); any other
// error means declDeg is NaN.
func Declination(latDeg, lonDeg, heightM float64, t time.Time) (declDeg float64, warn error) {
	f, err := WMM(latDeg, lonDeg, heightM, t)
	if err != nil && !errors.Is(err, ErrOutsideModelSpan) {
		return math.NaN(), err
	}
	return f.DeclDeg, err
}

// MagneticToTrue converts a bearing measured from magnetic north to one from true
// north: true = magnetic + declination (east positive), normalised to [0, 360).
func MagneticToTrue(bearingMagDeg, declDeg float64) float64 {
	return angle.Wrap360(bearingMagDeg + declDeg)
}

func wmmAt(latDeg, lonDeg, heightM, year float64) (Field, error) {
	switch {
	case math.IsNaN(latDeg) || math.IsNaN(lonDeg) || math.IsNaN(heightM) || math.IsNaN(year):
		return Field{}, fmt.Errorf("wmm: NaN input (lat %g, lon %g, height %g m, year %g)", latDeg, lonDeg, heightM, year)
	case math.Abs(latDeg) > 90:
		return Field{}, fmt.Errorf("wmm: latitude %g° outside [-90, 90]", latDeg)
	case math.IsInf(lonDeg, 0):
		return Field{}, fmt.Errorf("wmm: longitude %g is not finite", lonDeg)
	case !(math.Abs(heightM) <= 1e7):
		return Field{}, fmt.Errorf("wmm: height %g m outside ±10000 km", heightM)
	case !(math.Abs(year-wmmEpoch) <= 1000):
		return Field{}, fmt.Errorf("wmm: year %g is far outside the model", year)
	}
	m, err := loadWMM()
	if err != nil {
		return Field{}, err
	}
	const poleGuard = 90 - 1e-9
	if latDeg > poleGuard {
		latDeg = poleGuard
	} else if latDeg < -poleGuard {
		latDeg = -poleGuard
	}

	// Geodetic → geocentric spherical (WMM report eq. 7), on WGS84.
	a, fl := geodesic.WGS84.EquatorialRadiusM(), geodesic.WGS84.Flattening()
	e2 := fl * (2 - fl)
	sinLat, cosLat := math.Sincos(latDeg * deg)
	rc := a / math.Sqrt(1-e2*sinLat*sinLat)
	p := (rc + heightM) * cosLat
	z := (rc*(1-e2) + heightM) * sinLat
	r := math.Hypot(p, z)
	latC := math.Asin(z / r) // geocentric latitude, rad
	sinC, cosC := math.Sincos(latC)

	// Schmidt semi-normalised P_n^m(sin φ') and dP/dθ (θ = colatitude).
	var pnm, dpnm [wmmNumCoef]float64
	legendreSchmidt(sinC, cosC, &pnm, &dpnm)

	lon := lonDeg * deg
	var cosML, sinML [wmmMaxDeg + 1]float64
	for k := 0; k <= wmmMaxDeg; k++ {
		sinML[k], cosML[k] = math.Sincos(float64(k) * lon)
	}

	dt := year - wmmEpoch
	var xp, yp, zp float64
	ratio := wmmRefRadius / r
	pow := ratio * ratio // (a/r)^(n+2) for n = 0
	for n := 1; n <= wmmMaxDeg; n++ {
		pow *= ratio
		for k := 0; k <= n; k++ {
			i := n*(n+1)/2 + k
			g := m.g[i] + dt*m.gdot[i]
			h := m.h[i] + dt*m.hdot[i]
			gc := g*cosML[k] + h*sinML[k]
			// X' = −(1/r)∂V/∂φ' = +Σ (a/r)^(n+2) (g cos + h sin) dP/dθ
			xp += pow * gc * dpnm[i]
			// Y' = Σ (a/r)^(n+2) m (g sin − h cos) P / cos φ'
			yp += pow * float64(k) * (g*sinML[k] - h*cosML[k]) * pnm[i]
			// Z' = −Σ (n+1)(a/r)^(n+2) (g cos + h sin) P
			zp -= pow * float64(n+1) * gc * pnm[i]
		}
	}
	yp /= cosC

	// Rotate from geocentric to geodetic (WMM report eq. 17).
	psi := latC - latDeg*deg
	sinPsi, cosPsi := math.Sincos(psi)
	var f Field
	f.X = xp*cosPsi - zp*sinPsi
	f.Y = yp
	f.Z = xp*sinPsi + zp*cosPsi
	f.H = math.Hypot(f.X, f.Y)
	f.F = math.Hypot(f.H, f.Z)
	f.InclDeg = math.Atan2(f.Z, f.H) / deg
	f.DeclDeg = math.Atan2(f.Y, f.X) / deg
	if year < wmmEpoch || year > wmmValidEnd {
		return f, fmt.Errorf("wmm: year %.3f: %w", year, ErrOutsideModelSpan)
	}
	return f, nil
}

// legendreSchmidt fills p with the Schmidt semi-normalised associated Legendre
// functions P_n^m(x) for x = sin φ' = cos θ and dp with dP_n^m/dθ, indexed
// n(n+1)/2 + m, n ≤ wmmMaxDeg. It uses the Gauss-normalised recursion and then
// the Schmidt factors (WMM report §1.2; as in the WMM software's MAG_PcupLow).
func legendreSchmidt(x, z float64, p, dp *[wmmNumCoef]float64) {
	idx := func(n, m int) int { return n*(n+1)/2 + m }
	p[0], dp[0] = 1, 0
	for n := 1; n <= wmmMaxDeg; n++ {
		for m := 0; m <= n; m++ {
			i := idx(n, m)
			switch {
			case n == m:
				j := idx(n-1, m-1)
				p[i] = z * p[j]
				dp[i] = z*dp[j] + x*p[j]
			case n == 1 && m == 0:
				p[i] = x * p[0]
				dp[i] = x*dp[0] - z*p[0]
			default:
				j := idx(n-1, m)
				if n == m+1 {
					p[i] = x * p[j]
					dp[i] = x*dp[j] - z*p[j]
				} else {
					k := float64((n-1)*(n-1)-m*m) / float64((2*n-1)*(2*n-3))
					l := idx(n-2, m)
					p[i] = x*p[j] - k*p[l]
					dp[i] = x*dp[j] - z*p[j] - k*dp[l]
				}
			}
		}
	}
	// Schmidt semi-normalisation factors.
	var s [wmmNumCoef]float64
	s[0] = 1
	for n := 1; n <= wmmMaxDeg; n++ {
		s[idx(n, 0)] = s[idx(n-1, 0)] * float64(2*n-1) / float64(n)
		for m := 1; m <= n; m++ {
			f := float64(n-m+1) / float64(n+m)
			if m == 1 {
				f *= 2
			}
			s[idx(n, m)] = s[idx(n, m-1)] * math.Sqrt(f)
		}
	}
	for i := range s {
		p[i] *= s[i]
		dp[i] *= s[i]
	}
}
