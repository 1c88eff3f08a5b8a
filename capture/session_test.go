package capture

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullseek/heading"
	"nullseek/internal/testtool"
	"nullseek/sdr"
)

// pacedSource is a live receiver stand-in: samples come at rate in real
// time, in blocks of 20 ms, and the stream fails with endErr after limit
// samples (limit < 0: never). Sample n carries the cu8 codes I = n mod 256,
// Q = (n div 256) mod 256, normalised as an 8-bit receiver's are
// ((code − 127.5)/127.5, SigMF cu8; librtlsdr), so a recording can be
// checked byte for byte.
type pacedSource struct {
	info   sdr.Info
	n      int64
	limit  int64
	endErr error
}

func newPacedSource(rate float64, limit int64, endErr error) *pacedSource {
	return &pacedSource{
		info:  sdr.Info{SampleRate: rate, Start: time.Now().UTC(), Format: "cu8", Name: "paced test source", Samples: -1, ClipLevel: 1},
		limit: limit, endErr: endErr,
	}
}

// pacedCodes are the cu8 bytes of samples 0…n−1 of a pacedSource.
func pacedCodes(n int64) []byte {
	b := make([]byte, 2*n)
	for k := int64(0); k < n; k++ {
		b[2*k], b[2*k+1] = byte(k), byte(k>>8)
	}
	return b
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
		n := s.n + int64(i)
		dst[i] = complex((float32(byte(n))-127.5)/127.5, (float32(byte(n>>8))-127.5)/127.5)
	}
	s.n += k
	return int(k), nil
}

// testOptions are valid options for a paced source at rate.
func testOptions(rate float64) Options {
	o := Defaults()
	o.Receiver = Receiver{Scheme: "rtl_tcp", Addr: "127.0.0.1:1"}
	o.RateHz, o.FreqHz = rate, 145.5e6
	return o
}

// runWith runs a capture of src (in place of a receiver) with o, which
// must be valid; wrap, when set, wraps the recording.
func runWith(t *testing.T, ctx context.Context, o Options, src sdr.Source, wrap func(sink) sink) (*Result, error) {
	t.Helper()
	if err := o.Validate(); err != nil {
		t.Fatalf("test options: %v", err)
	}
	s := &session{o: o, open: func(context.Context, *Options) (sdr.Source, error) { return src, nil }, newSink: newSigMF}
	if wrap != nil {
		s.newSink = func(base string, info sdr.Info) (sink, error) {
			w, err := newSigMF(base, info)
			if err != nil {
				return nil, err
			}
			return wrap(w), nil
		}
	}
	res, err := s.run(ctx)
	if res != nil {
		t.Cleanup(func() { res.Close() })
	}
	return res, err
}

// checkRecording opens the SigMF pair at base and checks it against SigMF
// v1.2.5 (core:sha512 is the SHA-512 of the dataset file, computed here by
// coreutils sha512sum; cu8 is two bytes a sample, I first) and against the
// paced source's codes; it returns the number of samples.
func checkRecording(t *testing.T, base string) int64 {
	t.Helper()
	src, err := sdr.Open(base+".sigmf-meta", sdr.RawParams{})
	if err != nil {
		t.Fatalf("the recording does not open: %v", err)
	}
	info := src.Info()
	src.Close()
	data, err := os.ReadFile(base + ".sigmf-data")
	if err != nil {
		t.Fatal(err)
	}
	if int64(len(data)) != 2*info.Samples || info.Format != "cu8" {
		t.Errorf("data file %d bytes, metadata says %d %s samples", len(data), info.Samples, info.Format)
	}
	if !bytes.Equal(data, pacedCodes(info.Samples)) {
		t.Errorf("the recorded samples are not the first %d the source sent", info.Samples)
	}
	testtool.CheckSigMFHash(t, base)
	return info.Samples
}

