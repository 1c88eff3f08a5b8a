package survey

import (
	"context"
	"errors"
	"io"
	"math"
	"nullseek/internal/testtool"
	"strings"
	"testing"
	"time"

	"nullseek/heading"
	"nullseek/sdr"
)

// pacedSource is a live receiver stand-in: samples come at rate in real
// time, in blocks, and the stream fails with endErr after limit samples
// (limit < 0: never).
type pacedSource struct {
	info   sdr.Info
	n      int64
	limit  int64
	endErr error
}

func newPacedSource(rate float64, limit int64, endErr error) *pacedSource {
	return &pacedSource{
		info:  sdr.Info{SampleRate: rate, Start: time.Now().UTC(), Format: "cf32_le", Name: "paced test source", Samples: -1, ClipLevel: 1},
		limit: limit, endErr: endErr,
	}
}

func (s *pacedSource) Info() sdr.Info { return s.info }
func (s *pacedSource) Close() error   { return nil }
func (s *pacedSource) Read(dst []complex64) (int, error) {
	if s.limit >= 0 && s.n >= s.limit {
		return 0, s.endErr
	}
	k := min(int64(len(dst)), int64(s.info.SampleRate/50))
	if s.limit >= 0 {
		k = min(k, s.limit-s.n)
	}
	due := s.info.Start.Add(time.Duration(float64(s.n+k) / s.info.SampleRate * float64(time.Second)))
	time.Sleep(time.Until(due))
	for i := range dst[:k] {
		dst[i] = complex(float32(s.n+int64(i)), 0)
	}
	s.n += k
	return int(k), nil
}

// TestCaptureLiveSweep records while the dummy rotator turns 0° → 12°:
// the track is on the capture's clock and turns at the dummy's 6°/s, the
// capture ends a margin after the sweep, and every sample reaches the sink
// in order.
func TestCaptureLiveSweep(t *testing.T) {
	t.Parallel()
	addr, _ := testtool.Rotctld(t)
	src := newPacedSource(20000, -1, nil)
	rot, err := heading.DialRotator(context.Background(), addr, heading.RotatorOptions{CaptureStart: src.Info().Start})
	if err != nil {
		t.Fatal(err)
	}
	defer rot.Close()
	var got int64
	inOrder := true
	lc, err := CaptureLive(context.Background(), src, LiveOptions{
		Rotator: rot, Plan: SweepPlan{FromDeg: 0, ToDeg: 12}, MarginS: 0.5,
		Sink: func(b []complex64) error {
			for _, v := range b {
				if int64(real(v)) != got {
					inOrder = false
				}
				got++
			}
			return nil
		},
	})
	if err != nil {
		t.Fatal(err)
	}
	if !lc.SweepDone || len(lc.Warnings) > 0 {
		t.Errorf("sweep done %v, warnings %v", lc.SweepDone, lc.Warnings)
	}
	if got != lc.Info.Samples || !inOrder {
		t.Errorf("sink got %d samples (in order: %v), capture says %d", got, inOrder, lc.Info.Samples)
	}
	tr := lc.Track
	first, last := tr.Samples[0], tr.Samples[len(tr.Samples)-1]
	durS := float64(lc.Info.Samples) / lc.Info.SampleRate
	// 12° at the dummy's 6°/s (Hamlib rot_dummy, REFERENCES §3) is 2 s,
	// then the 0.5 s margin.
	if durS < 2.3 || durS > 3.5 {
		t.Errorf("captured %.2f s, want about 2.5 s", durS)
	}
	if first.T < 0 || last.T > durS+0.2 || math.Abs(last.Deg-12) > 0.6 {
		t.Errorf("track from %.2f s (%.1f°) to %.2f s (%.1f°), capture %.2f s", first.T, first.Deg, last.T, last.Deg, durS)
	}
	// Rate over the moving part.
	var t0, t1 float64
	for _, s := range tr.Samples {
		if s.Deg > 1 && t0 == 0 {
			t0 = s.T
		}
		if s.Deg < 11 {
			t1 = s.T
		}
	}
	a0, _ := tr.At(t0)
	a1, _ := tr.At(t1)
	if rate := (a1 - a0) / (t1 - t0); math.Abs(rate-6) > 0.4 {
		t.Errorf("track turns at %.2f °/s, the dummy rotator turns 6 °/s", rate)
	}
}

