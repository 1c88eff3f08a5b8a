package store

import (
	"os"
	"path/filepath"
	"runtime"
	"syscall"
	"testing"
	"time"
)

// cpuSeconds is the process's user+system CPU time (getrusage(2)), which
// includes SQLite's work on cgo threads. On a shared machine the wall-clock
// rate depends on the other load; the rate per CPU-second does not.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
}

// benchBurst is burst k of a benchmark: n readings 1/200 s apart.
func benchBurst(c CaptureID, k, n int) (Burst, []LevelReading) {
	const rate = 2.4e6
	start := int64(k) * int64(n) * rate / 200
	b := Burst{Capture: c, StartSample: start, EndSample: start + int64(n)*rate/200, StartS: float64(start) / rate,
		EndS: float64(start)/rate + float64(n)/200, Start: t0.Add(time.Duration(k) * time.Second), OffsetHz: 25e3,
		LevelDBFS: -40, PeakDBFS: -38, NoiseDBFS: -70, SNRDB: 30, Ident: "N0CALL/1"}
	lv := make([]LevelReading, n)
	for i := range lv {
		lv[i] = LevelReading{Sample: start + int64(i)*rate/200, TimeS: float64(start)/rate + float64(i)/200, LevelDBFS: -40 - float64(i%13)}
	}
	return b, lv
}

// BenchmarkInsertReadings: level readings committed per second through a
// Writer with the default batching, thinning off (every reading stored),
// 1000 readings per burst. Reports readings/s, the file's bytes per
// reading and the peak heap in use, sampled every 100 bursts (flat memory:
// the writer's queue is bounded, so the peak does not grow with b.N).
func BenchmarkInsertReadings(b *testing.B) {
	const per = 1000
	path := filepath.Join(b.TempDir(), "bench.db")
	db, err := Open(path, Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer db.Close()
	c, err := childCapture(db)
	if err != nil {
		b.Fatal(err)
	}
	w, err := db.NewWriter(WriterOptions{ReadingsPerS: -1})
	if err != nil {
		b.Fatal(err)
	}
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	base := ms.HeapInuse
	peak := base
	b.ReportAllocs()
	b.ResetTimer()
	cpu0 := cpuSeconds()
	for k := range b.N {
		bu, lv := benchBurst(c, k, per)
		if err := w.AddBurst(bu, lv); err != nil {
			b.Fatal(err)
		}
		if k%100 == 0 {
			runtime.ReadMemStats(&ms)
			peak = max(peak, ms.HeapInuse)
		}
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	b.StopTimer()
	b.ReportMetric(float64(b.N*per)/b.Elapsed().Seconds(), "readings/s")
	b.ReportMetric(float64(b.N*per)/(cpuSeconds()-cpu0), "readings/cpu-s")
	db.sql.Exec("PRAGMA wal_checkpoint(TRUNCATE)")
	if fi, err := os.Stat(path); err == nil {
		b.ReportMetric(float64(fi.Size())/float64(b.N*per), "B/reading")
	}
	b.ReportMetric(float64(peak-min(peak, base))/(1<<20), "MiB-peak-heap-growth")
}

// BenchmarkInsertBearings: bearings committed per second through a Writer
// (their bursts stored beforehand).
func BenchmarkInsertBearings(b *testing.B) {
	path := filepath.Join(b.TempDir(), "bench.db")
	db, err := Open(path, Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer db.Close()
	c, err := childCapture(db)
	if err != nil {
		b.Fatal(err)
	}
	w, err := db.NewWriter(WriterOptions{})
	if err != nil {
		b.Fatal(err)
	}
	for k := range b.N {
		bu, _ := benchBurst(c, k, 1)
		if err := w.AddBurst(bu, nil); err != nil {
			b.Fatal(err)
		}
	}
	if err := w.Flush(); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	cpu0 := cpuSeconds()
	for k := range b.N {
		bu, _ := benchBurst(c, k, 1)
		if err := w.AddBearing(Bearing{Capture: c, BurstStartSample: bu.StartSample, Station: 1,
			TrueDeg: float64(k % 360), MagneticDeg: ptr(float64(k % 360)), DeclinationDeg: ptr(0), SigmaDeg: 3,
			StationLatDeg: 45.1, StationLonDeg: 6.1, NullDepthDB: 20, CoverageDeg: 360, Points: 400}); err != nil {
			b.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	b.StopTimer()
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "bearings/s")
	b.ReportMetric(float64(b.N)/(cpuSeconds()-cpu0), "bearings/cpu-s")
}
