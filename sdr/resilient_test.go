package sdr

import (
	"context"
	"encoding/binary"
	"io"
	"net"
	"strings"
	"sync"
	"testing"
	"time"
)

// faultServer is an rtl_tcp server written from the protocol definition in
// osmocom rtl-sdr src/rtl_tcp.c (not from our ServeRTLTCP): on accept it
// sends dongle_info_t {char magic[4] = "RTL0"; uint32_t tuner_type;
// uint32_t tuner_gain_count}, each uint32 through htonl, then the cu8
// stream; it reads `struct command {unsigned char cmd; unsigned int
// param;} __attribute__((packed))`, 5 bytes, param through ntohl. Its
// "receiver" samples at rate from t0 whether or not a client is connected,
// as a dongle does, and hands samples over in chunks of chunk samples once
// the last sample of the chunk is due.
type faultServer struct {
	rate  float64
	chunk int
	t0    time.Time
	mu    sync.Mutex
	cmds  [][]RTLCommand // per connection
}

// sampleByte is sample k's I and Q as cu8: a sequence that does not repeat
// within 2^24 samples.
func sampleBytes(k int64) (byte, byte) { return byte(k), byte(k>>8) ^ byte(k>>16)*101 }

func (s *faultServer) greet(t *testing.T, c net.Conn) {
	var g [12]byte
	copy(g[:4], "RTL0")
	binary.BigEndian.PutUint32(g[4:], 5)  // RTLSDR_TUNER_R820T (rtl-sdr.h enum rtlsdr_tuner)
	binary.BigEndian.PutUint32(g[8:], 29) // the R820T's gain table length
	if _, err := c.Write(g[:]); err != nil {
		t.Errorf("greeting: %v", err)
	}
	s.mu.Lock()
	s.cmds = append(s.cmds, nil)
	i := len(s.cmds) - 1
	s.mu.Unlock()
	go func() {
		var b [5]byte
		for {
			if _, err := io.ReadFull(c, b[:]); err != nil {
				return
			}
			s.mu.Lock()
			s.cmds[i] = append(s.cmds[i], RTLCommand{b[0], binary.BigEndian.Uint32(b[1:])})
			s.mu.Unlock()
		}
	}()
}

// send streams samples [from, to) paced by the receiver clock; it returns
// false when the client went away.
func (s *faultServer) send(c net.Conn, from, to int64) bool {
	buf := make([]byte, 2*s.chunk)
	for k := from; k < to; {
		n := min(int64(s.chunk), to-k)
		due := s.t0.Add(time.Duration(float64(k+n) / s.rate * 1e9))
		time.Sleep(time.Until(due))
		for j := int64(0); j < n; j++ {
			buf[2*j], buf[2*j+1] = sampleBytes(k + j)
		}
		if _, err := c.Write(buf[:2*n]); err != nil {
			return false
		}
		k += n
	}
	return true
}

// now is the receiver's sample count, rounded down to whole chunks.
func (s *faultServer) now() int64 {
	k := int64(time.Since(s.t0).Seconds() * s.rate)
	return k / int64(s.chunk) * int64(s.chunk)
}

// readN reads n samples as cu8 from src.
func readN(t *testing.T, src CU8Reader, n int) []byte {
	t.Helper()
	out := make([]byte, 0, 2*n)
	buf := make([]byte, 8192)
	for len(out) < 2*n {
		k, err := src.ReadCU8(buf[:min(len(buf), 2*n-len(out))])
		out = append(out, buf[:k]...)
		if err != nil {
			t.Fatalf("read after %d samples: %v", len(out)/2, err)
		}
	}
	return out
}

// checkSeq reports whether got holds samples from..from+len/2 of the
// server's sequence.
func checkSeq(t *testing.T, what string, got []byte, from int64) {
	t.Helper()
	for j := 0; j < len(got)/2; j++ {
		i, q := sampleBytes(from + int64(j))
		if got[2*j] != i || got[2*j+1] != q {
			t.Fatalf("%s: delivered sample %d is %d,%d, want sample %d of the server (%d,%d)", what, j, got[2*j], got[2*j+1], from+int64(j), i, q)
		}
	}
}

