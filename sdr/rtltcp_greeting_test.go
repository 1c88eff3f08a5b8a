package sdr

import (
	"context"
	"io"
	"net"
	"strings"
	"testing"
	"time"
)

// A greeting that is short or has the wrong magic says what the rtl_tcp
// protocol expects (osmocom rtl-sdr src/rtl_tcp.c: dongle_info_t, 12 bytes,
// "RTL0" then tuner type and gain count as big-endian uint32, sent with
// htonl) and what came, in hex. The good greeting 52544c30 00000005
// 0000001d is /usr/bin/python3 struct.pack('>4sII', b'RTL0', 5, 29).
func TestRTLTCPGreetingErrors(t *testing.T) {
	const layout = `12-byte greeting: "RTL0", then the tuner type and the tuner's gain count as big-endian uint32`
	cases := []struct {
		name  string
		serve func(net.Conn)
		has   []string
	}{
		{"6 bytes then close", func(c net.Conn) { c.Write([]byte("RTL0\x00\x00")) },
			[]string{"sent a 6-byte greeting (52 54 4c 30 00 00), then closed the connection", layout, "src/rtl_tcp.c"}},
		{"6 bytes then silence", func(c net.Conn) { c.Write([]byte("RTL0\x00\x00")); time.Sleep(time.Second) },
			[]string{"sent a 6-byte greeting (52 54 4c 30 00 00), then nothing for 300ms", layout}},
		{"wrong magic", func(c net.Conn) { c.Write([]byte("RTL1\x00\x00\x00\x05\x00\x00\x00\x1d")) },
			[]string{"not an rtl_tcp server: its greeting starts 52 54 4c 31 (\"RTL1\"), want \"RTL0\"", layout}},
		{"wrong magic, short", func(c net.Conn) { c.Write([]byte("SSH-2")) },
			[]string{"not an rtl_tcp server: its greeting starts 53 53 48 2d (\"SSH-\")"}},
		{"3 bytes then close", func(c net.Conn) { c.Write([]byte{0xff, 0, 1}) },
			[]string{"sent a 3-byte greeting (ff 00 01), then closed the connection"}},
		{"nothing", func(c net.Conn) { time.Sleep(time.Second) },
			[]string{"sent no greeting within 300ms", layout}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			ln, err := net.Listen("tcp", "127.0.0.1:0")
			if err != nil {
				t.Fatal(err)
			}
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
				c.Close()
				t.Fatal("dial succeeded")
			}
			msg := err.Error()
			if strings.Contains(msg, "\n") || strings.Contains(msg, "still connected") {
				t.Errorf("message %q", msg)
			}
			for _, h := range tc.has {
				if !strings.Contains(msg, h) {
					t.Errorf("error %q lacks %q", msg, h)
				}
			}
		})
	}
	// parseGreeting on the good greeting gives the tuner (5 = R820T in
	// rtl-sdr.h enum rtlsdr_tuner) and 29 gains.
	if tu, g, err := parseGreeting([]byte("RTL0\x00\x00\x00\x05\x00\x00\x00\x1d")); err != nil || tu != TunerR820T || g != 29 {
		t.Errorf("good greeting: %d %d %v", tu, g, err)
	}
}
