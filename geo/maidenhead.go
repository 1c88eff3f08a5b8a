package geo

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// Maidenhead locator (IARU VHF Handbook; the same scheme as Hamlib's locator.c).
// The origin is 180°W, 90°S; each pair of characters gives longitude then latitude:
//
//	pair 1 field       A–R   20° × 10°
//	pair 2 square      0–9   2° × 1°
//	pair 3 subsquare   a–x   5′ × 2.5′
//	pair 4 extended    0–9   30″ × 15″
//	pair 5             a–x   1.25″ × 0.625″
//	pair 6             0–9   0.125″ × 0.0625″

// maidenheadRadix is the number of divisions per pair (Hamlib's loc_char_range).
var maidenheadRadix = [6]int{18, 10, 24, 10, 24, 10}

// ErrLocator is wrapped by every error about a malformed locator or position.
var ErrLocator = errors.New("invalid Maidenhead locator")

// Maidenhead returns the Maidenhead locator of the point (latDeg, lonDeg) with
// chars characters (2, 4, 6, 8, 10 or 12). Fields are upper case (A–R), subsquares
// and the 5th pair lower case (a–x), e.g. "FN31pr21". Latitude must be in
// [−90, 90] and longitude in [−180, 180]. Cells include their south and west
// edges; latitude 90 belongs to the northernmost row (Hamlib instead wraps it to
// the south pole), and longitude 180 is the same meridian as −180 and is encoded
// as such (as Hamlib does).
func Maidenhead(latDeg, lonDeg float64, chars int) (string, error) {
	if chars < 2 || chars > 12 || chars%2 != 0 {
		return "", fmt.Errorf("maidenhead: %d characters requested, want 2, 4, 6, 8, 10 or 12: %w", chars, ErrLocator)
	}
	if !(latDeg >= -90 && latDeg <= 90) {
		return "", fmt.Errorf("maidenhead: latitude %g° outside [-90, 90]: %w", latDeg, ErrLocator)
	}
	if !(lonDeg >= -180 && lonDeg <= 180) {
		return "", fmt.Errorf("maidenhead: longitude %g° outside [-180, 180]: %w", lonDeg, ErrLocator)
	}
	pairs := chars / 2
	lonCells, latCells := 1, 1
	for i := 0; i < pairs; i++ {
		lonCells *= maidenheadRadix[i]
		latCells *= maidenheadRadix[i]
	}
	// Cell indices counted from the origin at the chosen precision.
	lonIdx := int(math.Floor((lonDeg + 180) / 360 * float64(lonCells)))
	if lonIdx >= lonCells { // longitude 180 wraps to −180
		lonIdx -= lonCells
	}
	latIdx := int(math.Floor((latDeg + 90) / 180 * float64(latCells)))
	if latIdx >= latCells { // latitude 90 stays in the top row
		latIdx = latCells - 1
	}
	var lonDigits, latDigits [6]int
	for i := pairs - 1; i >= 0; i-- {
		lonDigits[i] = lonIdx % maidenheadRadix[i]
		lonIdx /= maidenheadRadix[i]
		latDigits[i] = latIdx % maidenheadRadix[i]
		latIdx /= maidenheadRadix[i]
	}
	var b strings.Builder
	b.Grow(chars)
	for i := 0; i < pairs; i++ {
		for _, d := range [2]int{lonDigits[i], latDigits[i]} {
			switch {
			case i == 0:
				b.WriteByte(byte('A' + d))
			case i%2 == 1:
				b.WriteByte(byte('0' + d))
			default:
				b.WriteByte(byte('a' + d))
			}
		}
	}
	return b.String(), nil
}

// MaidenheadCenter returns the centre (lat, lon in degrees) of the cell named by a
// locator of 2 to 12 characters (an even number). Letters are accepted in either
// case; surrounding spaces are ignored. Any other input gives an error wrapping
// ErrLocator.
func MaidenheadCenter(loc string) (lat, lon float64, err error) {
	s := strings.TrimSpace(loc)
	n := len(s)
	if n < 2 || n > 12 || n%2 != 0 {
		return 0, 0, fmt.Errorf("maidenhead %q: length %d, want 2, 4, 6, 8, 10 or 12 characters: %w", loc, n, ErrLocator)
	}
	lonDeg, latDeg := -180.0, -90.0
	lonStep, latStep := 360.0, 180.0
	for i := 0; i < n/2; i++ {
		radix := maidenheadRadix[i]
		lonStep /= float64(radix)
		latStep /= float64(radix)
		for j := 0; j < 2; j++ {
			c := s[2*i+j]
			var d int
			if i%2 == 1 {
				if c < '0' || c > '9' {
					return 0, 0, fmt.Errorf("maidenhead %q: character %d (%q) must be a digit 0-9: %w", loc, 2*i+j+1, c, ErrLocator)
				}
				d = int(c - '0')
			} else {
				u := c
				if c >= 'a' && c <= 'z' {
					u = c - 'a' + 'A'
				}
				if u < 'A' || int(u-'A') >= radix {
					return 0, 0, fmt.Errorf("maidenhead %q: character %d (%q) must be a letter A-%c: %w",
						loc, 2*i+j+1, c, 'A'+radix-1, ErrLocator)
				}
				d = int(u - 'A')
			}
			if j == 0 {
				lonDeg += float64(d) * lonStep
			} else {
				latDeg += float64(d) * latStep
			}
		}
	}
	return latDeg + latStep/2, lonDeg + lonStep/2, nil
}
