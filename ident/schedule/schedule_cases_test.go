package schedule

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
	"nullseek/ident/internal/obstest"
	"slices"
	"strings"
	"testing"
	"time"
)

// TestScheduleOverlaps: pairs of bursts from different transmitters whose
// intervals intersect (max of starts < min of ends: the usual interval
// intersection, common practice) are reported, compared with a brute-force
// all-pairs check on random intervals; a burst flagged by the receiver as
// carrying two carriers is reported on its own.
func TestScheduleOverlaps(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	ids := []string{"N0CALL/1", "N0CALL/2", "N0CALL/3", idmatch.Unknown}
	for trial := range 100 {
		var obs []fingerprint.Observation
		for i := range 3 + rng.IntN(40) {
			s := rng.Float64() * 2000
			obs = append(obs, fingerprint.Observation{Index: 100 + i, StartS: s, EndS: s + rng.Float64()*90, Ident: ids[rng.IntN(len(ids))]})
		}
		want := map[[2]int]bool{}
		for i := range obs {
			for j := i + 1; j < len(obs); j++ {
				a, b := obs[i], obs[j]
				if a.Ident == b.Ident || a.Ident == idmatch.Unknown || b.Ident == idmatch.Unknown {
					continue
				}
				if max(a.StartS, b.StartS) < min(a.EndS, b.EndS) {
					want[[2]int{min(a.Index, b.Index), max(a.Index, b.Index)}] = true
				}
			}
		}
		// MergeGapS < 0: intervals as given (merging does not touch overlaps anyway).
		plan, err := Build(obs, nil, Options{MergeGapS: -1})
		if err != nil {
			if strings.Contains(err.Error(), "at least 3") {
				continue
			}
			t.Fatalf("trial %d: %v", trial, err)
		}
		got := map[[2]int]bool{}
		for _, o := range plan.Overlaps {
			if o.Source != "intervals" || o.A == o.B || !(o.EndS > o.StartS) {
				t.Fatalf("trial %d: bad overlap %+v", trial, o)
			}
			got[[2]int{min(o.IndexA, o.IndexB), max(o.IndexA, o.IndexB)}] = true
		}
		if len(got) != len(want) || len(got) != len(plan.Overlaps) {
			t.Fatalf("trial %d: %d overlaps (%d distinct), brute force %d", trial, len(plan.Overlaps), len(got), len(want))
		}
		for k := range want {
			if !got[k] {
				t.Fatalf("trial %d: overlap %v missed", trial, k)
			}
		}
	}

	// Receiver flag: one burst with two carriers, no interval overlap.
	obs := []fingerprint.Observation{
		{Index: 1, StartS: 10, EndS: 70, Ident: "N0CALL/1"},
		{Index: 2, StartS: 75, EndS: 135, Ident: "N0CALL/2", DoubleCarrier: true},
		{Index: 3, StartS: 310, EndS: 370, Ident: "N0CALL/1"},
	}
	plan, err := Build(obs, nil, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if len(plan.Overlaps) != 1 || plan.Overlaps[0].Source != "receiver" || plan.Overlaps[0].A != "N0CALL/2" ||
		plan.Overlaps[0].IndexA != 2 || plan.Overlaps[0].B != idmatch.Unknown {
		t.Fatalf("overlaps %+v", plan.Overlaps)
	}
}

func TestScheduleErrors(t *testing.T) {
	three := []fingerprint.Observation{{StartS: 10, EndS: 70, Ident: "A"}, {StartS: 310, EndS: 370, Ident: "A"}, {StartS: 610, EndS: 670, Ident: "A"}}
	for _, tc := range []struct {
		name   string
		obs    []fingerprint.Observation
		labels []string
		want   string
	}{
		{"none", nil, nil, "at least 3"},
		{"two", three[:2], nil, "at least 3"},
		{"unlabelled", []fingerprint.Observation{{StartS: 1, EndS: 2}, {StartS: 3, EndS: 4}, {StartS: 5, EndS: 6, Ident: idmatch.Unknown}}, nil, "at least 3"},
		{"labels_length", three, []string{"A"}, "labels"},
		{"nan_start", append(slices.Clone(three), fingerprint.Observation{StartS: math.NaN(), EndS: 1, Ident: "A"}), nil, "not a finite"},
		{"reversed", append(slices.Clone(three), fingerprint.Observation{StartS: 9, EndS: 1, Ident: "A"}), nil, "before it starts"},
		{"huge", append(slices.Clone(three), fingerprint.Observation{StartS: 1e12, EndS: 1e12, Ident: "A"}), nil, "out of range"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Build(tc.obs, tc.labels, Options{})
			if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "build schedule:") {
				t.Fatalf("error %v, want one mentioning %q", err, tc.want)
			}
		})
	}
}