// The server drops the connection mid-stream and is gone (connection
// refused) for 400 ms: the client reconnects, sends the whole configuration
// again after the new greeting, records one gap at the right index whose
// length matches the samples the server's receiver took meanwhile (±1
// chunk), and delivers the server's samples after it exactly.
func TestResilientReconnect(t *testing.T) {
	const rate, chunk = 240000.0, 2400 // 10 ms chunks
	const first = 48000                // 0.2 s on the first connection
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := ln.Addr().String()
	srv := &faultServer{rate: rate, chunk: chunk}
	resumed := make(chan int64, 1)
	serverDone := make(chan struct{})
	go func() {
		defer close(serverDone)
		c, err := ln.Accept()
		if err != nil {
			return
		}
		srv.t0 = time.Now()
		srv.greet(t, c)
		srv.send(c, 0, first)
		c.Close()
		ln.Close()
		time.Sleep(400 * time.Millisecond)
		ln2, err := net.Listen("tcp", addr)
		if err != nil {
			t.Errorf("listen again on %s: %v", addr, err)
			return
		}
		defer ln2.Close()
		c2, err := ln2.Accept()
		if err != nil {
			return
		}
		defer c2.Close()
		srv.greet(t, c2)
		k := srv.now()
		resumed <- k
		srv.send(c2, k, k+int64(rate)) // a second more at most
	}()
	var gaps []Gap
	var lost []string // OnLost's causes, and "gap" where OnGap came
	cfg := RTLConfig{SampleRate: rate, CenterHz: 145.5e6, GainDB: 19.7, PPM: -3, AGC: true, NoDataTimeout: time.Second}
	src, err := NewResilientRTLTCP(context.Background(), addr, cfg, ResilientOptions{
		Backoff: Backoff{Min: 20 * time.Millisecond, Max: 100 * time.Millisecond},
		OnGap:   func(g Gap) { gaps = append(gaps, g); lost = append(lost, "gap") },
		OnLost:  func(cause error) { lost = append(lost, cause.Error()) },
	})
	if err != nil {
		t.Fatal(err)
	}
	before := readN(t, src, first)
	checkSeq(t, "before the fault", before, 0)
	after := readN(t, src, 24000)
	src.Close()
	<-serverDone
	k := <-resumed
	checkSeq(t, "after the fault", after, k)
	if len(gaps) != 1 || src.Reconnects() != 1 {
		t.Fatalf("gaps %+v, reconnects %d: want one gap", gaps, src.Reconnects())
	}
	if len(lost) != 2 || lost[0] == "gap" || lost[1] != "gap" {
		t.Errorf("OnLost and OnGap came as %q: want the loss (with its cause), then the gap", lost)
	}
	g := gaps[0]
	want := k - first
	if g.Kind != GapReconnect || g.Index != first || g.Missing < want-chunk || g.Missing > want+chunk {
		t.Errorf("gap %+v: want reconnect at %d of %d ± %d samples", g, first, want, chunk)
	}
	if lost := float64(g.Lost) / 1e9 * rate; lost < float64(g.Missing)-1 || lost > float64(g.Missing)+1 {
		t.Errorf("gap lasts %v for %d samples", g.Lost, g.Missing)
	}
	if got := src.StreamIndex(first); got != first+g.Missing {
		t.Errorf("StreamIndex(%d) = %d, want %d", first, got, first+g.Missing)
	}
	if got := src.Gaps(); len(got) != 1 || got[0] != g {
		t.Errorf("Gaps() = %+v", got)
	}
	t.Logf("gap %d samples (%v) estimated; server skipped %d", g.Missing, g.Lost, want)
	// rtl_tcp.c keeps no settings between clients: the configuration is
	// sent in full after each greeting.
	srv.mu.Lock()
	defer srv.mu.Unlock()
	wantCmds := []RTLCommand{{CmdSampleRate, 240000}, {CmdCenterFreq, 145500000}, {CmdGainMode, 1}, {CmdGain, 197}, {CmdFreqCorrection, 0xfffffffd}, {CmdAGCMode, 1}}
	if len(srv.cmds) != 2 {
		t.Fatalf("%d connections", len(srv.cmds))
	}
	for i, got := range srv.cmds {
		if len(got) != len(wantCmds) {
			t.Errorf("connection %d commands %v, want %v", i, got, wantCmds)
			continue
		}
		for j := range got {
			if got[j] != wantCmds[j] {
				t.Errorf("connection %d command %d = %+v, want %+v", i, j, got[j], wantCmds[j])
			}
		}
	}
}

