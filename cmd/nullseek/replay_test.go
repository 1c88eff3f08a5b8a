package main

import (
	"bytes"
	"context"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"nullseek/internal/testtool"
	"nullseek/sdr"
)

// runReplayCmd runs the replay command in-process with args.
func runReplayCmd(ctx context.Context, errOut io.Writer, args ...string) error {
	cmd := newReplayCmd()
	cmd.SetArgs(args)
	cmd.SetErr(errOut)
	cmd.SetOut(errOut)
	cmd.SilenceUsage, cmd.SilenceErrors = true, true
	return cmd.ExecuteContext(ctx)
}

// A raw cu8 file written by sox (2-channel unsigned 8-bit, sox(1)), served
// by the command on a free loopback port as fast as the client reads,
// reaches an rtl_tcp client byte for byte, and the command ends with the
// recording.
func TestReplayCommandRoundTrip(t *testing.T) {
	sox := testtool.Need(t, "sox")
	p := filepath.Join(t.TempDir(), "rec.cu8")
	if out, err := exec.Command(sox, "-D", "-n", "-r", "250000", "-c", "2", "-b", "8", "-e", "unsigned-integer", "-t", "raw", p,
		"synth", "0.4", "sine", "2000", "sine", "2000", "0", "25").CombinedOutput(); err != nil {
		t.Fatalf("sox: %v\n%s", err, out)
	}
	want, _ := os.ReadFile(p)
	var errOut testtool.SyncBuffer
	done := make(chan error, 1)
	go func() {
		done <- runReplayCmd(context.Background(), &errOut, p, "--rate", "250k", "--format", "cu8", "--center", "433.92M", "--speed", "0", "--listen", "127.0.0.1:0")
	}()
	re := regexp.MustCompile(`on rtl_tcp (127\.0\.0\.1:\d+)`)
	var addr string
	for deadline := time.Now().Add(5 * time.Second); addr == ""; time.Sleep(10 * time.Millisecond) {
		if m := re.FindStringSubmatch(errOut.String()); m != nil {
			addr = m[1]
		} else if time.Now().After(deadline) {
			t.Fatalf("no address announced: %q", errOut.String())
		}
	}
	c, err := sdr.DialRTLTCP(context.Background(), addr, sdr.RTLConfig{SampleRate: 250000, CenterHz: 433.92e6, EOFOnClose: true})
	if err != nil {
		t.Fatal(err)
	}
	var got []byte
	buf := make([]byte, 1<<15)
	for {
		n, err := c.ReadCU8(buf)
		got = append(got, buf[:n]...)
		if err != nil {
			if err != io.EOF {
				t.Fatal(err)
			}
			break
		}
	}
	c.Close()
	if err := <-done; err != nil {
		t.Fatalf("replay: %v", err)
	}
	if !bytes.Equal(got, want) {
		t.Fatalf("client got %d bytes, sox wrote %d (or they differ)", len(got), len(want))
	}
	if !strings.Contains(errOut.String(), "(250000 S/s cu8, centre 433920000 Hz)") {
		t.Errorf("announcement %q", errOut.String())
	}
}