// slotTwoTx is a small clean schedule: N0CALL/1 five cycles, N0CALL/2 heard
// once (no period).
func slotTwoTx(start time.Time) []fingerprint.Observation {
	var obs []fingerprint.Observation
	for k := range 5 {
		s := 20 + float64(k)*300.006
		obs = append(obs, fingerprint.Observation{StartS: s, EndS: s + 60, Ident: "N0CALL/1", IdentConfidence: 1})
	}
	obs = append(obs, fingerprint.Observation{StartS: 420, EndS: 480, Ident: "N0CALL/2", IdentConfidence: 1})
	for i := range obs {
		obs[i].Index = i
		if !start.IsZero() {
			obs[i].Start = start.Add(time.Duration(obs[i].StartS * 1e9))
		}
	}
	return obs
}

// TestScheduleSingleBurstTransmitter: a transmitter heard once has no period
// (NaN, null in JSON, a reason) but keeps its place in the order.
func TestScheduleSingleBurstTransmitter(t *testing.T) {
	plan, err := Build(slotTwoTx(time.Time{}), nil, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(plan.Order, []string{"N0CALL/1", "N0CALL/2"}) {
		t.Fatalf("order %v", plan.Order)
	}
	tx := plan.Transmitter("N0CALL/2")
	if tx.HasPeriod() || !math.IsNaN(tx.DriftPPM) || !strings.Contains(tx.Reason, "only 1") || len(tx.NextOnS) != 0 {
		t.Fatalf("single-burst transmitter: %+v", tx)
	}
	// Gap from N0CALL/1's end (80 s into the cycle) to N0CALL/2 (120 s).
	if g := plan.Transmitter("N0CALL/1").GapS; math.Abs(g-40) > 0.1 {
		t.Errorf("gap %.3f s, want 40 s", g)
	}
	if plan.DriftReference != "median of transmitters" || math.Abs(plan.CommonPeriodS-300.006) > 1e-6 {
		t.Errorf("reference %q %.6f", plan.DriftReference, plan.CommonPeriodS)
	}
	b, err := json.Marshal(plan)
	if err != nil {
		t.Fatal(err)
	}
	var raw struct {
		Transmitters []map[string]any `json:"transmitters"`
	}
	if err := json.Unmarshal(b, &raw); err != nil {
		t.Fatal(err)
	}
	if v, ok := txByIdent(raw.Transmitters)["N0CALL/2"]["period_s"]; !ok || v != nil {
		t.Errorf("period_s of a single-burst transmitter: %v (present %v), want null", v, ok)
	}
}

// TestScheduleJSONShape: the CLI's JSON names (order, transmitters.*.period_s,
// period_sigma_s, on_s, gap_s, drift_ppm, next_on, collisions[].a/b/at/at_s),
// RFC 3339 times when the capture start is known, seconds otherwise.
func TestScheduleJSONShape(t *testing.T) {
	eachStart(t, rand.New(rand.NewPCG(1, 99)), func(t *testing.T, start time.Time, plan *Plan, b []byte) {
		var doc struct {
			Type         string                    `json:"type"`
			Order        []string                  `json:"order"`
			TxList       []map[string]any          `json:"transmitters"`
			Transmitters map[string]map[string]any `json:"-"`
			Collisions   []map[string]any          `json:"collisions"`
			Overlaps     []any                     `json:"overlaps"`
			DriftRef     string                    `json:"drift_reference"`
		}
		if err := json.Unmarshal(b, &doc); err != nil {
			t.Fatal(err)
		}
		doc.Transmitters = txByIdent(doc.TxList)
		if doc.Type != "schedule" {
			t.Errorf(`"type" %q, want "schedule" (every JSON line nullseek writes says its type)`, doc.Type)
		}
		for i, tx := range doc.TxList {
			if tx["ident"] != plan.Order[i] {
				t.Errorf("transmitters[%d] is %v, want %s: the list follows the cycle order", i, tx["ident"], plan.Order[i])
			}
		}
		if !slices.Equal(doc.Order, plan.Order) || len(doc.Transmitters) != 5 || doc.DriftRef != "nominal 300 s" || doc.Overlaps == nil {
			t.Fatalf("document %s", b)
		}
		for id, tx := range doc.Transmitters {
			for _, k := range []string{"period_s", "period_sigma_s", "on_s", "gap_s", "drift_ppm"} {
				if _, ok := tx[k].(float64); !ok {
					t.Errorf("%s.%s = %v, want a number", id, k, tx[k])
				}
			}
			next, _ := tx["next_on"].([]any)
			if len(next) != 3 {
				t.Fatalf("%s.next_on = %v", id, tx["next_on"])
			}
			for n, v := range next {
				want := plan.Transmitter(id).NextOnS[n]
				slotCheckWhen(t, v, !start.IsZero(), start, want)
			}
		}
		if len(doc.Collisions) == 0 {
			t.Fatal("no collisions in the document")
		}
		for _, col := range doc.Collisions {
			a, _ := col["a"].(string)
			bb, _ := col["b"].(string)
			atS, ok := col["at_s"].(float64)
			if a == "" || bb == "" || !ok {
				t.Fatalf("collision %v", col)
			}
			slotCheckWhen(t, col["at"], !start.IsZero(), start, atS)
		}
	})
}

func slotCheckWhen(t *testing.T, v any, withStart bool, start time.Time, wantS float64) {
	t.Helper()
	if withStart {
		s, ok := v.(string)
		if !ok {
			t.Fatalf("time %v is not a string", v)
		}
		at, err := time.Parse(time.RFC3339Nano, s) // RFC 3339
		if err != nil {
			t.Fatalf("time %q: %v", s, err)
		}
		if d := at.Sub(start).Seconds() - wantS; math.Abs(d) > 1e-3 {
			t.Errorf("time %s is %.4f s off", s, d)
		}
		return
	}
	f, ok := v.(float64)
	if !ok || math.Abs(f-wantS) > 0.5e-4+1e-9 { // written to 0.1 ms
		t.Errorf("time %v, want seconds %.3f", v, wantS)
	}
}

// simPlan builds the plan of the third simulated case (slotSimCases[2],
// nominal period 300 s) with the capture start given (zero: unknown) and
// extra observations added.
func simPlan(t testing.TB, rng *rand.Rand, start time.Time, extra ...fingerprint.Observation) *Plan {
	t.Helper()
	c := slotSimCases[2]
	c.start = start
	obs, endS := slotSimulate(c, rng)
	opts := DefaultOptions()
	opts.NominalPeriodS, opts.CaptureEndS = 300, endS
	plan, err := Build(append(obs, extra...), nil, opts)
	if err != nil {
		t.Fatal(err)
	}
	return plan
}

// eachStart runs f on simPlan's plan and its JSON in two subtests: with
// the capture start known (2025-05-17 09:00 UTC) and unknown.
func eachStart(t *testing.T, rng *rand.Rand, f func(t *testing.T, start time.Time, plan *Plan, js []byte)) {
	for _, withStart := range []bool{true, false} {
		t.Run(fmt.Sprintf("start_known_%v", withStart), func(t *testing.T) {
			var start time.Time
			if withStart {
				start = time.Date(2025, 5, 17, 9, 0, 0, 0, time.UTC)
			}
			plan := simPlan(t, rng, start)
			js, err := json.Marshal(plan)
			if err != nil {
				t.Fatal(err)
			}
			f(t, start, plan, js)
		})
	}
}

func TestScheduleWriteTable(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 99))
	plan := simPlan(t, rng, time.Time{}, fingerprint.Observation{Index: 999, StartS: 200, EndS: 210, Ident: "N0CALL/9"})
	var buf bytes.Buffer
	if err := plan.WriteTable(&buf); err != nil {
		t.Fatal(err)
	}
	out := buf.String()
	for _, id := range plan.Order {
		if !strings.Contains(out, id) {
			t.Errorf("table lacks %s:\n%s", id, out)
		}
	}
	if strings.Contains(out, "NaN") || !strings.Contains(out, "N0CALL/3 end meets N0CALL/4 start") || !strings.Contains(out, "only 1 usable") {
		t.Errorf("table:\n%s", out)
	}
	t.Logf("\n%s", out)
}

