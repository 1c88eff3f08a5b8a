package capture

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/signal"
	"sync"
	"syscall"

	"nullseek/sdr"
)

// Signal is the cause NotifySignals cancels its context with.
type Signal struct {
	// Sig is os.Interrupt (SIGINT, Ctrl-C) or syscall.SIGTERM.
	Sig os.Signal
}

func (s *Signal) Error() string { return signalName(s.Sig) }

func signalName(sig os.Signal) string {
	switch sig {
	case os.Interrupt:
		return "SIGINT (Ctrl-C)"
	case syscall.SIGTERM:
		return "SIGTERM"
	}
	return sig.String()
}

// NotifySignals returns a copy of parent that is cancelled, with a *Signal
// as its cause (context.Cause), when the process gets SIGINT or SIGTERM.
// Later signals are ignored until stop is called, so that the capture's
// clean-up (stopping the rotator, writing what was kept, removing
// temporaries; each step bounded by a timeout) is not cut short. stop
// restores the default behaviour and releases the context.
func NotifySignals(parent context.Context) (ctx context.Context, stop func()) {
	ctx, cancel := context.WithCancelCause(parent)
	ch := make(chan os.Signal, 1)
	signal.Notify(ch, os.Interrupt, syscall.SIGTERM)
	done := make(chan struct{})
	go func() {
		select {
		case sig := <-ch:
			cancel(&Signal{Sig: sig})
		case <-done:
		}
	}()
	var once sync.Once
	return ctx, func() {
		once.Do(func() {
			signal.Stop(ch)
			close(done)
			cancel(context.Canceled)
		})
	}
}

// Interrupted is the error of a capture (or of the analysis after it) that
// was cancelled, by a signal or by the caller. Run returns it with the
// Result holding what was kept.
type Interrupted struct {
	// Cause is the context's cause: a *Signal for a signal.
	Cause error
	// AfterS is how many seconds of samples were captured.
	AfterS float64
	// During is what was cut short: "connecting", "the capture" or "the
	// analysis".
	During string

	detail string
}

func (e *Interrupted) Error() string {
	by := "cancelled"
	var sig *Signal
	if errors.As(e.Cause, &sig) {
		by = "interrupted by " + sig.Error()
	} else if e.Cause != nil && !errors.Is(e.Cause, context.Canceled) {
		by = "stopped (" + e.Cause.Error() + ")"
	}
	if e.During == "connecting" {
		return fmt.Sprintf("%s while connecting; %s", by, e.detail)
	}
	return fmt.Sprintf("%s %.1f s into %s; %s", by, e.AfterS, e.During, e.detail)
}

func (e *Interrupted) Unwrap() error { return e.Cause }

// ExitCode is the exit status for the command line: 128 plus the signal's
// number (130 for SIGINT, 143 for SIGTERM on Linux), as POSIX shells report
// a command killed by a signal (Bash manual 3.7.5 "Exit Status"; POSIX.1-2017
// XCU 2.8.2 asks for a status above 128); 1 without a signal.
func (e *Interrupted) ExitCode() int {
	var sig *Signal
	if errors.As(e.Cause, &sig) {
		if n, ok := sig.Sig.(syscall.Signal); ok {
			return 128 + int(n)
		}
	}
	return 1
}

// InterruptedAnalysis is the error for an analysis of r that cause (the
// context's cause) cut short.
func (r *Result) InterruptedAnalysis(cause error) error {
	return &Interrupted{Cause: cause, AfterS: r.Seconds(), During: "the analysis", detail: r.ending()}
}

// ReceiverFault is the error of a capture whose receiver failed mid-way:
// the server went away, the stream was cut or stalled. Run returns it with
// the Result holding what was captured up to the last whole block.
type ReceiverFault struct {
	// Err is the receiver's error; it names the protocol and the address.
	Err error
	// AfterS is how many seconds of samples were captured.
	AfterS float64
	// WantS is the capture's planned length, 0 when it was to end with the
	// sweep.
	WantS float64

	detail string
}

// finish fills in what the session knows at the end.
func (e *ReceiverFault) finish(info sdr.Info, wantS float64, detail string) *ReceiverFault {
	e.AfterS, e.WantS, e.detail = float64(info.Samples)/info.SampleRate, wantS, detail
	return e
}

func (e *ReceiverFault) Error() string {
	want := "the sweep's end"
	if e.WantS > 0 {
		want = fmt.Sprintf("%.1f s", e.WantS)
	}
	return fmt.Sprintf("receiver fault %.1f s into the capture (samples were expected until %s): %v; %s", e.AfterS, want, e.Err, e.detail)
}

func (e *ReceiverFault) Unwrap() error { return e.Err }
