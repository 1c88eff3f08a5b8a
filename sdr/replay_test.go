package sdr

import (
	"bytes"
	"context"
	"errors"
	"io"
	"log/slog"
	"os"
	osexec "os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullseek/internal/testtool"
)

// soxCU8 writes seconds of 2-channel unsigned 8-bit raw audio at rate with
// sox (a 3 kHz sine on I and the same shifted a quarter period on Q: sox
// synth's phase argument is in percent of a period, sox(1)), i.e. cu8 IQ,
// and returns its path and bytes.
func soxCU8(t testing.TB, rate, seconds string) (string, []byte) {
	t.Helper()
	sox := testtool.Need(t, "sox")
	p := filepath.Join(t.TempDir(), "sox.cu8")
	if out, err := osexec.Command(sox, "-D", "-n", "-r", rate, "-c", "2", "-b", "8", "-e", "unsigned-integer", "-t", "raw", p,
		"synth", seconds, "sine", "3000", "sine", "3000", "0", "25").CombinedOutput(); err != nil {
		t.Fatalf("sox: %v\n%s", err, out)
	}
	b, err := os.ReadFile(p)
	if err != nil || len(b) == 0 {
		t.Fatalf("sox wrote nothing: %v", err)
	}
	return p, b
}

func openRawCU8(path string, rate, center float64) func() (Source, error) {
	return func() (Source, error) {
		return Open(path, RawParams{SampleRate: rate, Format: "cu8", CenterHz: center})
	}
}

// logBuf collects a logger's lines.
type logBuf struct{ testtool.SyncBuffer }

func (l *logBuf) logger() *slog.Logger { return slog.New(slog.NewTextHandler(l, nil)) }

// replayClient serves open with opts on loopback and reads everything a
// client configured with cfg gets, until EOF.
func replayClient(t testing.TB, open func() (Source, error), opts ReplayOptions, cfg RTLConfig, limit int) ([]byte, error, error) {
	t.Helper()
	got, _, rerr, serr := replayRead(t, open, opts, cfg, limit, true)
	return got, rerr, serr
}

// replayRead is replayClient that keeps the bytes only when keep is set
// and also returns how many arrived.
func replayRead(t testing.TB, open func() (Source, error), opts ReplayOptions, cfg RTLConfig, limit int, keep bool) ([]byte, int, error, error) {
	t.Helper()
	if opts.Logger == nil {
		opts.Logger = slog.New(slog.DiscardHandler)
	}
	ln, err := ListenReplay("127.0.0.1:0", false)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	done := make(chan error, 1)
	go func() { done <- ServeReplay(ctx, ln, open, opts) }()
	cfg.EOFOnClose = true
	c, err := DialRTLTCP(ctx, ln.Addr().String(), cfg)
	if err != nil {
		cancel()
		return nil, 0, err, <-done
	}
	var got []byte
	total := 0
	buf := make([]byte, 1<<16)
	var rerr error
	for limit <= 0 || total < limit {
		n, err := c.ReadCU8(buf)
		total += n
		if keep {
			got = append(got, buf[:n]...)
		}
		if err != nil {
			if err != io.EOF {
				rerr = err
			}
			break
		}
	}
	c.Close()
	if limit > 0 {
		cancel()
	}
	return got, total, rerr, <-done
}

// A cu8 file written by sox, replayed as fast as the client reads, reaches
// the client byte for byte; the server ends cleanly at its end.
func TestReplayRoundTripSox(t *testing.T) {
	path, want := soxCU8(t, "240000", "0.5")
	got, rerr, serr := replayClient(t, openRawCU8(path, 240000, 145.5e6), ReplayOptions{},
		RTLConfig{SampleRate: 240000, CenterHz: 145.5e6}, 0)
	if rerr != nil || serr != nil {
		t.Fatalf("client %v, server %v", rerr, serr)
	}
	if !bytes.Equal(got, want) {
		t.Fatalf("client got %d bytes, differing from sox's %d", len(got), len(want))
	}
}

// With Loop the client gets the file again after its end; at Speed 4 a
// 0.25 s file takes about 62 ms a pass.
func TestReplayLoopAndSpeed(t *testing.T) {
	path, want := soxCU8(t, "240000", "0.25")
	t0 := time.Now()
	got, rerr, serr := replayClient(t, openRawCU8(path, 240000, 0), ReplayOptions{Loop: true, Speed: 4},
		RTLConfig{SampleRate: 240000}, 2*len(want))
	el := time.Since(t0)
	if rerr != nil || !errors.Is(serr, context.Canceled) {
		t.Fatalf("client %v, server %v", rerr, serr)
	}
	if len(got) < 2*len(want) || !bytes.Equal(got[:len(want)], want) || !bytes.Equal(got[len(want):2*len(want)], want) {
		t.Fatalf("got %d bytes, not the file twice", len(got))
	}
	if el < 100*time.Millisecond || el > 2*time.Second {
		t.Errorf("two passes at 4× took %v, want about 125 ms", el)
	}
}