// TestScheduleRobustness: a burst broken in two by fading is merged, a burst
// already on the air when the capture started is kept out of the period fit,
// a spurious start is dropped, and a wrong nominal period does not break the
// cycle numbering (truth: period 300.012 s).
func TestScheduleRobustness(t *testing.T) {
	const p = 300.012
	base := func() []fingerprint.Observation {
		var obs []fingerprint.Observation
		for k := range 8 {
			s := 30 + float64(k)*p
			obs = append(obs, fingerprint.Observation{StartS: s, EndS: s + 60, Ident: "N0CALL/1"})
			obs = append(obs, fingerprint.Observation{StartS: s + 100, EndS: s + 160, Ident: "N0CALL/2"})
		}
		return obs
	}
	for _, tc := range []struct {
		name  string
		edit  func([]fingerprint.Observation) []fingerprint.Observation
		opts  Options
		note  string
		fitN1 int
	}{
		{"clean", func(o []fingerprint.Observation) []fingerprint.Observation { return o }, Options{}, "", 8},
		{"fragment", func(o []fingerprint.Observation) []fingerprint.Observation {
			// Cycle 3 of N0CALL/1 fades out for 4 s in the middle.
			o[6].EndS = o[6].StartS + 25
			return append(o, fingerprint.Observation{StartS: o[6].StartS + 29, EndS: o[6].StartS + 60, Ident: "N0CALL/1"})
		}, Options{}, "fragment", 8},
		{"cut_at_capture_start", func(o []fingerprint.Observation) []fingerprint.Observation {
			// N0CALL/2 was already sending when the recording started.
			return append(o, fingerprint.Observation{StartS: 0, EndS: 20, Ident: "N0CALL/2"})
		}, Options{}, "", 8},
		{"spurious_start", func(o []fingerprint.Observation) []fingerprint.Observation {
			o[8].StartS += 2.5 // a burst logged 2.5 s late
			o[8].EndS += 2.5
			return o
		}, Options{}, "dropped", 7},
		{"stuck_carrier_elsewhere", func(o []fingerprint.Observation) []fingerprint.Observation {
			// Another transmitter keyed for 400 s once must not stop the
			// 300 s cycle from being found (period > own on-time only).
			return append(o, fingerprint.Observation{StartS: 1000, EndS: 1400, Ident: "N0CALL/9"})
		}, Options{}, "", 8},
		{"wrong_nominal", func(o []fingerprint.Observation) []fingerprint.Observation { return o }, Options{NominalPeriodS: 360}, "nominal period", 8},
	} {
		t.Run(tc.name, func(t *testing.T) {
			obs := tc.edit(base())
			for i := range obs {
				obs[i].Index = i
			}
			plan, err := Build(obs, nil, tc.opts)
			if err != nil {
				t.Fatal(err)
			}
			tx1, tx2 := plan.Transmitter("N0CALL/1"), plan.Transmitter("N0CALL/2")
			for _, tx := range []*Transmitter{tx1, tx2} {
				if math.Abs(tx.PeriodS-p) > 1e-6 {
					t.Errorf("%s period %.6f s, want %.6f", tx.ID, tx.PeriodS, p)
				}
				if math.Abs(tx.OnS-60) > 1e-6 {
					t.Errorf("%s on %.3f s", tx.ID, tx.OnS)
				}
			}
			if tx1.FitBursts != tc.fitN1 {
				t.Errorf("N0CALL/1 fitted %d starts, want %d", tx1.FitBursts, tc.fitN1)
			}
			if tc.name == "cut_at_capture_start" && (plan.Order[0] != "N0CALL/2" || tx2.Bursts != 9 || tx2.FitBursts != 8) {
				t.Errorf("order %v, N0CALL/2 bursts %d fitted %d", plan.Order, tx2.Bursts, tx2.FitBursts)
			}
			if tc.note != "" && !strings.Contains(strings.Join(plan.Notes, "\n"), tc.note) {
				t.Errorf("notes %q lack %q", plan.Notes, tc.note)
			}
		})
	}
}