// Inside one connection: a stall after which the server delivers all it
// buffered is no gap; a stall after which it dropped the oldest 100 ms of
// its queue (what rtl_tcp.c does when its queue is full) is one
// GapDropped at the stall point of 24000 samples ± 1 chunk.
func TestResilientDropWithinConnection(t *testing.T) {
	old := dropWindow
	dropWindow = 300 * time.Millisecond
	defer func() { dropWindow = old }()
	const rate, chunk = 240000.0, 2400
	const stallAt, stall2At, dropped = 240000 / 2, 240000 * 3 / 2, 24000 // at 0.5 s and 1.5 s
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	srv := &faultServer{rate: rate, chunk: chunk}
	go func() {
		c, err := ln.Accept()
		if err != nil {
			return
		}
		defer c.Close()
		srv.t0 = time.Now()
		srv.greet(t, c)
		if !srv.send(c, 0, stallAt) {
			return
		}
		time.Sleep(300 * time.Millisecond) // stall; samples queue up
		if !srv.send(c, stallAt, stall2At) {
			return // the backlog goes out at once, then paced
		}
		time.Sleep(300 * time.Millisecond) // stall; the queue overflows
		srv.send(c, stall2At+dropped, 3*240000)
	}()
	var gaps []Gap
	src, err := NewResilientRTLTCP(context.Background(), ln.Addr().String(), RTLConfig{SampleRate: rate, NoDataTimeout: time.Second},
		ResilientOptions{OnGap: func(g Gap) { gaps = append(gaps, g) }})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	got := readN(t, src, 3*240000-dropped-chunk)
	checkSeq(t, "before the drop", got[:2*stall2At], 0)
	checkSeq(t, "after the drop", got[2*stall2At:], stall2At+dropped)
	if len(gaps) != 1 {
		t.Fatalf("gaps %+v: want one", gaps)
	}
	g := gaps[0]
	if g.Kind != GapDropped || g.Index < stall2At-chunk || g.Index > stall2At+chunk || g.Missing < dropped-chunk || g.Missing > dropped+chunk {
		t.Errorf("gap %+v: want dropped at %d of %d, ± %d", g, stall2At, dropped, chunk)
	}
	t.Logf("gap %+v", g)
}

// Cancelling the context ends a Read blocked in the backoff wait.
func TestResilientCancelDuringBackoff(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := &faultServer{rate: 240000, chunk: 2400}
	go func() {
		c, err := ln.Accept()
		if err != nil {
			return
		}
		srv.t0 = time.Now()
		srv.greet(t, c)
		srv.send(c, 0, 4800)
		c.Close()
		ln.Close() // and never comes back
	}()
	ctx, cancel := context.WithCancel(context.Background())
	src, err := NewResilientRTLTCP(ctx, ln.Addr().String(), RTLConfig{SampleRate: 240000}, ResilientOptions{Backoff: Backoff{Min: 10 * time.Second}})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	readN(t, src, 4800)
	time.AfterFunc(200*time.Millisecond, cancel)
	t0 := time.Now()
	_, err = src.ReadCU8(make([]byte, 100))
	if err == nil || time.Since(t0) > 2*time.Second {
		t.Fatalf("err %v after %v", err, time.Since(t0))
	}
	// GiveUpAfter ends the stream with one line naming the fault.
	ln2, _ := net.Listen("tcp", "127.0.0.1:0")
	go func() {
		c, err := ln2.Accept()
		if err != nil {
			return
		}
		srv.t0 = time.Now()
		srv.greet(t, c)
		srv.send(c, 0, 4800)
		c.Close()
		ln2.Close()
	}()
	src2, err := NewResilientRTLTCP(context.Background(), ln2.Addr().String(), RTLConfig{SampleRate: 240000},
		ResilientOptions{Backoff: Backoff{Min: 10 * time.Millisecond, Max: 20 * time.Millisecond}, GiveUpAfter: 300 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	defer src2.Close()
	readN(t, src2, 4800)
	_, err = src2.ReadCU8(make([]byte, 100))
	if err == nil || !strings.Contains(err.Error(), "gave up reconnecting after") || !strings.Contains(err.Error(), "closed the connection after 4800 samples") {
		t.Fatalf("err %v", err)
	}
}

// Backoff delays double from Min up to Max, and the jitter only shortens.
func TestBackoffDelay(t *testing.T) {
	b := Backoff{Min: 100 * time.Millisecond, Max: time.Second, Jitter: 0.5}
	for k, want := range []time.Duration{100, 200, 400, 800, 1000, 1000} {
		want *= time.Millisecond
		if got := b.Delay(k, 0); got != want {
			t.Errorf("Delay(%d, 0) = %v, want %v", k, got, want)
		}
		if got := b.Delay(k, 0.999999); got < want/2 || got > want {
			t.Errorf("Delay(%d, 1) = %v, want in [%v, %v]", k, got, want/2, want)
		}
	}
	if got := b.Delay(200, 0); got != time.Second {
		t.Errorf("Delay(200) = %v", got)
	}
}
