package sdr

import (
	"bytes"
	"context"
	"encoding/hex"
	"io"
	"net"
	"strings"
	"sync"
	"testing"
	"time"
)

// Byte layouts from osmocom rtl-sdr src/rtl_tcp.c @ae0dd6d: the
// greeting struct {char magic[4]; uint32_t tuner_type; uint32_t
// tuner_gain_count} with htonl, and the packed struct command {unsigned char
// cmd; unsigned int param} read with ntohl. Expected hex computed with
// /usr/bin/python3 struct.pack('>4sII', b'RTL0', 5, 29) and
// struct.pack('>BI', cmd, param).
func TestRTLTCPByteLayout(t *testing.T) {
	cmds := []struct {
		code  byte
		param uint32
		hex   string
	}{
		{CmdCenterFreq, 145500000, "0108ac2760"},
		{CmdSampleRate, 2048000, "02001f4000"},
		{CmdGainMode, 1, "0300000001"},
		{CmdGain, 496, "04000001f0"},                          // 49.6 dB, top of the R820T table
		{CmdFreqCorrection, uint32(0xfffffffd), "05fffffffd"}, // -3 ppm
		{CmdBiasTee, 1, "0e00000001"},
		{CmdDirectSampling, 2, "0900000002"},
	}
	for _, c := range cmds {
		b := EncodeRTLCommand(c.code, c.param)
		if hex.EncodeToString(b[:]) != c.hex {
			t.Errorf("command %#x %d = %x, want %s", c.code, c.param, b, c.hex)
		}
	}
	// The greeting our server sends, read off the wire.
	ln, _ := net.Listen("tcp", "127.0.0.1:0")
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	go ServeRTLTCP(ctx, ln, cu8Source(make([]byte, 1<<16)), ServeOptions{})
	conn, err := net.Dial("tcp", ln.Addr().String())
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	g := make([]byte, 12)
	io.ReadFull(conn, g)
	if hex.EncodeToString(g) != "52544c30000000050000001d" {
		t.Errorf("greeting %x", g)
	}
}

func cu8Source(b []byte) Source {
	s, _ := NewRawSource(bytes.NewReader(b), int64(len(b)), RawParams{SampleRate: 2.4e6, Format: "cu8"}, "mem")
	return s
}

// Client against the replay server: the greeting is parsed, the
// configuration arrives as the right commands, and the byte stream arrives
// unchanged and whole.
func TestRTLTCPClientServer(t *testing.T) {
	data := make([]byte, 300000)
	for i := range data {
		data[i] = byte(i*31 + i/7)
	}
	ln, _ := net.Listen("tcp", "127.0.0.1:0")
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var mu sync.Mutex
	var got []RTLCommand
	done := make(chan error, 1)
	go func() {
		done <- ServeRTLTCP(ctx, ln, cu8Source(data), ServeOptions{OnCommand: func(c RTLCommand) {
			mu.Lock()
			got = append(got, c)
			mu.Unlock()
		}})
	}()
	c, err := DialRTLTCP(ctx, ln.Addr().String(), RTLConfig{SampleRate: 2.4e6, CenterHz: 145.5e6, GainDB: 19.7, PPM: -3, BiasTee: true, EOFOnClose: true})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	if c.TunerType() != TunerR820T || c.GainCount() != 29 || c.Info().Samples != -1 || c.Info().Start.IsZero() {
		t.Errorf("tuner %d gains %d info %+v", c.TunerType(), c.GainCount(), c.Info())
	}
	var recv []byte
	buf := make([]byte, 7777)
	for {
		n, err := c.ReadCU8(buf)
		if n%2 != 0 {
			t.Fatalf("odd read %d", n)
		}
		recv = append(recv, buf[:n]...)
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	if !bytes.Equal(recv, data) {
		t.Fatalf("received %d bytes, differ from the %d sent", len(recv), len(data))
	}
	c.Close() // the server waits for the client to hang up
	if err := <-done; err != nil {
		t.Fatalf("server: %v", err)
	}
	mu.Lock()
	defer mu.Unlock()
	want := []RTLCommand{{CmdSampleRate, 2400000}, {CmdCenterFreq, 145500000}, {CmdGainMode, 1}, {CmdGain, 197}, {CmdFreqCorrection, 0xfffffffd}, {CmdBiasTee, 1}}
	if len(got) != len(want) {
		t.Fatalf("commands %v, want %v", got, want)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("command %d = %+v, want %+v", i, got[i], want[i])
		}
	}
}