// noTemporaries fails when dir holds any ".tmp" file.
func noTemporaries(t *testing.T, dir string) {
	t.Helper()
	tmp, _ := filepath.Glob(filepath.Join(dir, "*.tmp"))
	if len(tmp) > 0 {
		t.Errorf("temporary files left: %v", tmp)
	}
}

// TestRunSweep records while Hamlib's dummy rotator (rotctld 4.5.4,
// model 1, 6°/s) turns 0° → 12°: the track is on the capture's clock and
// turns at 6°/s, the capture ends a margin after the sweep, and every
// sample reaches the recording in order.
func TestRunSweep(t *testing.T) {
	t.Parallel()
	addr, _ := testtool.Rotctld(t)
	o := testOptions(20000)
	o.Rotator, o.Plan, o.MarginS = addr, &SweepPlan{FromDeg: 0, ToDeg: 12}, 0.5
	o.Record = filepath.Join(t.TempDir(), "sweep")
	res, err := runWith(t, context.Background(), o, newPacedSource(20000, -1, nil), nil)
	if err != nil {
		t.Fatal(err)
	}
	if !res.SweepDone || len(res.Warnings) > 0 {
		t.Errorf("sweep done %v, warnings %v", res.SweepDone, res.Warnings)
	}
	if n := checkRecording(t, o.Record); n != res.Info.Samples {
		t.Errorf("recording holds %d samples, the result says %d", n, res.Info.Samples)
	}
	noTemporaries(t, filepath.Dir(o.Record))
	tr := res.Track
	first, last := tr.Samples[0], tr.Samples[len(tr.Samples)-1]
	durS := res.Seconds()
	// 12° at the dummy's 6°/s (Hamlib rot_dummy) is 2 s, then the margin.
	if durS < 2.3 || durS > 3.5 {
		t.Errorf("captured %.2f s, want about 2.5 s", durS)
	}
	if first.T < 0 || last.T > durS+0.2 || math.Abs(last.Deg-12) > 0.6 {
		t.Errorf("track from %.2f s (%.1f°) to %.2f s (%.1f°), capture %.2f s", first.T, first.Deg, last.T, last.Deg, durS)
	}
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
	// The heading log beside the recording is the track (heading.WriteLog).
	fh, err := os.Open(res.HeadingLog)
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	back, err := heading.ReadLog(fh, res.Info.Start, heading.True)
	if err != nil || len(back.Samples) != len(tr.Samples) {
		t.Fatalf("heading log: %v, %d rows for %d samples", err, len(back.Samples), len(tr.Samples))
	}
	if res.Stop == nil || res.Stop.Err != nil || math.Abs(res.Stop.AzDeg-12) > 0.6 {
		t.Errorf("rotator stop %+v, want confirmed at 12°", res.Stop)
	}
}