// TestScheduleFromClusters: bursts labelled by fingerprint.Cluster (two with
// unreadable IDs) give the same schedule as the true labels.
func TestScheduleFromClusters(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	txs := []obstest.SimTx{
		{ID: "N0CALL/1", OffsetHz: -120, ToneHz: 800, UnreadableK: []int{0}},
		{ID: "N0CALL/2", OffsetHz: 35, ToneHz: 800},
		{ID: "N0CALL/3", OffsetHz: 150, ToneHz: 1000, UnreadableK: []int{2, 3}},
	}
	obs, _ := obstest.Simulate(txs, 6, 3, 2, rng)
	res, err := fingerprint.Cluster(obs, fingerprint.Options{})
	if err != nil {
		t.Fatal(err)
	}
	plan, err := Build(obs, res.Idents, Options{NominalPeriodS: 300})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(plan.Order, []string{"N0CALL/1", "N0CALL/2", "N0CALL/3"}) {
		t.Fatalf("order %v", plan.Order)
	}
	for _, tx := range plan.Transmitters {
		if tx.Bursts != 6 || math.Abs(tx.PeriodS-300) > 1e-9 {
			t.Errorf("%s: %d bursts, period %.6f", tx.ID, tx.Bursts, tx.PeriodS)
		}
	}
	// Fingerprint labels work as well.
	plan, err = Build(obs, res.Labels, Options{})
	if err != nil || !slices.Equal(plan.Order, []string{"T1", "T2", "T3"}) {
		t.Fatalf("order %v, %v", plan.Order, err)
	}
}