// Paced replay runs at the recording's rate (±30 % on a busy machine), and
// a complex source is converted to cu8.
func TestRTLTCPPaced(t *testing.T) {
	in := make([]complex64, 24000) // 0.1 s at 240 kHz
	for i := range in {
		in[i] = complex(1, -1)
	}
	src := &sliceSource{data: in, info: Info{SampleRate: 240000, Format: "cf32_le", Samples: int64(len(in))}}
	ln, _ := net.Listen("tcp", "127.0.0.1:0")
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	go ServeRTLTCP(ctx, ln, src, ServeOptions{Paced: true})
	t0 := time.Now()
	c, err := DialRTLTCP(ctx, ln.Addr().String(), RTLConfig{SampleRate: 240000, EOFOnClose: true})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	iq := make([]complex64, 4096)
	total := 0
	for {
		n, err := c.Read(iq)
		for _, v := range iq[:n] {
			if v != complex(1, -1) {
				t.Fatalf("sample %v, want 1-1i", v)
			}
		}
		total += n
		if err != nil {
			break
		}
	}
	el := time.Since(t0)
	if total != len(in) || el < 70*time.Millisecond || el > 2*time.Second {
		t.Errorf("%d samples in %v, want %d in about 100 ms", total, el, len(in))
	}
}

type sliceSource struct {
	data []complex64
	info Info
}

func (s *sliceSource) Info() Info   { return s.info }
func (s *sliceSource) Close() error { return nil }
func (s *sliceSource) Read(dst []complex64) (int, error) {
	if len(s.data) == 0 {
		return 0, io.EOF
	}
	n := copy(dst, s.data)
	s.data = s.data[n:]
	return n, nil
}

// A server that goes quiet gives the no-samples error after the timeout; a
// server that drops the connection mid-stream gives a clear error, not a
// hang or io.EOF.
func TestRTLTCPFailures(t *testing.T) {
	greeting, _ := hex.DecodeString("52544c30000000050000001d")
	cases := []struct {
		name   string
		serve  func(net.Conn)
		errHas string
	}{
		{"silent", func(c net.Conn) { c.Write(greeting); c.Write(make([]byte, 100)); time.Sleep(2 * time.Second) },
			"no samples from rtl_tcp at"},
		{"pulled", func(c net.Conn) {
			c.Write(greeting)
			c.Write(make([]byte, 5000))
			time.Sleep(100 * time.Millisecond)
			c.Close()
		},
			"closed the connection after 2500 samples"},
		{"not rtl_tcp", func(c net.Conn) { c.Write([]byte("HTTP/1.1 400 Bad\r\n")) }, "not an rtl_tcp server"},
		{"no greeting", func(c net.Conn) { c.Close() }, "before its greeting"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			ln, _ := net.Listen("tcp", "127.0.0.1:0")
			defer ln.Close()
			go func() {
				c, err := ln.Accept()
				if err != nil {
					return
				}
				defer c.Close()
				go io.Copy(io.Discard, c)
				tc.serve(c)
			}()
			c, err := DialRTLTCP(context.Background(), ln.Addr().String(), RTLConfig{SampleRate: 2.4e6, NoDataTimeout: 300 * time.Millisecond})
			if err == nil {
				defer c.Close()
				buf := make([]byte, 1000)
				for err == nil {
					_, err = c.ReadCU8(buf)
				}
			}
			if err == nil || !strings.Contains(err.Error(), tc.errHas) {
				t.Fatalf("err = %v, want %q", err, tc.errHas)
			}
			if tc.name == "silent" && !strings.Contains(err.Error(), "for 300ms: is the receiver still connected?") {
				t.Errorf("timeout message %q", err)
			}
		})
	}
}

