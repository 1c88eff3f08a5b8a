package testtool

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"net"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"sync"
	"testing"
)

// ChunkReader hands out b in reads of at most n bytes (n ≥ 1), as a
// serial line or a socket delivers a stream: the shape a fuzz test of a
// line reader varies.
func ChunkReader(b []byte, n int) io.Reader { return &chunkReader{b: b, n: max(n, 1)} }

type chunkReader struct {
	b []byte
	n int
}

func (c *chunkReader) Read(p []byte) (int, error) {
	if len(c.b) == 0 {
		return 0, io.EOF
	}
	k := min(len(p), c.n, len(c.b))
	copy(p, c.b[:k])
	c.b = c.b[k:]
	return k, nil
}

// SyncBuffer is a bytes.Buffer that a command or a logger on other
// goroutines may write while the test reads it.
type SyncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *SyncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

// String returns what was written so far.
func (s *SyncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// ParseFloats reads the white-space separated numbers of a reference
// tool's output line; anything else fails t.
func ParseFloats(t testing.TB, s string) []float64 {
	t.Helper()
	var r []float64
	for _, f := range strings.Fields(s) {
		v, err := strconv.ParseFloat(f, 64)
		if err != nil {
			t.Fatalf("parse %q: %v", s, err)
		}
		r = append(r, v)
	}
	return r
}

// Run runs the reference program prog with args, feeding it stdin, and
// returns its standard output; a failure fails t with the program's
// standard error.
func Run(t testing.TB, stdin, prog string, args ...string) string {
	t.Helper()
	cmd := exec.Command(prog, args...)
	cmd.Stdin = strings.NewReader(stdin)
	var out, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("%s %v: %v (%s)", prog, args, err, stderr.String())
	}
	return out.String()
}

// ServeTCP listens on a free loopback port and runs handle for every
// client in its own goroutine; the connection is closed when handle
// returns or the test ends (ctx is cancelled then too). It returns the
// "host:port" address.
func ServeTCP(t testing.TB, handle func(ctx context.Context, c net.Conn)) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	t.Cleanup(func() { cancel(); ln.Close() })
	go func() {
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			go func() {
				defer c.Close()
				stop := context.AfterFunc(ctx, func() { c.Close() })
				defer stop()
				handle(ctx, c)
			}()
		}
	}()
	return ln.Addr().String()
}

// ReadJSON decodes the JSON file at path into a T, failing the test when
// it cannot be read or decoded.
func ReadJSON[T any](t testing.TB, path string) T {
	t.Helper()
	var v T
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(raw, &v); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return v
}