// TestCaptureLiveDurationCut: a capture shorter than the sweep stops the
// rotator, keeps the positions so far and warns.
func TestCaptureLiveDurationCut(t *testing.T) {
	t.Parallel()
	addr, _ := testtool.Rotctld(t)
	src := newPacedSource(20000, -1, nil)
	rot, err := heading.DialRotator(context.Background(), addr, heading.RotatorOptions{CaptureStart: src.Info().Start})
	if err != nil {
		t.Fatal(err)
	}
	defer rot.Close()
	lc, err := CaptureLive(context.Background(), src, LiveOptions{Rotator: rot, Plan: SweepPlan{FromDeg: 0, ToDeg: 90}, MaxS: 1.5})
	if err != nil {
		t.Fatal(err)
	}
	if lc.SweepDone || len(lc.Warnings) != 1 || !strings.Contains(lc.Warnings[0], "before the sweep") {
		t.Errorf("sweep done %v, warnings %v", lc.SweepDone, lc.Warnings)
	}
	if lc.Info.Samples != 30000 {
		t.Errorf("captured %d samples, want 1.5 s = 30000", lc.Info.Samples)
	}
	// The rotator was told to stop (rotctld "S"): it stays where it was.
	a0, _, err := rot.Position()
	if err != nil {
		t.Fatal(err)
	}
	time.Sleep(600 * time.Millisecond)
	a1, _, err := rot.Position()
	if err != nil {
		t.Fatal(err)
	}
	if a1 > 20 || math.Abs(a1-a0) > 0.5 {
		t.Errorf("rotator still turning after the capture: %.1f° then %.1f°", a0, a1)
	}
}

func TestCaptureLiveErrors(t *testing.T) {
	t.Parallel()
	boom := errors.New("usb unplugged")
	cases := []struct {
		name string
		src  *pacedSource
		opts LiveOptions
		want string
	}{
		{"no duration", newPacedSource(20000, -1, nil), LiveOptions{}, "duration"},
		{"negative", newPacedSource(20000, -1, nil), LiveOptions{MaxS: -1}, "duration"},
		{"stream ends", newPacedSource(20000, 5000, io.EOF), LiveOptions{MaxS: 2}, "ended after 5000 samples"},
		{"stream fails", newPacedSource(20000, 5000, boom), LiveOptions{MaxS: 2}, "usb unplugged"},
		{"sink fails", newPacedSource(20000, -1, nil), LiveOptions{MaxS: 2, Sink: func([]complex64) error { return boom }}, "recording: usb unplugged"},
	}
	for _, c := range cases {
		_, err := CaptureLive(context.Background(), c.src, c.opts)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v, want one mentioning %q", c.name, err, c.want)
		}
	}
	// Without a rotator the capture is exactly the duration.
	lc, err := CaptureLive(context.Background(), newPacedSource(20000, -1, nil), LiveOptions{MaxS: 0.25})
	if err != nil || lc.Info.Samples != 5000 || lc.Track != nil {
		t.Errorf("plain capture: %v, %+v", err, lc)
	}
	// A cancelled context ends the capture with an error.
	ctx, cancel := context.WithCancel(context.Background())
	time.AfterFunc(100*time.Millisecond, cancel)
	if _, err := CaptureLive(ctx, newPacedSource(20000, -1, nil), LiveOptions{MaxS: 5}); err == nil || !strings.Contains(err.Error(), "interrupted") {
		t.Errorf("cancelled: %v", err)
	}
}

func TestSweepPlanCheck(t *testing.T) {
	cases := []struct {
		p  SweepPlan
		ok bool
	}{
		{SweepPlan{FromDeg: 0, ToDeg: 150}, true},
		{SweepPlan{FromDeg: 350, ToDeg: 370}, true},
		{SweepPlan{FromDeg: 90, ToDeg: 0, StepDeg: -10, Dwell: time.Second}, true},
		{SweepPlan{FromDeg: 10, ToDeg: 10}, false},
		{SweepPlan{FromDeg: 0, ToDeg: 90, StepDeg: -10}, false},
		{SweepPlan{FromDeg: 0, ToDeg: 90, StepDeg: 10, Dwell: -time.Second}, false},
		{SweepPlan{FromDeg: math.NaN(), ToDeg: 90}, false},
		{SweepPlan{FromDeg: 0, ToDeg: math.Inf(1)}, false},
	}
	for _, c := range cases {
		if err := c.p.Check(); (err == nil) != c.ok {
			t.Errorf("%+v: %v, want ok=%v", c.p, err, c.ok)
		}
	}
}
