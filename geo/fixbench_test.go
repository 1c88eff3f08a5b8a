package geo

import (
	"fmt"
	"math/rand/v2"
	"nullseek/internal/angle"
	"testing"
	"time"
)

// networkLOPs is a station network reporting one transmitter: 12 stations
// 2–15 km away around it, each sending n/12 bearings with 3° Gaussian noise,
// one a minute.
func networkLOPs(n int) []LOP {
	rng := rand.New(rand.NewPCG(10, 2))
	lat0, lon0 := 46.2, 7.3
	type st struct{ lat, lon float64 }
	var sts []st
	for i := 0; i < 12; i++ {
		la, lo, _ := Direct(lat0, lon0, float64(i)*30+10*rng.Float64(), 2000+13000*rng.Float64())
		sts = append(sts, st{la, lo})
	}
	t0 := time.Date(2026, 5, 1, 8, 0, 0, 0, time.UTC)
	lops := make([]LOP, n)
	for k := range lops {
		s := sts[k%len(sts)]
		_, b, _ := Inverse(s.lat, s.lon, lat0, lon0)
		lops[k] = LOP{Ident: "T", Station: fmt.Sprintf("S%02d", k%len(sts)), Lat: s.lat, Lon: s.lon,
			BearingDeg: angle.Wrap360(b + 3*rng.NormFloat64()), SigmaDeg: 3, Time: t0.Add(time.Duration(k/len(sts)) * time.Minute), Row: k + 2}
	}
	return lops
}

// BenchmarkFix times one transmitter's fix from 1,000, 10,000 and 100,000
// bearings (go test ./geo -bench Fix -cpu 1).
func BenchmarkFix(b *testing.B) {
	for _, n := range []int{1000, 10000, 100000} {
		b.Run(fmt.Sprint(n), func(b *testing.B) {
			lops := networkLOPs(n)
			b.ReportAllocs()
			for b.Loop() {
				if _, err := SolveFix(lops, FixOptions{}); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(n), "bearings")
		})
	}
}

// BenchmarkFixExact times the per-bearing solver that SolveFix replaced
// (fix_exact_test.go) on the same network, for the before/after comparison;
// it grows faster than the cube of the bearings, so only small sets.
func BenchmarkFixExact(b *testing.B) {
	for _, n := range []int{100, 300} {
		b.Run(fmt.Sprint(n), func(b *testing.B) {
			lops := networkLOPs(n)
			b.ReportAllocs()
			for b.Loop() {
				if _, err := exSolveFix(lops, FixOptions{}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
