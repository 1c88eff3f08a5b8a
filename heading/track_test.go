package heading

import (
	"math"
	"nullseek/internal/angle"
	"strings"
	"testing"
)

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// circNear compares headings on the circle.
func circNear(a, b, tol float64) bool { return math.Abs(angle.Wrap180(a-b)) <= tol }

func TestAtInterpolatesAcrossNorth(t *testing.T) {
	// Circular interpolation (common practice: circular differences wrap,
	// 355° vs 10° is 15°): between neighbours the
	// antenna turned the shorter way, in either sense.
	tests := []struct {
		name    string
		samples []Sample
		tS      float64
		wantDeg float64
		wantOK  bool
	}{
		{"cw through north midpoint", []Sample{{0, 350}, {1, 10}}, 0.5, 0, true},
		{"cw through north quarter", []Sample{{0, 350}, {1, 10}}, 0.25, 355, true},
		{"cw through north three quarters", []Sample{{0, 350}, {1, 10}}, 0.75, 5, true},
		{"ccw through north midpoint", []Sample{{0, 10}, {1, 350}}, 0.5, 0, true},
		{"ccw through north three quarters", []Sample{{0, 10}, {1, 350}}, 0.75, 355, true},
		{"ccw away from north", []Sample{{0, 100}, {2, 60}}, 1.5, 70, true},
		{"plain cw", []Sample{{0, 100}, {2, 140}}, 0.5, 110, true},
		{"exactly on first sample", []Sample{{0, 359.5}, {1, 0.5}}, 0, 359.5, true},
		{"exactly on last sample", []Sample{{0, 359.5}, {1, 0.5}}, 1, 0.5, true},
		{"before the track", []Sample{{0, 1}, {1, 2}}, -0.001, 0, false},
		{"after the track", []Sample{{0, 1}, {1, 2}}, 1.001, 0, false},
		{"NaN time", []Sample{{0, 1}, {1, 2}}, math.NaN(), 0, false},
		{"inside a 3 s gap (default max gap 2 s)", []Sample{{0, 1}, {3, 2}}, 1.5, 0, false},
		{"inside a 1.9 s interval", []Sample{{0, 1}, {1.9, 2}}, 0.95, 1.5, true},
		{"single sample, on it", []Sample{{4, 42}}, 4, 42, true},
		{"empty track", nil, 0, 0, false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tr := &Track{Samples: tc.samples}
			got, ok := tr.At(tc.tS)
			if ok != tc.wantOK {
				t.Fatalf("At(%v) ok = %v, want %v", tc.tS, ok, tc.wantOK)
			}
			if ok && !near(got, tc.wantDeg, 1e-9) {
				t.Fatalf("At(%v) = %v°, want %v°", tc.tS, got, tc.wantDeg)
			}
			if ok && (got < 0 || got >= 360) {
				t.Fatalf("At(%v) = %v° outside [0, 360)", tc.tS, got)
			}
		})
	}
}

func TestAtMaxGapOption(t *testing.T) {
	tr := &Track{Samples: []Sample{{0, 10}, {1, 20}, {5, 60}, {6, 70}}}
	if _, ok := tr.At(3); ok {
		t.Fatal("At inside a 4 s hole answered with the default 2 s max gap")
	}
	tr.MaxGapS = 5
	if d, ok := tr.At(3); !ok || !near(d, 40, 1e-9) {
		t.Fatalf("At(3) with MaxGapS=5 = %v, %v; want 40, true", d, ok)
	}
	tr.MaxGapS = -1 // unlimited
	if _, ok := tr.At(3); !ok {
		t.Fatal("At with MaxGapS<0 (no limit) refused")
	}
	gaps := tr.Gaps(2)
	if len(gaps) != 1 || gaps[0] != (Gap{1, 5}) {
		t.Fatalf("Gaps(2) = %v, want [{1 5}]", gaps)
	}
	if g := tr.Gaps(4.5); len(g) != 0 {
		t.Fatalf("Gaps(4.5) = %v, want none", g)
	}
}

