//go:build linux

package main

import (
	"bufio"
	"context"
	"encoding/binary"
	"io"
	"math/rand"
	"net"
	"nullseek/internal/testtool"
	"testing"
	"time"
)

// fakeServer starts a misbehaving server of the given role ("rtl",
// "rot", "nmea") and kind on loopback for the life of the test and
// returns its HOST:PORT. Kinds:
//
//	any role  refused  nothing listens (a port that was just closed)
//	          close    accepts and hangs up at once
//	          silent   accepts, reads, never answers
//	          garbage  answers with text of another protocol
//	rtl       short    6 of the 12 greeting bytes, then hangs up
//	          stall    a greeting and 0.3 s of samples, then nothing
//	          drop     a greeting and 0.3 s of samples, then hangs up
//	          noise    a greeting, then noise at 250 kS/s for ever
//	rot       rprt     answers every command with RPRT -1 (invalid parameter)
//	nmea      binary   random bytes, no line ends
//
// The rtl_tcp greeting is "RTL0", the tuner type and the gain count, each
// a big-endian uint32 (librtlsdr src/rtl_tcp.c, struct dongle_info_t);
// commands are 5 bytes, samples are interleaved cu8 I/Q. rotctld's default
// protocol answers get_pos ("p") with two value lines and set commands with
// "RPRT n" (Hamlib rotctld(1), 4.5).
func fakeServer(t *testing.T, role, kind string) string {
	t.Helper()
	if kind == "refused" {
		ln, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		addr := ln.Addr().String()
		ln.Close()
		return addr
	}
	serve := fakeScript(role, kind)
	if serve == nil {
		t.Fatalf("no fake %s server of kind %q", role, kind)
	}
	return testtool.ServeTCP(t, serve)
}

// drain reads and discards what the client sends.
func drain(c net.Conn) { go io.Copy(io.Discard, c) }

func rtlGreeting() []byte {
	g := []byte("RTL0")
	g = binary.BigEndian.AppendUint32(g, 5)  // R820T (rtl_tcp.c's tuner enum)
	g = binary.BigEndian.AppendUint32(g, 29) // its gain steps
	return g
}

// sendNoise writes cu8 noise at 250 kS/s in 20 ms blocks for d (0: until
// the connection or ctx ends).
func sendNoise(ctx context.Context, c net.Conn, d time.Duration) {
	rng := rand.New(rand.NewSource(1))
	block := make([]byte, 2*5000)
	t0 := time.Now()
	tick := time.NewTicker(20 * time.Millisecond)
	defer tick.Stop()
	for d == 0 || time.Since(t0) < d {
		for i := range block {
			block[i] = byte(127 + rng.Intn(3))
		}
		if _, err := c.Write(block); err != nil {
			return
		}
		select {
		case <-ctx.Done():
			return
		case <-tick.C:
		}
	}
}

func fakeScript(role, kind string) func(context.Context, net.Conn) {
	hold := func(ctx context.Context, c net.Conn) { drain(c); <-ctx.Done() }
	switch kind {
	case "close":
		return func(context.Context, net.Conn) {}
	case "silent":
		return hold
	}
	switch role + "/" + kind {
	case "rtl/garbage":
		return func(ctx context.Context, c net.Conn) {
			drain(c)
			io.WriteString(c, "HTTP/1.1 400 Bad Request\r\nContent-Length: 0\r\n\r\n")
			<-ctx.Done()
		}
	case "rtl/short":
		return func(ctx context.Context, c net.Conn) {
			drain(c)
			c.Write(rtlGreeting()[:6])
		}
	case "rtl/stall", "rtl/drop", "rtl/noise":
		return func(ctx context.Context, c net.Conn) {
			drain(c)
			if _, err := c.Write(rtlGreeting()); err != nil {
				return
			}
			d := 300 * time.Millisecond
			if kind == "noise" {
				d = 0
			}
			sendNoise(ctx, c, d)
			if kind == "stall" {
				<-ctx.Done()
			}
		}
	case "rot/garbage", "rot/rprt":
		reply := "hello from a web server\n"
		if kind == "rprt" {
			reply = "RPRT -1\n"
		}
		return func(ctx context.Context, c net.Conn) {
			sc := bufio.NewScanner(c)
			for sc.Scan() {
				if _, err := io.WriteString(c, reply); err != nil {
					return
				}
			}
		}
	case "nmea/garbage":
		return func(ctx context.Context, c net.Conn) {
			drain(c)
			for ctx.Err() == nil {
				if _, err := io.WriteString(c, "$GPXXX,garbage,,*ZZ\r\nhello\r\n$HCHDT,abc,T*00\r\n"); err != nil {
					return
				}
				time.Sleep(50 * time.Millisecond)
			}
		}
	case "nmea/binary":
		return func(ctx context.Context, c net.Conn) {
			drain(c)
			rng := rand.New(rand.NewSource(2))
			b := make([]byte, 4096)
			for ctx.Err() == nil {
				for i := range b {
					b[i] = byte(rng.Intn(256))
					if b[i] == '\n' || b[i] == '\r' {
						b[i] = 'x'
					}
				}
				if _, err := c.Write(b); err != nil {
					return
				}
				time.Sleep(20 * time.Millisecond)
			}
		}
	}
	return nil
}