// Cancelling the context stops a blocked read promptly.
func TestRTLTCPCancel(t *testing.T) {
	greeting, _ := hex.DecodeString("52544c30000000050000001d")
	ln, _ := net.Listen("tcp", "127.0.0.1:0")
	defer ln.Close()
	go func() {
		c, _ := ln.Accept()
		c.Write(greeting)
		c.Write([]byte{1, 2})
		time.Sleep(3 * time.Second)
		c.Close()
	}()
	ctx, cancel := context.WithCancel(context.Background())
	c, err := DialRTLTCP(ctx, ln.Addr().String(), RTLConfig{SampleRate: 2.4e6})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	time.AfterFunc(100*time.Millisecond, cancel)
	t0 := time.Now()
	buf := make([]byte, 100)
	c.ReadCU8(buf)
	_, err = c.ReadCU8(buf)
	if err == nil || !strings.Contains(err.Error(), "context canceled") || time.Since(t0) > time.Second {
		t.Fatalf("err = %v after %v", err, time.Since(t0))
	}
}

func TestRTLConfigCheck(t *testing.T) {
	// Valid rate ranges from librtlsdr.c rtlsdr_set_sample_rate (osmocom/rtl-sdr @ae0dd6d).
	for _, r := range []float64{225001, 300000, 900001, 2.4e6, 3.2e6} {
		if err := (RTLConfig{SampleRate: r}).check(); err != nil {
			t.Errorf("%v Hz rejected: %v", r, err)
		}
	}
	for _, r := range []float64{0, 225000, 500000, 900000, 3200001} {
		if err := (RTLConfig{SampleRate: r}).check(); err == nil {
			t.Errorf("%v Hz accepted", r)
		}
	}
	if err := (RTLConfig{SampleRate: 2.4e6, CenterHz: 5e9}).check(); err == nil {
		t.Error("5 GHz accepted (protocol carries uint32 Hz)")
	}
}

// TestStreamOrigin: against the paced replay server, whose sample n is
// handed over when it is due (t0 + (n+1)/rate after the block holding it is
// complete), the origin estimate lands within a few milliseconds of the
// time the client connected and the first block became due, not a block
// later as the first-arrival stamp does.
func TestStreamOrigin(t *testing.T) {
	const rate = 240000.0
	in := make([]complex64, int(0.5*rate))
	src := &sliceSource{data: in, info: Info{SampleRate: rate, Format: "cf32_le", Samples: int64(len(in))}}
	ln, _ := net.Listen("tcp", "127.0.0.1:0")
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	go ServeRTLTCP(ctx, ln, src, ServeOptions{Paced: true})
	t0 := time.Now()
	c, err := DialRTLTCP(ctx, ln.Addr().String(), RTLConfig{SampleRate: rate, EOFOnClose: true})
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	buf := make([]complex64, 8192)
	for {
		if _, err := c.Read(buf); err != nil {
			break
		}
	}
	o := c.StreamOrigin()
	if o.IsZero() {
		t.Fatal("no origin")
	}
	// The server starts its clock when the client connects, shortly after t0.
	if d := o.Sub(t0); d < -2*time.Millisecond || d > 30*time.Millisecond {
		t.Errorf("origin %v after the dial began, want 0–30 ms", d)
	}
	if !o.Before(c.Info().Start) {
		t.Errorf("origin %v is not before the first-arrival stamp %v", o, c.Info().Start)
	}
	t.Logf("origin %v after dial; first-arrival stamp %v after dial", o.Sub(t0), c.Info().Start.Sub(t0))
}
