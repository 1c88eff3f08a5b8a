package geo

import (
	"math"
	"strings"
	"testing"
)

// TestSolveFixAmbiguous: a small loop's bearing is known only up to 180°
// (two nulls; FCC question pool E9H05). Given the wrong one
// of the pair, the fix must still land on the truth, taking the other.
// Truth bearings come from Inverse, itself checked against GeodSolve.
func TestSolveFixAmbiguous(t *testing.T) {
	tLat, tLon := 47.1000, 8.2000
	stations := [][2]float64{{47.13, 8.17}, {47.08, 8.25}, {47.06, 8.15}}
	var lops []LOP
	for i, s := range stations {
		_, az, _ := Inverse(s[0], s[1], tLat, tLon)
		lops = append(lops, LOP{Ident: "X", Station: string(rune('A' + i)), Lat: s[0], Lon: s[1],
			BearingDeg: math.Mod(az+360, 360), SigmaDeg: 2})
	}
	lops[2].BearingDeg = math.Mod(lops[2].BearingDeg+180, 360) // the other null
	lops[2].Ambiguous = true
	f, err := SolveFixAmbiguous(lops, FixOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if d, _, _ := Inverse(f.Lat, f.Lon, tLat, tLon); d > 0.01 {
		t.Errorf("fix %.6f %.6f is %.3f m from the truth", f.Lat, f.Lon, d)
	}
	if !strings.Contains(strings.Join(f.Warnings, ";"), "ambiguous bearing taken") {
		t.Errorf("no note on the flipped bearing: %v", f.Warnings)
	}

	// Two stations, both ambiguous: the two lines cross in one place only
	// for one choice of directions (the others cross behind a station), so
	// this resolves; with both stations' bearings flipped it still must.
	two := []LOP{lops[0], lops[1]}
	two[0].Ambiguous, two[1].Ambiguous = true, true
	two[0].BearingDeg = math.Mod(two[0].BearingDeg+180, 360)
	f, err = SolveFixAmbiguous(two, FixOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if d, _, _ := Inverse(f.Lat, f.Lon, tLat, tLon); d > 0.01 {
		t.Errorf("two-station fix is %.3f m from the truth", d)
	}
}
