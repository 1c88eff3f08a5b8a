package capture

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"net"
	"sort"
	"strings"
	"testing"
	"time"

	"nullseek/heading"
	"nullseek/internal/angle"
	"nullseek/internal/testtool"
)

// serveNMEA accepts one TCP client at a time and runs script on it until
// script returns (then the connection is closed) or the test ends.
func serveNMEA(t *testing.T, script func(ctx context.Context, w io.Writer)) string {
	t.Helper()
	return "tcp://" + testtool.ServeTCP(t, func(ctx context.Context, c net.Conn) { script(ctx, c) })
}

// every calls fn every period until ctx ends, fn fails or limit passes
// (limit 0: no limit).
func every(ctx context.Context, period, limit time.Duration, fn func(now time.Time) error) {
	t0 := time.Now()
	tick := time.NewTicker(period)
	defer tick.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case now := <-tick.C:
			if limit > 0 && now.Sub(t0) > limit {
				return
			}
			if fn(now) != nil {
				return
			}
		}
	}
}

// TestCompassFeedCapture: a compass turning 30°/s through north sends HDT
// at 20 Hz (with GGA, HDM and one corrupted sentence mixed in) while a
// paced receiver records 2 s. Every recorded heading must be the one the
// compass sent at that moment of the capture's clock.
func TestCompassFeedCapture(t *testing.T) {
	t.Parallel()
	var err error
	t0 := time.Now()
	const startDeg, rate = 340.0, 30.0
	trueAt := func(tm time.Time) float64 { return angle.Wrap360(startDeg + rate*tm.Sub(t0).Seconds()) }
	addr := serveNMEA(t, func(ctx context.Context, w io.Writer) {
		k := 0
		every(ctx, 50*time.Millisecond, 0, func(now time.Time) error {
			k++
			var s string
			switch {
			case k == 7:
				s = "$HCHDT,123.4,T*00\r\n" // bad checksum
			case k%5 == 0:
				s = testtool.NMEASentence("GPGGA,120000.00,5000.000,N,00800.000,E,1,08,1.0,100.0,M,47.0,M,,")
			case k%7 == 0:
				s = testtool.NMEASentence(fmt.Sprintf("HCHDM,%.2f,M", angle.Wrap360(trueAt(now)-3)))
			default:
				s = testtool.NMEASentence(fmt.Sprintf("HCHDT,%.2f,T", trueAt(now)))
			}
			_, err := io.WriteString(w, s)
			return err
		})
	})
	ctx := context.Background()
	o := testOptions(20000)
	o.DurationS, o.compassSilenceS = 2, 1
	if o.Compass, err = ParseCompassAddr(addr); err != nil {
		t.Fatal(err)
	}
	src := newPacedSource(20000, -1, nil)
	lc, err := runWith(t, ctx, o, src, nil)
	if err != nil {
		t.Fatal(err)
	}
	if lc.Info.Samples != 40000 {
		t.Errorf("captured %d samples, want 40000", lc.Info.Samples)
	}
	tr := lc.Track
	if tr.Ref != heading.True || len(tr.Samples) < 25 {
		t.Fatalf("track ref %v with %d samples, want true with ~30", tr.Ref, len(tr.Samples))
	}
	if first := tr.Samples[0].T; first > 0.2 || first < -0.2 {
		t.Errorf("first heading at %.3f s, want near the start", first)
	}
	var diffs []float64
	for _, s := range tr.Samples {
		sent := trueAt(src.info.Start.Add(time.Duration(s.T * float64(time.Second))))
		diffs = append(diffs, math.Abs(angle.Wrap180(s.Deg-sent)))
	}
	sort.Float64s(diffs)
	med, worst := diffs[len(diffs)/2], diffs[len(diffs)-1]
	// The alignment is the median: 0.005° rounding plus the send-to-arrival
	// delay on loopback (a few ms at 30°/s is ~0.1°). Single readings may
	// arrive late when the machine is loaded (the sender and the capture
	// are goroutines sharing two cores with the other tests: 65 ms late is
	// 2° at 30°/s); the worst is bounded by 150 ms of such delay.
	t.Logf("%d headings; difference from the heading sent at that time: median %.3f°, largest %.3f°", len(tr.Samples), med, worst)
	if med > 0.6 || worst > 0.15*rate {
		t.Errorf("recorded headings differ from those sent by %.3f° (median), up to %.3f°", med, worst)
	}
	if len(lc.Warnings) != 1 || !strings.Contains(lc.Warnings[0], "1 bad checksum") {
		t.Errorf("warnings %q, want one naming the bad checksum", lc.Warnings)
	}
}