func FuzzBuildSchedule(f *testing.F) {
	f.Add([]byte{10, 60, 1, 100, 0, 200, 100, 60, 2, 100, 1, 200, 100, 60, 1, 100, 0, 200, 100, 60, 2, 100, 1, 200})
	f.Add([]byte{255, 0, 1, 2, 0, 1, 255, 2, 3, 4, 1, 7, 0, 0, 0, 0, 2, 0})
	f.Add(bytes.Repeat([]byte{33, 20, 5, 90, 1, 150}, 40))
	f.Add(bytes.Repeat([]byte{0, 0, 0, 0, 0, 0}, 10))
	f.Fuzz(func(t *testing.T, data []byte) {
		obs := obstest.FuzzObservations(data)
		var labels []string
		if len(data) > 0 && data[0]%2 == 1 {
			labels = make([]string, len(obs))
			for i := range labels {
				labels[i] = fmt.Sprintf("T%d", i%3)
			}
		}
		opts := DefaultOptions()
		if len(data) > 1 && data[1]%3 == 0 {
			opts.NominalPeriodS = float64(data[1]) + 1
			opts.CaptureStart = time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC)
		}
		plan, err := Build(obs, labels, opts)
		if err != nil {
			return
		}
		if len(plan.Order) != len(plan.Transmitters) {
			t.Fatalf("order %d, transmitters %d", len(plan.Order), len(plan.Transmitters))
		}
		if _, err := json.Marshal(plan); err != nil {
			t.Fatalf("marshal: %v", err)
		}
		if err := plan.WriteTable(&bytes.Buffer{}); err != nil {
			t.Fatal(err)
		}
	})
}

