package heading

import (
	"math"
	"strings"
	"testing"
	"time"

	"nullseek/internal/angle"
)

func TestReadLog(t *testing.T) {
	start := time.Date(2025, 6, 1, 10, 0, 0, 0, time.UTC)
	tests := []struct {
		name    string
		in      string
		start   time.Time
		want    []Sample
		wantErr string
	}{
		{"seconds with header", "time,heading_deg\n0,350\n0.5,355.5\n1,0\n", start,
			[]Sample{{0, 350}, {0.5, 355.5}, {1, 0}}, ""},
		{"no header, spaces, CRLF, comments", "# compass\r\n 0 , 10 \r\n\r\n1.25,20\r\n# end\r\n", start,
			[]Sample{{0, 10}, {1.25, 20}}, ""},
		// RFC 3339 (time.RFC3339Nano layout, Go stdlib): 10:00:01.5Z is
		// 1.5 s after a 10:00:00Z start; +02:00 is converted to UTC.
		{"RFC 3339 UTC", "time,heading\n2025-06-01T10:00:01.5Z,90\n2025-06-01T12:00:02+02:00,91\n", start,
			[]Sample{{1.5, 90}, {2, 91}}, ""},
		{"before capture start is negative time", "2025-06-01T09:59:59Z,1\n", start, []Sample{{-1, 1}}, ""},
		{"360 reads as 0", "0,360\n", start, []Sample{{0, 0}}, ""},
		{"byte-order mark and header", "\ufefftime,heading_deg\n0,1\n", start, []Sample{{0, 1}}, ""},
		{"RFC 3339 without capture start", "2025-06-01T10:00:01Z,90\n", time.Time{}, nil, "line 1: time \"2025-06-01T10:00:01Z\": RFC 3339 time but the capture start time is unknown"},
		{"out of order names line", "0,1\n2,2\n1,3\n", start, nil, "line 3: time 1.000000 s is not after"},
		{"equal times rejected", "0,1\n0,2\n", start, nil, "line 2"},
		{"negative heading", "0,1\n1,-10\n", start, nil, "line 2: heading -10° is outside [0, 360]"},
		{"heading above 360", "0,360.5\n", start, nil, "line 1: heading 360.5° is outside"},
		{"NaN heading", "0,NaN\n", start, nil, "line 1: heading \"NaN\" is not finite"},
		{"Inf time", "Inf,1\n", start, nil, "line 1: time \"Inf\" is not a finite"},
		{"three fields", "0,1,2\n", start, nil, "line 1: want 2 comma-separated fields"},
		{"garbage header", "when,where\n0,1\n", start, nil, "line 1: time \"when\" is neither"},
		{"header after data", "0,1\ntime,heading_deg\n", start, nil, "line 2"},
		{"empty file", "", start, nil, "no data rows"},
		{"header only", "time,heading_deg\n", start, nil, "no data rows"},
		{"comments only", "# nothing\n\n", start, nil, "no data rows"},
		{"long line", strings.Repeat("1", 5000) + ",1\n", start, nil, "line 1: line longer than"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tr, err := ReadLog(strings.NewReader(tc.in), tc.start, Magnetic)
			if tc.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tc.wantErr) {
					t.Fatalf("err = %v, want containing %q", err, tc.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if tr.Ref != Magnetic {
				t.Fatalf("ref = %v", tr.Ref)
			}
			if len(tr.Samples) != len(tc.want) {
				t.Fatalf("samples %v, want %v", tr.Samples, tc.want)
			}
			for i := range tc.want {
				if !near(tr.Samples[i].T, tc.want[i].T, 1e-9) || tr.Samples[i].Deg != tc.want[i].Deg {
					t.Fatalf("sample %d = %v, want %v", i, tr.Samples[i], tc.want[i])
				}
			}
			if err := tr.Validate(); err != nil {
				t.Fatal(err)
			}
		})
	}
}

func TestReadLogGaps(t *testing.T) {
	tr, err := ReadLog(strings.NewReader("0,1\n1,2\n4.5,3\n5,4\n20,5\n"), time.Time{}, True)
	if err != nil {
		t.Fatal(err)
	}
	g := tr.Gaps(2)
	if len(g) != 2 || g[0] != (Gap{1, 4.5}) || g[1] != (Gap{5, 20}) {
		t.Fatalf("Gaps(2) = %v", g)
	}
}

func FuzzReadLog(f *testing.F) {
	for _, s := range []string{
		"time,heading_deg\n0,350\n0.5,355.5\n1,0\n",
		"2025-06-01T10:00:01.5Z,90\n",
		"0,360\n1,-1\n", "", "#\n", "0,NaN\n", "1e308,1\n",
	} {
		f.Add(s)
	}
	start := time.Date(2025, 6, 1, 10, 0, 0, 0, time.UTC)
	f.Fuzz(func(t *testing.T, in string) {
		tr, err := ReadLog(strings.NewReader(in), start, True)
		if err != nil {
			if tr != nil {
				t.Fatal("track with error")
			}
			return
		}
		if err := tr.Validate(); err != nil {
			t.Fatalf("ReadLog accepted an invalid track: %v", err)
		}
	})
}

// TestWriteLogRoundTrip: what WriteLog writes, ReadLog reads back to the
// written resolution (µs, 0.001°).
func TestWriteLogRoundTrip(t *testing.T) {
	tr, err := SteadyTurn{StartDeg: 350, RateDegPerS: 7.3}.Track(0, 20, 10)
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	if err := WriteLog(&b, tr); err != nil {
		t.Fatal(err)
	}
	back, err := ReadLog(strings.NewReader(b.String()), time.Time{}, True)
	if err != nil {
		t.Fatal(err)
	}
	if len(back.Samples) != len(tr.Samples) {
		t.Fatalf("%d samples back, wrote %d", len(back.Samples), len(tr.Samples))
	}
	for i, s := range back.Samples {
		w := tr.Samples[i]
		if math.Abs(s.T-w.T) > 1e-6 || math.Abs(angle.Diff(w.Deg, s.Deg)) > 1e-3 {
			t.Fatalf("sample %d: %v, wrote %v", i, s, w)
		}
	}
}
