//go:build ignore

// make_example.go writes example_bearings.csv: an INVENTED demo scenario
// (placeholder call N0CALL, invented event ground "Harlow Fen" at invented
// coordinates). Demo data only: no test uses it as a reference.
//
// Run from the repository root:
//
//	go run testdata/fix/make_example.go > testdata/fix/example_bearings.csv
package main

import (
	"fmt"
	"math"
	"math/rand/v2"
	"time"

	"nullseek/geo"
)

func main() {
	// Event grid origin (top-left corner) and invented transmitter spots.
	olat, olon := 47.3000, 8.9000
	type tx struct {
		id     string
		e, n   float64 // metres from the grid origin
		spoilt string  // station with a multipath bearing
	}
	txs := []tx{{"N0CALL/1", 1380, -640, ""}, {"N0CALL/2", 2210, -1530, "Mill"}, {"N0CALL/3", 620, -1820, ""}}
	type st struct {
		name     string
		e, n     float64
		magnetic bool
		sigma    float64
	}
	sts := []st{{"Start", -400, 300, false, 3}, {"Mill", 3300, -300, true, 4}, {"Chapel", 1500, -2600, false, 3}, {"Ridge", -300, -2100, true, 5}}
	rng := rand.New(rand.NewPCG(1, 2))
	t0 := time.Date(2025, 9, 14, 9, 30, 0, 0, time.UTC)
	fmt.Println("ident,station,lat,lon,bearing_deg,sigma_deg,reference,time")
	for k, x := range txs {
		tl, to := geo.FromENU(olat, olon, x.e, x.n)
		for j, s := range sts {
			sl, so := geo.FromENU(olat, olon, s.e, s.n)
			_, b, _ := geo.Inverse(sl, so, tl, to)
			b += s.sigma * 0.6 * rng.NormFloat64()
			if s.name == x.spoilt {
				b += 28 // reflection off a hillside
			}
			ref := "true"
			tm := t0.Add(time.Duration(5*k+j) * time.Minute)
			if s.magnetic {
				d, _ := geo.Declination(sl, so, 0, tm)
				b -= d
				ref = "magnetic"
			}
			b = math.Mod(b+360, 360)
			fmt.Printf("%s,%s,%.6f,%.6f,%.1f,%.0f,%s,%s\n", x.id, s.name, sl, so, b, s.sigma, ref, tm.Format(time.RFC3339))
		}
	}
}