// TestScheduleBounds: every option outside its documented range is refused
// in one line naming the flag or field; the edges pass.
func TestScheduleBounds(t *testing.T) {
	obs := slotTwoTx(time.Time{})
	ok := DefaultOptions()
	for _, o := range []Options{ok, {}, {NominalPeriodS: MaxPeriodS}, {NextCount: MaxNextCount}, {NextCount: 0}} {
		if err := o.Validate(); err != nil {
			t.Errorf("%+v: %v", o, err)
		}
	}
	for _, tc := range []struct {
		name string
		o    Options
		want string
	}{
		{"period NaN", Options{NominalPeriodS: math.NaN()}, "--period"},
		{"period negative", Options{NominalPeriodS: -45}, "--period"},
		{"period over a day", Options{NominalPeriodS: MaxPeriodS + 1}, "--period"},
		{"period Inf", Options{NominalPeriodS: math.Inf(1)}, "--period"},
		{"next negative", Options{NextCount: -1}, "--next"},
		{"next too many", Options{NextCount: MaxNextCount + 1}, "--next"},
		{"capture end NaN", Options{CaptureEndS: math.NaN()}, "capture end"},
		{"jitter huge", Options{StartJitterS: 100}, "start jitter"},
		{"merge gap NaN", Options{MergeGapS: math.NaN()}, "merge gap"},
		{"edge guard Inf", Options{EdgeGuardS: math.Inf(1)}, "edge guard"},
	} {
		err := tc.o.Validate()
		if err == nil || !strings.HasPrefix(err.Error(), tc.want) || strings.Contains(err.Error(), "\n") || !errors.Is(err, ErrBadOptions) {
			t.Errorf("%s: %v, want one line starting %q", tc.name, err, tc.want)
		}
		if _, err := Build(obs, nil, tc.o); err == nil {
			t.Errorf("%s: Build accepted what Validate refuses", tc.name)
		}
	}
}

// beaconsAt makes observations of transmitters with the given first
// starts, one period P, on-time onS and n cycles each (t_k = first + k·P,
// straight-line truth).
func beaconsAt(firsts map[string]float64, p, onS float64, n int) []fingerprint.Observation {
	var obs []fingerprint.Observation
	ids := make([]string, 0, len(firsts))
	for id := range firsts {
		ids = append(ids, id)
	}
	slices.Sort(ids)
	for k := 0; k < n; k++ {
		for _, id := range ids {
			s := firsts[id] + float64(k)*p
			obs = append(obs, fingerprint.Observation{Index: len(obs), StartS: s, EndS: s + onS, Ident: id, IdentConfidence: 1})
		}
	}
	return obs
}

// TestScheduleNextInTable: --next N changes the table as well as the JSON,
// and 0 predicts nothing; each prediction is t0 + k·P (straight-line
// algebra on the fitted line).
func TestScheduleNextInTable(t *testing.T) {
	obs := beaconsAt(map[string]float64{"N0CALL/1": 2, "N0CALL/2": 22}, 60, 10, 4)
	for _, n := range []int{0, 1, 5} {
		o := DefaultOptions()
		o.NextCount = n
		plan, err := Build(obs, nil, o)
		if err != nil {
			t.Fatal(err)
		}
		var b bytes.Buffer
		if err := plan.WriteTable(&b); err != nil {
			t.Fatal(err)
		}
		tx := plan.Transmitter("N0CALL/1")
		if len(tx.NextOnS) != n {
			t.Fatalf("--next %d: %d predictions", n, len(tx.NextOnS))
		}
		for k, s := range tx.NextOnS {
			want := 2 + float64(4+k)*60 // the first start after the end (4 cycles seen)
			if math.Abs(s-want) > 1e-6 {
				t.Errorf("--next %d: prediction %d at %.6f s, want %.6f", n, k, s, want)
			}
			if n > 1 && !strings.Contains(b.String(), fmt.Sprintf("+%.1f s", s)) {
				t.Errorf("--next %d: the table lacks the prediction +%.1f s:\n%s", n, s, b.String())
			}
		}
		js, _ := json.Marshal(plan)
		var back map[string]any
		if err := json.Unmarshal(js, &back); err != nil {
			t.Fatal(err)
		}
		var list []map[string]any
		for _, x := range back["transmitters"].([]any) {
			list = append(list, x.(map[string]any))
		}
		if got := txByIdent(list)["N0CALL/1"]["next_on_s"].([]any); len(got) != n {
			t.Errorf("--next %d: JSON has %d predictions", n, len(got))
		}
	}
}