func TestSteadyTurnMatchesModel(t *testing.T) {
	// Linear interpolation of a linear function is exact (common
	// practice), so a sampled steady turn must reproduce the model heading
	// at any time between samples, through north in both senses.
	tests := []struct {
		name string
		turn SteadyTurn
		hz   float64
	}{
		{"cw 30 deg/s through north", SteadyTurn{StartDeg: 300, RateDegPerS: 30, StartS: 1}, 10},
		{"ccw 25 deg/s through north", SteadyTurn{StartDeg: 40, RateDegPerS: -25, StartS: 0}, 10},
		{"slow cw 3 deg/s at 1 Hz", SteadyTurn{StartDeg: 359, RateDegPerS: 3}, 1},
		{"fast ccw 170 deg/s at 1 Hz", SteadyTurn{StartDeg: 0, RateDegPerS: -170}, 1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tr, err := tc.turn.Track(0, 12.345, tc.hz)
			if err != nil {
				t.Fatal(err)
			}
			if err := tr.Validate(); err != nil {
				t.Fatal(err)
			}
			if s, e := tr.Span(); s != 0 || !near(e, 12.345, 1e-9) {
				t.Fatalf("span %v..%v, want 0..12.345", s, e)
			}
			for k := 0; k <= 1000; k++ {
				ts := 12.345 * float64(k) / 1000
				got, ok := tr.At(ts)
				if !ok || !circNear(got, tc.turn.HeadingAt(ts), 1e-9) {
					t.Fatalf("At(%v) = %v, %v; model %v", ts, got, ok, tc.turn.HeadingAt(ts))
				}
			}
		})
	}
	if _, err := (SteadyTurn{RateDegPerS: 200}).Track(0, 10, 1); err == nil {
		t.Fatal("200 deg/s at 1 Hz (ambiguous between samples) accepted")
	}
	if _, err := (SteadyTurn{RateDegPerS: 1}).Track(5, 5, 1); err == nil {
		t.Fatal("empty span accepted")
	}
	if _, err := (SteadyTurn{RateDegPerS: 1}).Track(0, 5, 0); err == nil {
		t.Fatal("zero sample rate accepted")
	}
}

func TestLagAndOffset(t *testing.T) {
	base := &Track{Samples: []Sample{{0, 0}, {10, 100}}, MaxGapS: -1} // 10 deg/s, no gap limit
	tests := []struct {
		name             string
		tr               *Track
		tS, want         float64
		wantStart, wantE float64
	}{
		// LagS > 0: the stamp T describes the antenna at T-LagS, so the
		// heading at capture time t is the sample stamped t+LagS.
		{"no lag", base, 5, 50, 0, 10},
		{"compass 0.5 s late", base.WithLag(0.5), 5, 55, -0.5, 9.5},
		{"compass 0.3 s early", base.WithLag(-0.3), 5, 47, 0.3, 10.3},
		{"mount offset +90", base.WithOffset(90), 5, 140, 0, 10},
		{"mount offset -30 wraps", base.WithOffset(-30), 2, 350, 0, 10},
		{"lag and offset", base.WithLag(1).WithOffset(270), 5, 330, -1, 9},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, ok := tc.tr.At(tc.tS)
			if !ok || !near(got, tc.want, 1e-9) {
				t.Fatalf("At(%v) = %v, %v; want %v", tc.tS, got, ok, tc.want)
			}
			s, e := tc.tr.Span()
			if !near(s, tc.wantStart, 1e-12) || !near(e, tc.wantE, 1e-12) {
				t.Fatalf("Span = %v..%v, want %v..%v", s, e, tc.wantStart, tc.wantE)
			}
		})
	}
	if base.LagS != 0 || base.MountOffsetDeg != 0 {
		t.Fatal("WithLag/WithOffset modified the receiver")
	}
	if _, ok := base.WithLag(0.5).At(9.6); ok {
		t.Fatal("At past the lag-shifted end answered")
	}
}

