//go:build unix

package capture

import (
	"context"
	"errors"
	"syscall"
	"testing"
	"time"
)

// TestNotifySignals: SIGTERM to this process cancels the context with a
// *Signal cause, and the interruption's exit status is 128 + 15 (Linux
// signal(7) numbers SIGTERM 15; Bash manual 3.7.5).
func TestNotifySignals(t *testing.T) {
	ctx, stop := NotifySignals(context.Background())
	defer stop()
	if err := syscall.Kill(syscall.Getpid(), syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	select {
	case <-ctx.Done():
	case <-time.After(5 * time.Second):
		t.Fatal("SIGTERM did not cancel the context")
	}
	var sig *Signal
	if !errors.As(context.Cause(ctx), &sig) || sig.Sig != syscall.SIGTERM {
		t.Fatalf("cause %v, want SIGTERM", context.Cause(ctx))
	}
	e := &Interrupted{Cause: context.Cause(ctx), AfterS: 1.5, During: "the capture", detail: "nothing was recorded"}
	if e.ExitCode() != 143 || e.Error() != "interrupted by SIGTERM 1.5 s into the capture; nothing was recorded" {
		t.Errorf("exit %d, %q", e.ExitCode(), e.Error())
	}
	if (&Interrupted{Cause: context.Canceled}).ExitCode() != 1 {
		t.Error("a cancellation without a signal should exit 1")
	}
}