// TestRunDurationCut: a capture shorter than the sweep stops the rotator,
// keeps the positions so far and warns.
func TestRunDurationCut(t *testing.T) {
	t.Parallel()
	addr, _ := testtool.Rotctld(t)
	o := testOptions(20000)
	o.Rotator, o.Plan, o.DurationS = addr, &SweepPlan{FromDeg: 0, ToDeg: 90}, 1.5
	res, err := runWith(t, context.Background(), o, newPacedSource(20000, -1, nil), nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.SweepDone || len(res.Warnings) != 1 || !strings.Contains(res.Warnings[0], "before the sweep") {
		t.Errorf("sweep done %v, warnings %v", res.SweepDone, res.Warnings)
	}
	if res.Info.Samples != 30000 {
		t.Errorf("captured %d samples, want 1.5 s = 30000", res.Info.Samples)
	}
	rotatorStill(t, addr, 20)
}

// rotatorStill asks rotctld for its position (`p`, Hamlib rotctld(1)
// 4.5.4) twice, 0.6 s apart, on a connection of its own, and fails when
// the rotator moved or is past maxDeg.
func rotatorStill(t *testing.T, addr string, maxDeg float64) (az float64) {
	t.Helper()
	rot, err := heading.DialRotator(context.Background(), addr, heading.RotatorOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer rot.Close()
	a0, _, err := rot.Position()
	if err != nil {
		t.Fatal(err)
	}
	time.Sleep(600 * time.Millisecond)
	a1, _, err := rot.Position()
	if err != nil {
		t.Fatal(err)
	}
	if a1 > maxDeg || math.Abs(a1-a0) > 0.1 {
		t.Errorf("rotator still turning after the capture: %.2f° then %.2f°", a0, a1)
	}
	return a1
}

// failingSink fails its writes after limit samples.
type failingSink struct {
	sink
	n, limit int64
	err      error
}

func (f *failingSink) Write(b []complex64) error {
	if f.n += int64(len(b)); f.n > f.limit {
		return f.err
	}
	return f.sink.Write(b)
}

func TestRunErrors(t *testing.T) {
	t.Parallel()
	boom := errors.New("usb unplugged")
	dir := t.TempDir()
	o := testOptions(20000)
	o.DurationS, o.HeadingFile = 2, "--headings"
	// A receiver that fails keeps what it gave, and says so.
	for _, c := range []struct {
		name string
		err  error
		want string
	}{{"stream ends", io.EOF, "ended after 5000 samples"}, {"stream fails", boom, "usb unplugged"}} {
		o.Record = filepath.Join(dir, strings.ReplaceAll(c.name, " ", "-"))
		res, err := runWith(t, context.Background(), o, newPacedSource(20000, 5000, c.err), nil)
		var fault *ReceiverFault
		if !errors.As(err, &fault) || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "2.0 s") {
			t.Errorf("%s: error %v, want a *ReceiverFault mentioning %q and the 2.0 s expected", c.name, err, c.want)
			continue
		}
		if res == nil || res.Info.Samples != 5000 || checkRecording(t, o.Record) != 5000 {
			t.Errorf("%s: result %+v, want the 5000 samples kept", c.name, res)
		}
	}
	// A recording that fails is no recording: nothing is left.
	o.Record = filepath.Join(dir, "sink-fails")
	res, err := runWith(t, context.Background(), o, newPacedSource(20000, -1, nil), func(w sink) sink { return &failingSink{sink: w, limit: 3000, err: boom} })
	if err == nil || res != nil || !strings.Contains(err.Error(), "recording: usb unplugged") {
		t.Errorf("sink fails: %v, %+v", err, res)
	}
	if left, _ := filepath.Glob(o.Record + "*"); len(left) > 0 {
		t.Errorf("sink fails: files left: %v", left)
	}
	// Without a rotator the capture is exactly the duration.
	o.Record, o.DurationS = "", 0.25
	res, err = runWith(t, context.Background(), o, newPacedSource(20000, -1, nil), nil)
	if err != nil || res.Info.Samples != 5000 || res.Track != nil || res.Kept {
		t.Errorf("plain capture: %v, %+v", err, res)
	}
	noTemporaries(t, dir)
}

// TestRunInterrupted: a cancelled capture keeps what it recorded: a SigMF
// pair that opens, whose sha512 and length agree, and the steady turn's
// heading log up to the last block; nothing temporary is left.
func TestRunInterrupted(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	o := testOptions(20000)
	o.DurationS, o.Record = 20, filepath.Join(dir, "cut")
	st, err := ParseTurn("10:30", heading.True)
	if err != nil {
		t.Fatal(err)
	}
	o.Turn = &st
	ctx, cancel := context.WithCancelCause(context.Background())
	time.AfterFunc(700*time.Millisecond, func() { cancel(&Signal{Sig: os.Interrupt}) })
	res, err := runWith(t, ctx, o, newPacedSource(20000, -1, nil), nil)
	var intr *Interrupted
	if !errors.As(err, &intr) || res == nil {
		t.Fatalf("error %v (result %v), want *Interrupted with a result", err, res)
	}
	t.Logf("%v", err)
	if intr.ExitCode() != 130 || !strings.Contains(err.Error(), "SIGINT") || !strings.Contains(err.Error(), "kept") {
		t.Errorf("exit code %d, message %q", intr.ExitCode(), err)
	}
	n := checkRecording(t, o.Record)
	if secs := float64(n) / 20000; secs < 0.5 || secs > 1.0 {
		t.Errorf("kept %.2f s, want about 0.7 s", secs)
	}
	noTemporaries(t, dir)
	fh, err := os.Open(o.Record + ".csv")
	if err != nil {
		t.Fatalf("no heading log: %v", err)
	}
	defer fh.Close()
	tr, err := heading.ReadLog(fh, res.Info.Start, heading.True)
	if err != nil {
		t.Fatal(err)
	}
	first, last := tr.Samples[0], tr.Samples[len(tr.Samples)-1]
	if first.T != 0 || math.Abs(last.T-float64(n)/20000) > 1e-6 || math.Abs(last.Deg-st.HeadingAt(last.T)) > 0.001 {
		t.Errorf("heading log from %.3f s to %.3f s (%.3f°), recording %.3f s", first.T, last.T, last.Deg, float64(n)/20000)
	}
}

// TestRunInterruptedConnecting: a signal while the receiver is still being
// dialled is an interruption too (exit 130), with nothing left behind.
func TestRunInterruptedConnecting(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	o := testOptions(20000)
	o.DurationS, o.HeadingFile, o.Record = 5, "--headings", filepath.Join(dir, "never")
	s := &session{o: o, newSink: newSigMF, open: func(ctx context.Context, _ *Options) (sdr.Source, error) {
		<-ctx.Done()
		return nil, fmt.Errorf("rtl_tcp: cannot connect to 127.0.0.1:1: %w", ctx.Err())
	}}
	ctx, cancel := context.WithCancelCause(context.Background())
	time.AfterFunc(100*time.Millisecond, func() { cancel(&Signal{Sig: os.Interrupt}) })
	res, err := s.run(ctx)
	var intr *Interrupted
	if res != nil || !errors.As(err, &intr) || intr.ExitCode() != 130 || !strings.Contains(err.Error(), "while connecting; nothing was recorded") {
		t.Errorf("result %v, error %v: want an interruption while connecting", res, err)
	}
	if left, _ := os.ReadDir(dir); len(left) > 0 {
		t.Errorf("files left: %v", left)
	}
}

// panickySink panics on its third status.
type panickySink struct{ n int }

func (p *panickySink) Show(Status) {
	if p.n++; p.n == 3 {
		panic("status sink broke")
	}
}
func (p *panickySink) Clear() {}

// TestRunPanicStopsRotator: a panic in one of the capture's goroutines
// ends the capture with an error, not a crash, and the rotator (Hamlib
// rotctld 4.5.4 dummy, mid-sweep to 90°) is still told to stop.
func TestRunPanicStopsRotator(t *testing.T) {
	t.Parallel()
	addr, _ := testtool.Rotctld(t)
	o := testOptions(20000)
	o.Rotator, o.Plan, o.Status = addr, &SweepPlan{FromDeg: 0, ToDeg: 90}, &panickySink{}
	var notes []string
	o.Notes = func(s string) { notes = append(notes, s) }
	res, err := runWith(t, context.Background(), o, newPacedSource(20000, -1, nil), nil)
	if res != nil || err == nil || !strings.Contains(err.Error(), "internal error") || !strings.Contains(err.Error(), "status sink broke") {
		t.Fatalf("result %v, error %v: want an internal error", res, err)
	}
	if last := notes[len(notes)-1]; !strings.Contains(last, "panickySink") {
		t.Errorf("the panic's stack was not shown: %q", last)
	}
	if az := rotatorStill(t, addr, 20); az > 10 {
		t.Errorf("rotator at %.1f°, want it stopped near where the panic came (0.75 s in)", az)
	}
}
