package testtool

import (
	"bytes"
	"io"
	"sync"
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