// A client asking for another rate or centre is refused with a reason
// naming both values; a later client that asks for the right ones gets the
// stream.
func TestReplayRefusesMismatch(t *testing.T) {
	path, _ := soxCU8(t, "240000", "0.5")
	for _, tc := range []struct {
		cfg  RTLConfig
		want string
	}{
		{RTLConfig{SampleRate: 250000, CenterHz: 145.5e6}, "client asked for 250000 S/s; the recording " + path + " is 240000 S/s and a replay cannot resample"},
		{RTLConfig{SampleRate: 240000, CenterHz: 145.6e6}, "client tuned to 145600000 Hz; the recording " + path + " is centred on 145500000 Hz and a replay cannot retune"},
	} {
		var lb logBuf
		_, rerr, serr := replayClient(t, openRawCU8(path, 240000, 145.5e6), ReplayOptions{Speed: 1, Logger: lb.logger()}, tc.cfg, 1<<30)
		if rerr == nil {
			t.Errorf("%+v: client was not refused", tc.cfg)
		}
		if !errors.Is(serr, context.Canceled) {
			t.Errorf("server: %v", serr)
		}
		if !strings.Contains(lb.String(), tc.want) {
			t.Errorf("log %q lacks %q", lb.String(), tc.want)
		}
	}
	// An unknown centre takes the client's.
	var lb logBuf
	_, rerr, serr := replayClient(t, openRawCU8(path, 240000, 0), ReplayOptions{Logger: lb.logger()}, RTLConfig{SampleRate: 240000, CenterHz: 145.6e6}, 0)
	if rerr != nil || serr != nil || !strings.Contains(lb.String(), "centre frequency is unknown") {
		t.Errorf("unknown centre: client %v server %v log %q", rerr, serr, lb.String())
	}
}

// Only loopback addresses are served unless remote clients are allowed.
func TestListenReplayLoopbackOnly(t *testing.T) {
	for _, a := range []string{"127.0.0.1:0", "localhost:0", "127.0.0.2:0"} {
		ln, err := ListenReplay(a, false)
		if err != nil {
			t.Errorf("%s refused: %v", a, err)
			continue
		}
		ln.Close()
	}
	for _, a := range []string{":0", "0.0.0.0:0", "192.0.2.1:0"} { // 192.0.2.0/24: TEST-NET-1, RFC 5737
		ln, err := ListenReplay(a, false)
		if err == nil {
			ln.Close()
			t.Errorf("%s accepted", a)
			continue
		}
		if !errors.Is(err, ErrNotLoopback) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: %v", a, err)
		}
	}
	if _, err := ListenReplay("127.0.0.1", false); err == nil || !strings.Contains(err.Error(), "want HOST:PORT") {
		t.Errorf("no port: %v", err)
	}
	ln, err := ListenReplay("127.0.0.1:0", true)
	if err != nil {
		t.Fatal(err)
	}
	ln.Close()
	if err := ServeReplay(context.Background(), ln, nil, ReplayOptions{Speed: -1}); err == nil || !strings.Contains(err.Error(), "replay speed -1") {
		t.Errorf("speed -1: %v", err)
	}
}

// BenchmarkReplayThroughput: a 16 MiB cu8 recording from memory, served
// as fast as the client reads, over loopback TCP.
func BenchmarkReplayThroughput(b *testing.B) {
	data := make([]byte, 16<<20)
	for i := range data {
		data[i] = byte(i*31 + i/7)
	}
	open := func() (Source, error) {
		return NewRawSource(bytes.NewReader(data), int64(len(data)), RawParams{SampleRate: 2.4e6, Format: "cu8"}, "mem")
	}
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		_, n, rerr, serr := replayRead(b, open, ReplayOptions{}, RTLConfig{SampleRate: 2.4e6}, 0, false)
		if rerr != nil || serr != nil || n != len(data) {
			b.Fatalf("%d bytes, client %v, server %v", n, rerr, serr)
		}
	}
}

// BenchmarkReplayThroughputCF32: the same length of cf32 samples,
// converted to cu8 on the way.
func BenchmarkReplayThroughputCF32(b *testing.B) {
	in := make([]complex64, 8<<20)
	for i := range in {
		in[i] = complex(float32(i%200)/100-1, float32(i%97)/48.5-1)
	}
	open := func() (Source, error) {
		return &sliceSource{data: in, info: Info{SampleRate: 2.4e6, Format: "cf32_le", Samples: int64(len(in)), ClipLevel: 1, Name: "mem"}}, nil
	}
	b.SetBytes(int64(2 * len(in)))
	for b.Loop() {
		_, n, rerr, serr := replayRead(b, open, ReplayOptions{}, RTLConfig{SampleRate: 2.4e6}, 0, false)
		if rerr != nil || serr != nil || n != 2*len(in) {
			b.Fatalf("%d bytes, client %v, server %v", n, rerr, serr)
		}
	}
}