// TestCompassFeedFailures: each broken compass ends the capture early with
// an error saying what it sent.
func TestCompassFeedFailures(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name   string
		script func(ctx context.Context, w io.Writer)
		want   []string
		is     error
	}{
		{"garbage only", func(ctx context.Context, w io.Writer) {
			every(ctx, 100*time.Millisecond, 0, func(time.Time) error {
				_, err := io.WriteString(w, "$HCHDT,10.0,T*11\r\n"+testtool.NMEASentence("GPRMC,120000,A,5000.0,N,00800.0,E,0.0,0.0,010126,,"))
				return err
			})
		}, []string{"no valid heading", "bad checksum", "other sentence types"}, nil},
		{"magnetic only", func(ctx context.Context, w io.Writer) {
			every(ctx, 100*time.Millisecond, 0, func(time.Time) error {
				_, err := io.WriteString(w, testtool.NMEASentence("HCHDM,200.0,M"))
				return err
			})
		}, []string{"no true heading", "HCHDM"}, ErrCompassReference},
		{"hangs up", func(ctx context.Context, w io.Writer) {
			every(ctx, 100*time.Millisecond, 800*time.Millisecond, func(time.Time) error {
				_, err := io.WriteString(w, testtool.NMEASentence("HCHDT,10.0,T"))
				return err
			})
		}, []string{"closed the connection"}, nil},
		{"mute", func(ctx context.Context, w io.Writer) { <-ctx.Done() }, []string{"nothing received in 1 s"}, nil},
		{"stops sending headings", func(ctx context.Context, w io.Writer) {
			t0 := time.Now()
			every(ctx, 100*time.Millisecond, 0, func(now time.Time) error {
				s := testtool.NMEASentence("HCHDT,10.0,T")
				if now.Sub(t0) > 600*time.Millisecond {
					s = testtool.NMEASentence("GPGGA,120000.00,5000.000,N,00800.000,E,1,08,1.0,100.0,M,47.0,M,,")
				}
				_, err := io.WriteString(w, s)
				return err
			})
		}, []string{"no true heading for 1 s after"}, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			addr := serveNMEA(t, tc.script)
			o := testOptions(20000)
			o.DurationS, o.compassSilenceS = 5, 1
			var err error
			if o.Compass, err = ParseCompassAddr(addr); err != nil {
				t.Fatal(err)
			}
			began := time.Now()
			_, err = runWith(t, context.Background(), o, newPacedSource(20000, -1, nil), nil)
			took := time.Since(began)
			t.Logf("after %v: %v", took.Round(time.Millisecond), err)
			if err == nil {
				t.Fatal("capture succeeded")
			}
			if took > 3*time.Second {
				t.Errorf("the capture went on for %v; want it stopped within ~1 s", took)
			}
			for _, w := range append(tc.want, addr, "stopped") {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error does not mention %q", w)
				}
			}
			if tc.is != nil && !errors.Is(err, tc.is) {
				t.Errorf("error is not %v", tc.is)
			}
		})
	}
}

// TestCompassFeedKeepLastAndOnHeading: a feed told to keep the last 5
// readings hands every HDT heading (IEC 61162-1 HDT: heading, T) to
// OnHeading in arrival order and keeps no more than twice 5 itself.
func TestCompassFeedKeepLastAndOnHeading(t *testing.T) {
	const n = 40
	addr := serveNMEA(t, func(ctx context.Context, w io.Writer) {
		i := 0
		every(ctx, 5*time.Millisecond, 0, func(time.Time) error {
			if i == n {
				<-ctx.Done()
				return ctx.Err()
			}
			_, err := io.WriteString(w, testtool.NMEASentence(fmt.Sprintf("GPHDT,%.1f,T", float64(i))))
			i++
			return err
		})
	})
	ca, err := ParseCompassAddr(addr)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	stream, err := ca.Open(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer stream.Close()
	got := make(chan float64, n)
	f, err := StartCompassFeed(ctx, stream, CompassOptions{Ref: heading.True, KeepLast: 5, OnHeading: func(_ time.Time, deg float64) { got <- deg }})
	if err != nil {
		t.Fatal(err)
	}
	defer f.Stop()
	for i := 0; i < n; i++ {
		select {
		case d := <-got:
			if d != float64(i) {
				t.Fatalf("heading %d: got %v", i, d)
			}
		case <-ctx.Done():
			t.Fatalf("only %d headings arrived", i)
		}
	}
	tr, err := f.Track(time.Now().Add(-time.Hour))
	if err != nil {
		t.Fatal(err)
	}
	if k := len(tr.Samples); k < 5 || k > 10 {
		t.Errorf("the feed kept %d readings, want 5–10", k)
	}
	if last := tr.Samples[len(tr.Samples)-1].Deg; last != n-1 {
		t.Errorf("last kept heading %v, want %d", last, n-1)
	}
	if _, err := StartCompassFeed(ctx, stream, CompassOptions{KeepLast: -1}); err == nil {
		t.Error("KeepLast −1 was accepted")
	}
}
