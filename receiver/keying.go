package receiver

import "math"

// mark is one key-down interval, readings [a, b).
type mark struct{ a, b int64 }

// Morse timing (ITU-R M.1677-1 Annex 1 §2): a dash is three dots; the gap
// inside a character is one dot, between characters three, between words
// seven. keyingMinUnitS and keyingMaxUnitS bound the dot lengths searched:
// 48 to 4.8 WPM (dot = 1.2/WPM s, the PARIS standard).
const (
	keyingMinUnitS = 0.025
	keyingMaxUnitS = 0.25
	// keyingMinMarks is the least number of dot- and dash-length marks
	// before keying is recognised.
	keyingMinMarks = 8
)

// deglitch joins marks split by a single off reading and drops marks of a
// single reading (a noise reading over the threshold, or one under it,
// inside a mark), in place.
func deglitch(ms []mark) []mark {
	out := ms[:0]
	for _, m := range ms {
		if n := len(out); n > 0 && m.a-out[n-1].b <= 1 {
			out[n-1].b = m.b
			continue
		}
		out = append(out, m)
	}
	kept := out[:0]
	for _, m := range out {
		if m.b-m.a > 1 {
			kept = append(kept, m)
		}
	}
	return kept
}

// morseTiming decides whether key-down intervals (in order; readings of rs
// seconds) are Morse keying: for some dot length u between 25 and 250 ms,
// at least 85 % of the marks no longer than 5u last one or three dots
// (within −45…+45 % and −33…+33 %), with at least two of each, and at least
// 80 % of the gaps between consecutive marks last one, three or seven dots
// (−45…+60 %, −33…+33 %, 5…12 dots, the last allowing the stretched word
// gaps of Farnsworth timing). Marks longer than 5u (a steady tone inside
// the transmission) and gaps longer than 12u (a pause between repeats) are
// left out of the count. It returns the dot length found, refined as the
// least-squares fit of the marks' lengths to their classes.
func morseTiming(ms []mark, rs float64) (keyed bool, unitS float64) {
	bestCost := math.Inf(1)
	for u := keyingMinUnitS; u <= keyingMaxUnitS; u *= 1.03 {
		var nM, okM, dots, dashes, nG, okG int
		var cost float64
		for i, m := range ms {
			x := float64(m.b-m.a) * rs / u
			if x <= 5 {
				nM++
				switch {
				case math.Abs(x-1) <= 0.45:
					okM++
					dots++
					cost += (x - 1) * (x - 1)
				case math.Abs(x-3) <= 1:
					okM++
					dashes++
					cost += (x - 3) * (x - 3) / 9
				default:
					cost += 1
				}
			}
			if i == 0 {
				continue
			}
			y := float64(m.a-ms[i-1].b) * rs / u
			if y > 12 {
				continue
			}
			nG++
			switch {
			case y >= 0.55 && y <= 1.6:
				okG++
				cost += (y - 1) * (y - 1)
			case math.Abs(y-3) <= 1:
				okG++
				cost += (y - 3) * (y - 3) / 9
			case y >= 5:
				okG++
			default:
				cost += 1
			}
		}
		if nM < keyingMinMarks || dots < 2 || dashes < 2 || nG < keyingMinMarks-2 {
			continue
		}
		if float64(okM) < 0.85*float64(nM) || float64(okG) < 0.8*float64(nG) {
			continue
		}
		if cost /= float64(nM + nG); cost < bestCost {
			bestCost, unitS = cost, u
		}
	}
	if math.IsInf(bestCost, 1) {
		return false, 0
	}
	// refine: u = Σ d·c / Σ c² over the marks' classes
	var sdc, scc float64
	for _, m := range ms {
		d := float64(m.b-m.a) * rs
		c := 1.0
		if d/unitS > 2 {
			c = 3
		}
		if d/unitS <= 5 {
			sdc += d * c
			scc += c * c
		}
	}
	return true, sdc / scc
}
