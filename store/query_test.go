package store

import (
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"
	"time"
)

// twoStations writes an invented two-station scene: each station records
// 10 bursts 60 s apart, alternating N0CALL/1 (even k) and N0CALL/2 (odd
// k), with one bearing per burst; Marsh Gate's capture starts 20 s later.
func twoStations(t *testing.T, db *DB) (kestrel, marsh StationID) {
	t.Helper()
	kestrel, c1 := scene(t, db, "Kestrel Ridge", 45.1, 6.1, 1)
	marsh, err := db.PutStation(Station{Name: "Marsh Gate", LatDeg: ptr(45.0), LonDeg: ptr(6.3), PositionSource: PositionFixed, Antenna: "yagi"})
	if err != nil {
		t.Fatal(err)
	}
	c2, err := db.PutCapture(Capture{Station: marsh, Source: "marsh.sigmf-data", Start: t0.Add(20 * time.Second),
		CentreHz: 144.5e6, SampleRateHz: 2.4e6, Samples: -1, FileSHA256: hash64(2), ChannelOffsetHz: 25e3})
	if err != nil {
		t.Fatal(err)
	}
	w, err := db.NewWriter(WriterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, sc := range []struct {
		st    StationID
		c     CaptureID
		shift time.Duration
		lat   float64
	}{{kestrel, c1, 0, 45.1}, {marsh, c2, 20 * time.Second, 45.0}} {
		for k := 0; k < 10; k++ {
			id := []string{"N0CALL/1", "N0CALL/2"}[k%2]
			b, lv := burstAt(sc.c, k, id)
			b.Start, b.End = b.Start.Add(sc.shift), b.End.Add(sc.shift)
			if err := w.AddBurst(b, lv); err != nil {
				t.Fatal(err)
			}
			if err := w.AddBearing(Bearing{Capture: sc.c, BurstStartSample: b.StartSample, Station: sc.st,
				TrueDeg: float64(10*k) + sc.lat, SigmaDeg: 2 + float64(k)/10, StationLatDeg: sc.lat, StationLonDeg: 6.2,
				Flags: FlagClipped | FlagBurstCut}); err != nil {
				t.Fatal(err)
			}
		}
	}
	if err := w.AddHeadings(c1, RefTrue, []HeadingSample{{TimeS: -0.5, Deg: 359.5}, {TimeS: 0, Deg: 0.1}, {TimeS: 0.5, Deg: 3}}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return kestrel, marsh
}

func TestBearingsWindow(t *testing.T) {
	db, _ := newDB(t)
	kestrel, marsh := twoStations(t, db)
	got, err := db.Bearings(BearingQuery{Station: "Kestrel Ridge", Ident: "N0CALL/1",
		Window: Window{From: t0.Add(60 * time.Second), To: t0.Add(300 * time.Second)}})
	if err != nil {
		t.Fatal(err)
	}
	// k = 2 and 4 (120 s and 240 s); k = 5 at 300 s is N0CALL/2.
	if len(got) != 2 || !got[0].Time.Equal(t0.Add(120*time.Second)) || !got[1].Time.Equal(t0.Add(240*time.Second)) {
		t.Fatalf("window: %+v", got)
	}
	g := got[0]
	if g.Station != kestrel || g.StationName != "Kestrel Ridge" || g.Ident != "N0CALL/1" || g.TrueDeg != 20+45.1 ||
		math.Abs(g.SigmaDeg-2.2) > 1e-12 || g.Flags != FlagClipped|FlagBurstCut || g.MagneticDeg != nil || g.AltTrueDeg != nil ||
		g.BurstStartSample != int64(120*2.4e6) {
		t.Errorf("bearing read back: %+v", g)
	}
	// Edges are inclusive.
	got, _ = db.Bearings(BearingQuery{Station: "Kestrel Ridge", Window: Window{From: t0.Add(120 * time.Second), To: t0.Add(120 * time.Second)}})
	if len(got) != 1 {
		t.Errorf("closed window of one instant: %d bearings", len(got))
	}
	// One transmitter, both stations, by time.
	got, _ = db.Bearings(BearingQuery{Ident: "N0CALL/2"})
	if len(got) != 10 {
		t.Fatalf("N0CALL/2 at both stations: %d", len(got))
	}
	for i := 1; i < len(got); i++ {
		if got[i].Time.Before(got[i-1].Time) || got[i].Ident != "N0CALL/2" {
			t.Errorf("bearing %d out of order or of %s", i, got[i].Ident)
		}
	}
	if got[0].Station != kestrel || got[1].Station != marsh {
		t.Errorf("first two: stations %d, %d", got[0].Station, got[1].Station)
	}
	for _, q := range []BearingQuery{{Station: "Nowhere"}, {Ident: "N0CALL/9"}} {
		if _, err := db.Bearings(q); !errors.Is(err, ErrNotFound) || !strings.Contains(err.Error(), q.Station+q.Ident) {
			t.Errorf("%+v: %v, want ErrNotFound naming it", q, err)
		}
	}
}

func TestFixInputAndBursts(t *testing.T) {
	db, _ := newDB(t)
	twoStations(t, db)
	in, err := db.FixInput("N0CALL/1", Window{From: t0, To: t0.Add(5 * time.Minute)})
	if err != nil {
		t.Fatal(err)
	}
	if len(in) != 2 || in[0].Station.Name != "Kestrel Ridge" || in[1].Station.Name != "Marsh Gate" {
		t.Fatalf("fix input: %+v", in)
	}
	// Kestrel: k = 0, 2, 4 (0…240 s); Marsh Gate 20 s later: 20, 140, 260 s.
	if len(in[0].Bearings) != 3 || len(in[1].Bearings) != 3 || *in[1].Station.LatDeg != 45.0 || in[1].Station.Antenna != "yagi" {
		t.Errorf("fix input per station: %d, %d bearings; %+v", len(in[0].Bearings), len(in[1].Bearings), in[1].Station)
	}
	if _, err := db.FixInput("", Window{}); err == nil {
		t.Error("fix input without an identifier")
	}
	bs, err := db.BurstsOf("N0CALL/2", Window{To: t0.Add(200 * time.Second)})
	if err != nil {
		t.Fatal(err)
	}
	// 60 s (Kestrel), 80 s (Marsh Gate), 180 s (Kestrel), 200 s (Marsh Gate).
	if len(bs) != 4 || bs[0].Capture != 1 || bs[1].Capture != 2 || !bs[3].Start.Equal(t0.Add(200*time.Second)) {
		t.Errorf("bursts of N0CALL/2: %+v", bs)
	}
	all, err := db.BurstsOfCapture(2)
	if err != nil || len(all) != 10 || all[3].Ident != "N0CALL/2" || all[3].ReadingsPerS < 39.9 || all[3].ReadingsPerS > 40.1 {
		t.Errorf("bursts of capture 2: %d %v", len(all), err)
	}
	c, err := db.Capture(2)
	if err != nil || c.Samples != -1 || !c.Start.Equal(t0.Add(20*time.Second)) || c.ChannelHz() != 144.525e6 {
		t.Errorf("capture: %+v %v", c, err)
	}
	h, ref, err := db.Headings(1)
	if err != nil || ref != RefTrue || !reflect.DeepEqual(h, []HeadingSample{{-0.5, 359.5}, {0, 0.1}, {0.5, 3}}) {
		t.Errorf("headings: %v %q %v", h, ref, err)
	}
}

func TestScheduleAt(t *testing.T) {
	db, _ := newDB(t)
	a, b := t0.Add(10*time.Minute), t0.Add(20*time.Minute)
	if err := db.PutSchedules([]Schedule{
		{Ident: "N0CALL/1", AsOf: a, Order: 0, Bursts: 3, PeriodS: ptr(300), T0: t0},
		{Ident: "N0CALL/2", AsOf: a, Order: 1, Bursts: 3, PeriodS: ptr(300), T0: t0.Add(time.Minute)},
	}); err != nil {
		t.Fatal(err)
	}
	if err := db.PutSchedules([]Schedule{
		{Ident: "N0CALL/3", AsOf: b, Order: 0, Bursts: 1, Reason: "one burst: no period"},
		{Ident: "N0CALL/1", AsOf: b, Order: 1, Bursts: 5, PeriodS: ptr(300.02), DriftPPM: ptr(66), T0: t0},
	}); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		at   time.Time
		want []string
	}{
		{t0, nil},
		{a.Add(-time.Nanosecond), nil},
		{a, []string{"N0CALL/1@a", "N0CALL/2@a"}},
		{b.Add(-time.Second), []string{"N0CALL/1@a", "N0CALL/2@a"}},
		// N0CALL/2 was not in the later plan: its last known place stands.
		{b, []string{"N0CALL/3@b", "N0CALL/1@b", "N0CALL/2@a"}},
	} {
		got, err := db.ScheduleAt(tc.at)
		if err != nil {
			t.Fatal(err)
		}
		var names []string
		for _, s := range got {
			tag := "@a"
			if s.AsOf.Equal(b) {
				tag = "@b"
			}
			names = append(names, s.Ident+tag)
		}
		if !reflect.DeepEqual(names, tc.want) {
			t.Errorf("at %v: %v, want %v", tc.at.Sub(t0), names, tc.want)
		}
	}
	got, _ := db.ScheduleAt(b)
	if got[1].PeriodS == nil || *got[1].PeriodS != 300.02 || *got[1].DriftPPM != 66 || got[0].PeriodS != nil || got[0].Reason == "" || !got[1].T0.Equal(t0) {
		t.Errorf("schedule values: %+v / %+v", got[0], got[1])
	}
}

func TestLatestFixes(t *testing.T) {
	db, _ := newDB(t)
	kestrel, marsh := twoStations(t, db)
	fix := func(id string, from, to time.Duration, lat float64, lines int) {
		f := Fix{Ident: id, From: t0.Add(from), To: t0.Add(to), LatDeg: lat, LonDeg: 6.2, CovEEM2: 10, CovNNM2: 20,
			SemiMajorM: 11, SemiMinorM: 7.7, OrientationDeg: 0, Probability: 0.95, Chi2: 1, DOF: 1, VarianceFactor: 1}
		for i := 0; i < lines; i++ {
			f.Lines = append(f.Lines, FixLine{Station: []StationID{kestrel, marsh}[i%2], LatDeg: 45, LonDeg: 6, TrueDeg: float64(i), SigmaDeg: 3, Used: i == 0, Reason: []string{"", "outlier"}[i%2]})
		}
		if _, err := db.PutFix(f); err != nil {
			t.Fatal(err)
		}
	}
	fix("N0CALL/1", 0, 10*time.Minute, 45.21, 2)
	fix("N0CALL/1", 10*time.Minute, 20*time.Minute, 45.22, 2)
	fix("N0CALL/2", 0, 10*time.Minute, 45.30, 1)
	fix("N0CALL/1", 0, 5*time.Minute, 45.23, 1)               // an older window written last
	fix("N0CALL/1", 10*time.Minute, 20*time.Minute, 45.24, 3) // the same window again: replaces it
	got, err := db.LatestFixes()
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 2 || got[0].Ident != "N0CALL/1" || got[0].LatDeg != 45.24 || len(got[0].Lines) != 3 ||
		got[0].Lines[1].StationName != "Marsh Gate" || got[0].Lines[1].Reason != "outlier" || !got[0].Lines[0].Used ||
		got[1].Ident != "N0CALL/2" || got[1].LatDeg != 45.30 {
		t.Errorf("latest fixes: %+v", got)
	}
	n, _ := db.Counts()
	if n["fixes"] != 4 || n["fix_lines"] != 3+2+1+1 {
		t.Errorf("fix rows %d, lines %d, want 4 and 7", n["fixes"], n["fix_lines"])
	}
}

// TestQueriesUseIndexes: SQLite's own planner (EXPLAIN QUERY PLAN) uses
// the schema's indexes for the store's queries, instead of scanning.
func TestQueriesUseIndexes(t *testing.T) {
	db, _ := newDB(t)
	twoStations(t, db)
	db.sql.Exec("ANALYZE")
	plan := func(q string, args ...any) string {
		rows, err := db.sql.Query("EXPLAIN QUERY PLAN "+q, args...)
		if err != nil {
			t.Fatal(err)
		}
		defer rows.Close()
		var b strings.Builder
		for rows.Next() {
			var id, parent, notused int
			var detail string
			rows.Scan(&id, &parent, &notused, &detail)
			b.WriteString(detail + "\n")
		}
		return b.String()
	}
	for _, tc := range []struct {
		q    BearingQuery
		want string
	}{
		{BearingQuery{Station: "Kestrel Ridge", Ident: "N0CALL/1", Window: Window{From: t0, To: t0.Add(time.Hour)}}, "bearings_station_tx_time"},
		{BearingQuery{Ident: "N0CALL/1", Window: Window{From: t0, To: t0.Add(time.Hour)}}, "bearings_tx_time"},
	} {
		q, args, err := db.bearingsQuery(tc.q)
		if err != nil {
			t.Fatal(err)
		}
		p := plan(q, args...)
		t.Logf("%+v:\n%s", tc.q, p)
		if !strings.Contains(p, "INDEX "+tc.want) {
			t.Errorf("%+v: the plan does not use %s", tc.q, tc.want)
		}
	}
	if p := plan(selectBurst+" WHERE b.capture_id = ? ORDER BY b.start_sample", 1); !strings.Contains(p, "sqlite_autoindex_bursts_1") {
		t.Errorf("bursts of a capture: plan does not use the natural key:\n%s", p)
	}
	if p := plan(selectBurst+" WHERE t.ident = ? AND b.start_unix_ns BETWEEN ? AND ?", "N0CALL/1", 0, 1); !strings.Contains(p, "bursts_tx_time") {
		t.Errorf("bursts of a transmitter: plan does not use bursts_tx_time:\n%s", p)
	}
}

// TestWriterBoundedQueue: however fast rows come, a batch never holds
// more than four batches' worth plus one item (the adder waits), so the
// writer's memory does not grow with the input.
func TestWriterBoundedQueue(t *testing.T) {
	db, _ := newDB(t)
	_, c := scene(t, db, "Kestrel Ridge", 45.1, 6.1, 1)
	const batch = 100
	maxRows := 0
	w, err := db.NewWriter(WriterOptions{BatchRows: batch, OnCommit: func(s CommitStats) { maxRows = max(maxRows, s.LastRows) }})
	if err != nil {
		t.Fatal(err)
	}
	for k := 0; k < 300; k++ {
		b, lv := burstAt(c, k, "N0CALL/1") // 1 + 400 rows after thinning
		if err := w.AddBurst(b, lv); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	st := w.Stats()
	if st.Bursts != 300 || st.Readings != 300*400 {
		t.Errorf("committed %d bursts, %d readings", st.Bursts, st.Readings)
	}
	if maxRows > 4*batch+401 {
		t.Errorf("a batch held %d rows, more than 4×%d + one burst", maxRows, batch)
	}
	if st.Batches < 300*401/(4*batch+401) {
		t.Errorf("%d batches for %d rows", st.Batches, st.Rows())
	}
}