func TestToTrue(t *testing.T) {
	// true = magnetic + D, D east positive (WMM2025 technical report, NOAA NCEI/BGS).
	// Declinations are WMM2025 official test values quoted there.
	tests := []struct {
		name         string
		magDeg, decl float64
		wantTrueDeg  float64
	}{
		{"D=+0.50 (43N 93E, 2025.0)", 120, 0.50, 120.50},
		{"D=-5.49 (33S 109E, 2025.0) wraps below 0", 3, -5.49, 357.51},
		{"D=+20.28 (36S 137W, 2025.5) wraps past 360", 350, 20.28, 10.28},
		{"D=-99.77 (89N 121W, 2025.0)", 45, -99.77, 305.23},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			mag := &Track{Ref: Magnetic, Samples: []Sample{{0, tc.magDeg}, {1, tc.magDeg}}}
			tru := mag.ToTrue(tc.decl)
			if tru.Ref != True || !near(tru.Samples[0].Deg, tc.wantTrueDeg, 1e-9) {
				t.Fatalf("ToTrue(%v) of %v° = %v %v°, want true %v°", tc.decl, tc.magDeg, tru.Ref, tru.Samples[0].Deg, tc.wantTrueDeg)
			}
			if mag.Samples[0].Deg != tc.magDeg || mag.Ref != Magnetic {
				t.Fatal("ToTrue modified the receiver")
			}
			again := tru.ToTrue(tc.decl)
			if again.Samples[0].Deg != tru.Samples[0].Deg {
				t.Fatal("ToTrue on a true track applied the declination again")
			}
		})
	}
}

func TestCoverage(t *testing.T) {
	// Degrees of the circle visited: the measure of the union of swept
	// arcs (common practice, cf. "sweep coverage" in ARCHITECTURE.md).
	tests := []struct {
		name       string
		samples    []Sample
		start, end float64
		want       float64
	}{
		{"cw 0 to 90", []Sample{{0, 0}, {1, 45}, {2, 90}}, 0, 2, 90},
		{"cw 350 to 10 through north", []Sample{{0, 350}, {1, 0}, {2, 10}}, 0, 2, 20},
		{"there and back counts once", []Sample{{0, 0}, {1, 90}, {2, 45}, {3, 0}}, 0, 3, 90},
		{"full turn", []Sample{{0, 0}, {1, 120}, {2, 240}, {3, 0}}, 0, 3, 360},
		{"more than a turn caps at 360", []Sample{{0, 0}, {1, 120}, {2, 240}, {3, 0}, {4, 120}}, 0, 4, 360},
		{"window cuts interpolated ends", []Sample{{0, 0}, {2, 100}}, 0.5, 1.5, 50},
		{"ccw 30 to 330", []Sample{{0, 30}, {1, 0}, {2, 330}}, 0, 2, 60},
		{"gap over the max is not counted", []Sample{{0, 0}, {1, 10}, {5, 100}, {6, 110}}, 0, 6, 20},
		{"inverted window", []Sample{{0, 0}, {1, 10}}, 1, 0, 0},
		{"window outside the track", []Sample{{0, 0}, {1, 10}}, 2, 3, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tr := &Track{Samples: tc.samples}
			if got := tr.Coverage(tc.start, tc.end); !near(got, tc.want, 1e-9) {
				t.Fatalf("Coverage(%v, %v) = %v, want %v", tc.start, tc.end, got, tc.want)
			}
		})
	}
}

