package sdr

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"math"
)

// ReplayRequest is a replay as the command line asks for it: the
// recording, where to serve it and how fast. DefaultReplayRequest gives
// the flag defaults; Replay runs it.
type ReplayRequest struct {
	// Path is the recording (SigMF, .sigmf archive, WAV IQ or raw IQ
	// described by Raw).
	Path string
	Raw  RawFlags
	// Listen is the HOST:PORT to serve on (--listen); only loopback
	// unless AllowRemote (--allow-remote; ListenReplay).
	Listen      string
	AllowRemote bool
	// Speed and Loop are ReplayOptions.Speed and .Loop (--speed, --loop).
	Speed float64
	Loop  bool
	// Logger receives the announcement, connection events, refused
	// commands and the end (Info level); nil = slog.Default().
	Logger *slog.Logger
}

// DefaultReplayRequest is the replay command's defaults: loopback on
// rtl_tcp's port, real time, once through.
func DefaultReplayRequest() ReplayRequest {
	return ReplayRequest{Listen: DefaultReplayAddr, Speed: 1}
}

// Validate checks what can be checked before the recording is opened,
// with one error naming the flag.
func (r *ReplayRequest) Validate() error {
	if math.IsNaN(r.Speed) || math.IsInf(r.Speed, 0) || r.Speed < 0 {
		return fmt.Errorf("--speed %v: give 0 (as fast as the client reads) or a positive factor (1 = real time)", r.Speed)
	}
	_, err := r.Raw.Params()
	return err
}

// Replay validates r, opens the recording (a bad file is one error and
// no server), listens and serves it (ServeReplay) until it ends, ctx is
// cancelled (nil, with a "replay stopped" line) or it fails.
func Replay(ctx context.Context, r ReplayRequest) error {
	if err := r.Validate(); err != nil {
		return err
	}
	raw, err := r.Raw.Params()
	if err != nil {
		return err
	}
	log := r.Logger
	if log == nil {
		log = slog.Default()
	}
	open := func() (Source, error) { return Open(r.Path, raw) }
	src, err := open()
	if err != nil {
		return err
	}
	info := src.Info()
	src.Close()
	ln, err := ListenReplay(r.Listen, r.AllowRemote)
	if err != nil {
		if errors.Is(err, ErrNotLoopback) {
			return fmt.Errorf("--listen: %w with --allow-remote", err)
		}
		return fmt.Errorf("--listen: %w", err)
	}
	pace := "as fast as the client reads"
	if r.Speed > 0 {
		pace = fmt.Sprintf("%g× real time", r.Speed)
	}
	if r.Loop {
		pace += ", looping"
	}
	centre := "unknown centre"
	if info.CenterHz > 0 {
		centre = fmt.Sprintf("centre %.0f Hz", info.CenterHz)
	}
	log.Info(fmt.Sprintf("replaying %s (%.0f S/s %s, %s) on rtl_tcp %s, %s", r.Path, info.SampleRate, info.Format, centre, ln.Addr(), pace))
	err = ServeReplay(ctx, ln, open, ReplayOptions{Speed: r.Speed, Loop: r.Loop, Logger: log})
	if errors.Is(err, context.Canceled) {
		log.Info("replay stopped")
		return nil
	}
	return err
}
