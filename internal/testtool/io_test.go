package testtool

import (
	"context"
	"io"
	"net"
	"strings"
	"sync"
	"testing"
	"testing/iotest"
	"time"
)

// ChunkReader is a well-behaved io.Reader by the standard library's own
// checker (testing/iotest.TestReader) and never hands out more than n
// bytes at once.
func TestChunkReader(t *testing.T) {
	b := []byte("$GPHDT,274.07,T*03\r\n$SDHDG,234.6,,,1.3,E*34\r\n")
	for _, n := range []int{1, 3, 7, 1000} {
		if err := iotest.TestReader(ChunkReader(b, n), b); err != nil {
			t.Errorf("n=%d: %v", n, err)
		}
		r, p := ChunkReader(b, n), make([]byte, 64)
		if k, _ := r.Read(p); k != min(n, len(b)) {
			t.Errorf("n=%d: first read %d bytes", n, k)
		}
	}
}

// SyncBuffer keeps every write of concurrent writers, whole.
func TestSyncBuffer(t *testing.T) {
	var s SyncBuffer
	var wg sync.WaitGroup
	for range 8 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for range 100 {
				s.Write([]byte("line\n"))
			}
		}()
	}
	wg.Wait()
	if got := s.String(); got != strings.Repeat("line\n", 800) {
		t.Errorf("%d bytes, want %d", len(got), 800*5)
	}
}

// ParseFloats reads a GeodSolve-style output line.
func TestParseFloats(t *testing.T) {
	got := ParseFloats(t, " 45.123456789 -7.5\t1e3\n")
	if len(got) != 3 || got[0] != 45.123456789 || got[1] != -7.5 || got[2] != 1000 {
		t.Errorf("ParseFloats = %v", got)
	}
}

func TestServeTCP(t *testing.T) {
	addr := ServeTCP(t, func(ctx context.Context, c net.Conn) { io.WriteString(c, "hello\n") })
	for i := 0; i < 2; i++ { // every client is served, and closed after
		c, err := net.Dial("tcp", addr)
		if err != nil {
			t.Fatal(err)
		}
		c.SetDeadline(time.Now().Add(5 * time.Second))
		b, err := io.ReadAll(c)
		c.Close()
		if err != nil || string(b) != "hello\n" {
			t.Errorf("client %d read %q, %v", i, b, err)
		}
	}
}