func TestSweeps(t *testing.T) {
	// Reversal detection with 1° hysteresis (common practice for noisy
	// compasses).
	type sw struct {
		startS, endS float64
		dir          Direction
		turnDeg      float64
	}
	tests := []struct {
		name    string
		samples []Sample
		want    []sw
	}{
		{"cw, ccw, cw",
			[]Sample{{0, 0}, {1, 45}, {2, 90}, {3, 60}, {4, 30}, {5, 75}, {6, 120}},
			[]sw{{0, 2, CW, 90}, {2, 4, CCW, -60}, {4, 6, CW, 90}}},
		{"cw through north is one sweep",
			[]Sample{{0, 340}, {1, 355}, {2, 10}, {3, 25}},
			[]sw{{0, 3, CW, 45}}},
		{"ccw through north then back",
			[]Sample{{0, 20}, {1, 5}, {2, 350}, {3, 355}, {4, 10}},
			[]sw{{0, 2, CCW, -30}, {2, 4, CW, 20}}},
		{"jitter below hysteresis does not split",
			[]Sample{{0, 0}, {1, 10}, {2, 9.6}, {3, 20}, {4, 30}},
			[]sw{{0, 4, CW, 30}}},
		{"initial jitter then ccw starts at the high point",
			[]Sample{{0, 100}, {1, 100.5}, {2, 100.2}, {3, 90}, {4, 80}},
			[]sw{{1, 4, CCW, -20.5}}},
		{"a hole splits sweeps",
			[]Sample{{0, 0}, {1, 10}, {5, 20}, {6, 30}},
			[]sw{{0, 1, CW, 10}, {5, 6, CW, 10}}},
		{"stationary gives none", []Sample{{0, 5}, {1, 5.2}, {2, 5.1}}, nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := (&Track{Samples: tc.samples}).Sweeps()
			if len(got) != len(tc.want) {
				t.Fatalf("got %d sweeps %+v, want %d", len(got), got, len(tc.want))
			}
			for i, w := range tc.want {
				g := got[i]
				if g.StartS != w.startS || g.EndS != w.endS || g.Dir != w.dir || !near(g.TurnDeg, w.turnDeg, 1e-9) {
					t.Fatalf("sweep %d = %+v, want %+v", i, g, w)
				}
			}
		})
	}
}

func TestValidate(t *testing.T) {
	tests := []struct {
		name    string
		tr      *Track
		wantErr string
	}{
		{"ok", &Track{Samples: []Sample{{0, 0}, {1, 359.9}}}, ""},
		{"360 not normalised", &Track{Samples: []Sample{{0, 360}}}, "outside [0, 360)"},
		{"time not increasing", &Track{Samples: []Sample{{1, 0}, {1, 1}}}, "not after"},
		{"NaN heading", &Track{Samples: []Sample{{0, math.NaN()}}}, "outside"},
		{"bad ref", &Track{Ref: 7}, "unknown reference"},
		{"nil", nil, "nil"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := tc.tr.Validate()
			if tc.wantErr == "" {
				if err != nil {
					t.Fatal(err)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), tc.wantErr) {
				t.Fatalf("err = %v, want containing %q", err, tc.wantErr)
			}
		})
	}
}

func BenchmarkTrackAt(b *testing.B) {
	tr, err := SteadyTurn{StartDeg: 0, RateDegPerS: 30}.Track(0, 3600, 10) // an hour at 10 Hz
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	var sink float64
	for i := 0; i < b.N; i++ {
		d, _ := tr.At(float64(i%3600000) * 0.001)
		sink += d
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "lookups/s")
	_ = sink
}

// TestParseRef: the two words naming the north a heading is measured
// from (true or magnetic north, common practice), in any case, and
// nothing else: no abbreviation, no padding.
func TestParseRef(t *testing.T) {
	for _, c := range []struct {
		in   string
		want Ref
		ok   bool
	}{
		{"true", True, true}, {"TRUE", True, true}, {"True", True, true},
		{"magnetic", Magnetic, true}, {"Magnetic", Magnetic, true}, {"MAGNETIC", Magnetic, true},
		{"t", True, false}, {"m", True, false}, {"mag", True, false}, {"grid", True, false},
		{"", True, false}, {" true", True, false}, {"truemagnetic", True, false},
	} {
		got, err := ParseRef(c.in)
		if (err == nil) != c.ok || (c.ok && got != c.want) {
			t.Errorf("ParseRef(%q) = %v, %v; want %v, ok %v", c.in, got, err, c.want, c.ok)
		}
		if err != nil && !strings.Contains(err.Error(), "want true or magnetic") {
			t.Errorf("ParseRef(%q) error %q does not say what is wanted", c.in, err)
		}
	}
}