// TestScheduleOneBurstWithPeriod: with a programmed cycle and one burst
// per transmitter, next-on times are given along the cycle (first + k·P,
// σ growing by 300 ppm a cycle), with a reason saying the drift is not
// measured; without the cycle there are none.
func TestScheduleOneBurstWithPeriod(t *testing.T) {
	obs := beaconsAt(map[string]float64{"N0CALL/1": 1, "N0CALL/2": 61, "N0CALL/3": 121}, 300, 55, 1)
	o := DefaultOptions()
	o.NominalPeriodS = 300
	plan, err := Build(obs, nil, o)
	if err != nil {
		t.Fatal(err)
	}
	for _, tx := range plan.Transmitters {
		first := obs[slices.IndexFunc(obs, func(x fingerprint.Observation) bool { return x.Ident == tx.ID })].StartS
		if len(tx.NextOnS) != 3 || !strings.Contains(tx.Reason, "nominal period") {
			t.Fatalf("%s: %d predictions, reason %q", tx.ID, len(tx.NextOnS), tx.Reason)
		}
		for k, s := range tx.NextOnS {
			if want := first + float64(k+1)*300; math.Abs(s-want) > 1e-9 {
				t.Errorf("%s: next %d at %.3f s, want %.3f", tx.ID, k, s, want)
			}
			if d := float64(k+1) * 300 * 300e-6; math.Abs(tx.NextOnSigmaS[k]-math.Hypot(0.03, d)) > 1e-9 {
				t.Errorf("%s: σ %.4f s", tx.ID, tx.NextOnSigmaS[k])
			}
		}
	}
	plan, err = Build(obs, nil, DefaultOptions())
	if err != nil {
		t.Fatal(err)
	}
	for _, tx := range plan.Transmitters {
		if len(tx.NextOnS) != 0 {
			t.Errorf("%s: %d predictions without a period", tx.ID, len(tx.NextOnS))
		}
	}
}

// TestScheduleNominalMisfit: a programmed cycle the starts do not keep
// (300 s given, 60 s kept: the demo's --period 300 gave −849988 ppm) is
// reported as a misfit, and the drifts are measured against the median of
// the transmitters instead (their clocks agree here: 0 ppm).
func TestScheduleNominalMisfit(t *testing.T) {
	obs := beaconsAt(map[string]float64{"N0CALL/1": 2, "N0CALL/2": 22, "N0CALL/3": 42}, 60, 10, 5)
	for _, nom := range []float64{300, 61.5} {
		o := DefaultOptions()
		o.NominalPeriodS = nom
		plan, err := Build(obs, nil, o)
		if err != nil {
			t.Fatal(err)
		}
		var b bytes.Buffer
		_ = plan.WriteTable(&b)
		js, _ := json.Marshal(plan)
		if plan.NominalFits || !strings.Contains(plan.NominalMisfit, "does not fit") || !strings.Contains(b.String(), "MISFIT") ||
			!strings.Contains(string(js), `"nominal_fits":false`) {
			t.Errorf("nominal %g s: fits %v, misfit %q\n%s", nom, plan.NominalFits, plan.NominalMisfit, b.String())
		}
		for _, tx := range plan.Transmitters {
			if math.Abs(tx.DriftPPM) > 1 {
				t.Errorf("nominal %g s: %s drift %+.1f ppm, want ≈ 0 against the median", nom, tx.ID, tx.DriftPPM)
			}
		}
	}
	o := DefaultOptions()
	o.NominalPeriodS = 60
	plan, err := Build(obs, nil, o)
	if err != nil || !plan.NominalFits || plan.NominalMisfit != "" {
		t.Errorf("nominal 60 s: fits %v, misfit %q, %v", plan.NominalFits, plan.NominalMisfit, err)
	}
}

