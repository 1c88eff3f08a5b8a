package heading

import (
	"context"
	"errors"
	"io"
	"net"
	"os"
	"strings"
	"syscall"
	"testing"
	"time"

	"nullseek/internal/testtool"
)

// A rotctld that answers only the first of get_pos's two lines (Hamlib
// rotctld(1) 4.5.4: `p` answers azimuth and elevation, one per line) and
// then freezes is reported as a timeout naming the command and what came,
// and matches os.ErrDeadlineExceeded; a reply line without end is bounded.
func TestRotatorHalfAnswerAndEndlessLine(t *testing.T) {
	serve := func(reply func(c net.Conn)) string {
		l, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { l.Close() })
		go func() {
			c, err := l.Accept()
			if err != nil {
				return
			}
			defer c.Close()
			buf := make([]byte, 16)
			c.Read(buf) // the "p\n"
			reply(c)
			time.Sleep(2 * time.Second)
		}()
		return l.Addr().String()
	}
	addr := serve(func(c net.Conn) { io.WriteString(c, "12.500000\n") })
	_, err := DialRotator(context.Background(), addr, RotatorOptions{Timeout: 300 * time.Millisecond})
	want := "rotctld at " + addr + " did not answer `p` (get_pos) within 0.3 s (1 of its 2 reply lines came)"
	if err == nil || !strings.Contains(err.Error(), want) || !errors.Is(err, os.ErrDeadlineExceeded) {
		t.Errorf("half answer: %v, want %q", err, want)
	}
	addr = serve(func(c net.Conn) {
		for i := 0; i < 100; i++ {
			c.Write([]byte(strings.Repeat("9", 1024)))
		}
	})
	_, err = DialRotator(context.Background(), addr, RotatorOptions{Timeout: 300 * time.Millisecond})
	if err == nil || !strings.Contains(err.Error(), "longer than 512 bytes") {
		t.Errorf("endless reply line: %v", err)
	}
}

// The real Hamlib rotctld (4.5.4, dummy rotator), frozen with SIGSTOP,
// surfaces as "rotctld at ADDR did not answer `p` (get_pos) within N s",
// both for a single poll and in the middle of a sweep; never as a raw
// "i/o timeout".
func TestRotctldFrozen(t *testing.T) {
	t.Parallel()
	addr, proc := testtool.Rotctld(t)
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	opts := RotatorOptions{Timeout: 500 * time.Millisecond, Logger: discardLogger}
	rot, err := DialRotator(ctx, addr, opts)
	if err != nil {
		t.Fatal(err)
	}
	defer rot.Close()
	if err := proc.Signal(syscall.SIGSTOP); err != nil {
		t.Fatal(err)
	}
	defer proc.Signal(syscall.SIGCONT)
	_, _, err = rot.Position()
	want := "rotctld at " + addr + " did not answer `p` (get_pos) within 0.5 s"
	if err == nil || !strings.Contains(err.Error(), want) || strings.Contains(err.Error(), "i/o timeout") {
		t.Errorf("frozen poll: %v, want %q", err, want)
	}
	proc.Signal(syscall.SIGCONT)

	// Mid-sweep: the dummy rotator turns at 6°/s; freeze it after 1 s.
	rot2, err := DialRotator(ctx, addr, opts)
	if err != nil {
		t.Fatal(err)
	}
	defer rot2.Close()
	if _, err := rot2.ContinuousSweep(ctx, 0, 0); err != nil { // start from 0°
		t.Fatal(err)
	}
	go func() {
		time.Sleep(time.Second)
		proc.Signal(syscall.SIGSTOP)
	}()
	_, err = rot2.ContinuousSweep(ctx, 0, 90)
	if err == nil || !strings.Contains(err.Error(), "rotator sweep stopped at ") || !strings.Contains(err.Error(), "did not answer `p` (get_pos) within 0.5 s") ||
		strings.Contains(err.Error(), "i/o timeout") || !errors.Is(err, os.ErrDeadlineExceeded) {
		t.Errorf("frozen sweep: %v", err)
	}
	t.Logf("frozen sweep: %v", err)
}
