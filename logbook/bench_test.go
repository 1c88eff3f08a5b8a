package logbook

import (
	"os"
	"path/filepath"
	"testing"
	"time"

	"nullseek/receiver"
	"nullseek/sdr"
	"nullseek/store"
	"nullseek/survey"
)

// hourScan is an invented survey of one hour of a busy channel at
// 2.4 MS/s: a 10 s burst every 15 s (240 bursts), each with the
// receiver's 200 level readings a second (2000 per burst), N0CALL/1…3
// taking turns.
func hourScan() *survey.Result {
	const rate = 2.4e6
	start := time.Date(2026, 5, 1, 8, 0, 0, 0, time.UTC)
	res := &survey.Result{Info: sdr.Info{Name: "hour.sigmf-data", Format: "cu8", SampleRate: rate, CenterHz: 144.5e6,
		Samples: 3600 * rate, Start: start}, Summary: receiver.Summary{DurationS: 3600, OffsetHz: 25e3}}
	ids := []string{"N0CALL/1", "N0CALL/2", "N0CALL/3"}
	for k := 0; k < 240; k++ {
		s := float64(k) * 15
		r := survey.Record{Ident: ids[k%3], IdentConfidence: 0.99, Mode: "fm", Text: ids[k%3]}
		r.Index, r.StartS, r.EndS = k, s, s+10
		r.StartSample, r.EndSample = int64(s*rate), int64((s+10)*rate)
		r.Start, r.End = start.Add(time.Duration(s*1e9)), start.Add(time.Duration((s+10)*1e9))
		r.OffsetHz, r.LevelDB, r.PeakDB, r.NoiseDB, r.SNRDB = 25e3, -40, -38, -70, 30
		for i := 0; i < 2000; i++ {
			t := s + float64(i)/200
			r.Level = append(r.Level, receiver.LevelSample{Sample: int64(t * rate), T: t, LevelDB: -40 - float64(i%17)})
		}
		res.Records = append(res.Records, r)
	}
	return res
}

// BenchmarkSaveHourScan: storing the hour's scan (Save: capture,
// transmitters, 240 bursts, their readings thinned to
// store.DefaultReadingsPerS), into a fresh database each time; and the
// same again into the filled one (the re-run: every row an UPSERT, none
// added). Reports rows written per save.
func BenchmarkSaveHourScan(b *testing.B) {
	res := hourScan()
	key := KeyOf("bench hour")
	for _, again := range []bool{false, true} {
		name := "fresh"
		if again {
			name = "rerun"
		}
		b.Run(name, func(b *testing.B) {
			path := filepath.Join(b.TempDir(), "h.db")
			if again {
				if _, err := Save(path, Recording{Key: key, Result: res}); err != nil {
					b.Fatal(err)
				}
			}
			var sv *Saved
			for i := 0; b.Loop(); i++ {
				p := path
				if !again {
					p = filepath.Join(b.TempDir(), "h.db")
				}
				var err error
				if sv, err = Save(p, Recording{Key: key, Result: res}); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(sv.Rows["bursts"]+sv.Rows["level_readings"]), "rows/op")
			b.ReportMetric(float64(sv.New()), "new-rows/op")
		})
	}
}

// TestSaveIdempotent: saving the same survey twice adds no row (the
// natural keys of package store), and what is read back is what was saved.
func TestSaveIdempotent(t *testing.T) {
	res := hourScan()
	res.Records = res.Records[:9]
	path := filepath.Join(t.TempDir(), "s.db")
	rec := Recording{Key: KeyOf("t"), Result: res, Station: Station{Name: "N0CALL home", LatDeg: 52, LonDeg: 5, HasPosition: true}}
	first, err := Save(path, rec)
	if err != nil {
		t.Fatal(err)
	}
	again, err := Save(path, rec)
	if err != nil {
		t.Fatal(err)
	}
	if first.New() == 0 || again.New() != 0 {
		t.Errorf("first save added %d rows, the second %d (want some, then none)", first.New(), again.New())
	}
	// 10 s of readings at 200/s thinned to 40/s (store.ThinLevels) is 400 a burst.
	if n := again.After["level_readings"]; n != 9*400 {
		t.Errorf("%d level readings stored, want 9 bursts × 400", n)
	}
	db, err := store.Open(path, store.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	bs, err := db.BurstsOf("N0CALL/2", store.Window{})
	if err != nil || len(bs) != 3 {
		t.Fatalf("bursts of N0CALL/2: %d, %v (want 3)", len(bs), err)
	}
	if !bs[0].Start.Equal(res.Records[1].Start) || bs[0].StartSample != res.Records[1].StartSample {
		t.Errorf("first N0CALL/2 burst read back at %v sample %d, saved at %v sample %d", bs[0].Start, bs[0].StartSample, res.Records[1].Start, res.Records[1].StartSample)
	}
}

// BenchmarkHashFile: the capture key of a recording, the SHA-256 of its
// IQ data (store.HashFile), on a 64 MiB file: the other cost of --db on a
// long recording (an hour at 2.4 MS/s cu8 is 17.3 GB). Reports MB/s.
func BenchmarkHashFile(b *testing.B) {
	path := filepath.Join(b.TempDir(), "iq.sigmf-data")
	data := make([]byte, 64<<20)
	for i := range data {
		data[i] = byte(i * 7)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		if _, err := store.HashFile(path); err != nil {
			b.Fatal(err)
		}
	}
}
