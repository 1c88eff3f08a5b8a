package locate

import (
	"bufio"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"sync"
	"testing"
	"time"

	"nullseek/geo"
	"nullseek/internal/angle"
)

// writeBigCSV writes rows bearings of three transmitters heard by twelve
// stations each (3° noise, one a second per station) and returns the file.
func writeBigCSV(b *testing.B, rows int) string {
	b.Helper()
	path := filepath.Join(b.TempDir(), "big.csv")
	fh, err := os.Create(path)
	if err != nil {
		b.Fatal(err)
	}
	w := bufio.NewWriterSize(fh, 1<<20)
	fmt.Fprintln(w, "ident,station,lat,lon,bearing_deg,sigma_deg,reference,time")
	rng := rand.New(rand.NewPCG(1, 2))
	type st struct {
		name     string
		lat, lon float64
		az       [3]float64
	}
	txLat, txLon := [3]float64{46.20, 46.25, 46.15}, [3]float64{7.30, 7.36, 7.25}
	var sts []st
	for i := 0; i < 12; i++ {
		la, lo, _ := geo.Direct(46.2, 7.3, float64(i)*30, 6000+float64(i)*400)
		s := st{name: fmt.Sprintf("S%02d", i), lat: la, lon: lo}
		for k := range s.az {
			_, s.az[k], _ = geo.Inverse(la, lo, txLat[k], txLon[k])
		}
		sts = append(sts, s)
	}
	t0 := time.Date(2026, 5, 1, 0, 0, 0, 0, time.UTC)
	for r := 0; r < rows; r++ {
		s := sts[r%len(sts)]
		k := (r / len(sts)) % 3
		fmt.Fprintf(w, "N0CALL/%d,%s,%.6f,%.6f,%.2f,3,true,%s\n", k+1, s.name, s.lat, s.lon,
			angle.Wrap360(s.az[k]+3*rng.NormFloat64()), t0.Add(time.Duration(r/len(sts))*time.Second).Format(time.RFC3339))
	}
	if err := w.Flush(); err != nil {
		b.Fatal(err)
	}
	if err := fh.Close(); err != nil {
		b.Fatal(err)
	}
	return path
}

// BenchmarkReadLarge reads and fixes a generated bearings file (not
// committed) and reports the file size and the peak live heap, sampled
// every 5 ms: the reader streams, so memory follows the bearings kept (one
// compact LOP each), not the file. NULLSEEK_BENCH_ROWS sets the row count
// (default 1,000,000, about 85 MB; 9,000,000 makes a file of about 770 MB).
//
//	go test ./locate -run XXX -bench ReadLarge -benchtime 1x -cpu 1
func BenchmarkReadLarge(b *testing.B) {
	rows := 1_000_000
	if s := os.Getenv("NULLSEEK_BENCH_ROWS"); s != "" {
		n, err := strconv.Atoi(s)
		if err != nil || n < 1000 {
			b.Fatalf("NULLSEEK_BENCH_ROWS=%q", s)
		}
		rows = n
	}
	path := writeBigCSV(b, rows)
	st, _ := os.Stat(path)
	b.ResetTimer()
	var peak uint64
	for b.Loop() {
		runtime.GC()
		var base runtime.MemStats
		runtime.ReadMemStats(&base)
		stop := make(chan struct{})
		var wg sync.WaitGroup
		wg.Add(1)
		go func() {
			defer wg.Done()
			var ms runtime.MemStats
			for {
				select {
				case <-stop:
					return
				case <-time.After(5 * time.Millisecond):
					runtime.ReadMemStats(&ms)
					if ms.HeapInuse > peak {
						peak = ms.HeapInuse
					}
				}
			}
		}()
		fh, err := os.Open(path)
		if err != nil {
			b.Fatal(err)
		}
		res, err := Run([]Source{{Name: path, R: fh}}, Options{})
		close(stop)
		wg.Wait()
		fh.Close()
		if err != nil {
			b.Fatal(err)
		}
		if len(res.Fixes) != 3 {
			b.Fatalf("%d fixes, refused %v", len(res.Fixes), res.Refused)
		}
	}
	b.ReportMetric(float64(st.Size())/1e6, "file-MB")
	b.ReportMetric(float64(peak)/1e6, "peak-heap-MB")
	b.ReportMetric(float64(peak)/float64(rows), "peak-heap-B/row")
	b.ReportMetric(float64(rows), "rows")
}