// TestScheduleCutBursts: a burst cut by the end of the recording (or at a
// split) is not counted in the on-time (and so not in the gap), and one
// cut by its start does not enter the period fit.
func TestScheduleCutBursts(t *testing.T) {
	obs := beaconsAt(map[string]float64{"N0CALL/1": 2, "N0CALL/2": 22}, 60, 10, 4)
	// The last N0CALL/1 burst cut short by the recording's end (3 s of 10),
	// the first N0CALL/2 burst cut by a split: it starts 4 s late.
	for i := range obs {
		if obs[i].Ident == "N0CALL/1" && obs[i].StartS > 180 {
			obs[i].EndS, obs[i].CutEnd = obs[i].StartS+3, true
		}
		if obs[i].Ident == "N0CALL/2" && obs[i].StartS < 30 {
			obs[i].StartS, obs[i].CutStart = obs[i].StartS+4, true
		}
	}
	plan, err := Build(obs, nil, DefaultOptions())
	if err != nil {
		t.Fatal(err)
	}
	a, b := plan.Transmitter("N0CALL/1"), plan.Transmitter("N0CALL/2")
	if math.Abs(a.OnS-10) > 1e-9 || math.Abs(b.OnS-10) > 1e-9 {
		t.Errorf("on-times %.3f and %.3f s, want 10 (cut bursts left out)", a.OnS, b.OnS)
	}
	if b.FitBursts != 3 || math.Abs(b.PeriodS-60) > 1e-9 {
		t.Errorf("N0CALL/2: %d starts fitted, period %.6f s; want 3 and 60", b.FitBursts, b.PeriodS)
	}
	if math.Abs(a.GapS-10) > 1e-6 {
		t.Errorf("gap N0CALL/1 → N0CALL/2 %.3f s, want 10 (20 s apart, 10 s on)", a.GapS)
	}
}

// TestScheduleListedHeard: listed IDs are split into heard and never
// heard, in list order, in the plan, its table and its JSON.
func TestScheduleListedHeard(t *testing.T) {
	obs := beaconsAt(map[string]float64{"N0CALL/1": 2, "N0CALL/3": 22}, 60, 10, 3)
	o := DefaultOptions()
	o.ListedIDs = []string{"N0CALL/1", "N0CALL/2", "N0CALL/3", "N0CALL/4"}
	plan, err := Build(obs, nil, o)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(plan.Heard, []string{"N0CALL/1", "N0CALL/3"}) || !slices.Equal(plan.NotHeard, []string{"N0CALL/2", "N0CALL/4"}) {
		t.Errorf("heard %v, not heard %v", plan.Heard, plan.NotHeard)
	}
	var b bytes.Buffer
	_ = plan.WriteTable(&b)
	js, _ := json.Marshal(plan)
	if !strings.Contains(b.String(), "never heard: N0CALL/2, N0CALL/4") || !strings.Contains(string(js), `"not_heard":["N0CALL/2","N0CALL/4"]`) {
		t.Errorf("table or JSON lacks the never-heard IDs:\n%s\n%s", b.String(), js)
	}
}

// txByIdent indexes the schedule JSON's transmitters list by "ident".
func txByIdent(list []map[string]any) map[string]map[string]any {
	m := map[string]map[string]any{}
	for _, tx := range list {
		if id, ok := tx["ident"].(string); ok {
			m[id] = tx
		}
	}
	return m
}
