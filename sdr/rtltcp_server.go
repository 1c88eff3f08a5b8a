package sdr

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
	"sync"
	"sync/atomic"
	"time"
)

// RTLCommand is one command received by the replay server.
type RTLCommand struct {
	Code  byte
	Param uint32
}

// ServeOptions configures ServeRTLTCP.
type ServeOptions struct {
	// TunerType and GainCount fill the greeting (defaults: TunerR820T, 29,
	// which is what an R820T dongle reports; librtlsdr.c
	// rtlsdr_get_tuner_gains, osmocom/rtl-sdr @ae0dd6d: the R82xx table
	// has 29 steps).
	TunerType, GainCount uint32
	// Paced streams at the source's sample rate (real time); otherwise as
	// fast as the client reads. Same as Speed 1.
	Paced bool
	// Speed, when > 0, paces the stream at Speed times the source's rate
	// (2 = twice real time); 0 leaves it to Paced.
	Speed float64
	// OnCommand, if set, is called (from the connection's command reader
	// goroutine) for every command a client sends. The replay cannot
	// retune or resample, so commands change nothing else.
	OnCommand func(RTLCommand)
	// Check, if set, is called after OnCommand for every command; an error
	// refuses the command: the client's connection is closed (rtl_tcp has
	// no way to answer a command) and the error is logged as the reason.
	// The next client continues the stream.
	Check func(RTLCommand) error
	// Logger receives connection events; nil = slog.Default().
	Logger *slog.Logger
}

// ServeRTLTCP serves src over ln with the rtl_tcp protocol, for offline use
// and tests: one client at a time gets the 12-byte greeting and then the
// recording as cu8 bytes (raw bytes when src implements CU8Reader,
// otherwise complex samples converted with x·127.5+127.5, rounded and
// clamped). Commands are read and passed to opts.OnCommand. When a client
// disconnects, the next one continues where the stream stopped. At the end
// of the recording the connection is closed and ServeRTLTCP returns nil (or
// the source's error, if it failed); it
// also returns when ctx is cancelled (ctx.Err()) or ln fails. It closes ln
// on return, but not src.
func ServeRTLTCP(ctx context.Context, ln net.Listener, src Source, opts ServeOptions) error {
	if opts.TunerType == 0 && opts.GainCount == 0 {
		opts.TunerType, opts.GainCount = TunerR820T, 29
	}
	log := opts.Logger
	if log == nil {
		log = slog.Default()
	}
	stop := context.AfterFunc(ctx, func() { ln.Close() })
	defer stop()
	defer ln.Close()
	st := &replayState{src: src, opts: opts}
	if cr, ok := src.(CU8Reader); ok && src.Info().Format == "cu8" {
		st.cu8 = cr
	} else {
		st.iq = make([]complex64, 8192)
	}
	st.buf = make([]byte, 16384)
	for {
		conn, err := ln.Accept()
		if err != nil {
			if ctx.Err() != nil {
				return ctx.Err()
			}
			return fmt.Errorf("rtl_tcp replay: accept: %w", err)
		}
		log.Info("rtl_tcp replay: client connected", "remote", conn.RemoteAddr().String())
		done, err := st.serve(ctx, conn)
		conn.Close()
		if err != nil {
			log.Info("rtl_tcp replay: client gone", "remote", conn.RemoteAddr().String(), "reason", err.Error())
		}
		if done {
			if err != nil {
				return fmt.Errorf("rtl_tcp replay: %w", err)
			}
			return nil
		}
		if ctx.Err() != nil {
			return ctx.Err()
		}
	}
}

type replayState struct {
	src  Source
	opts ServeOptions
	cu8  CU8Reader
	iq   []complex64
	buf  []byte
	sent int64 // samples sent over all connections
}

// next fills st.buf with cu8 pairs from the source.
func (st *replayState) next() (int, error) {
	if st.cu8 != nil {
		return st.cu8.ReadCU8(st.buf)
	}
	n, err := st.src.Read(st.iq[:len(st.buf)/2])
	for i, v := range st.iq[:n] {
		st.buf[2*i] = toCU8(real(v))
		st.buf[2*i+1] = toCU8(imag(v))
	}
	return 2 * n, err
}

func toCU8(x float32) byte {
	v := math.Round(float64(x)*127.5 + 127.5)
	if !(v >= 0) { // also NaN
		return 0
	}
	return byte(min(v, 255))
}

// serve streams to one client; done reports the end of the recording.
func (st *replayState) serve(ctx context.Context, conn net.Conn) (done bool, err error) {
	stop := context.AfterFunc(ctx, func() { conn.Close() })
	defer stop()
	var g [rtlGreetingBytes]byte
	copy(g[:4], rtlMagic)
	binary.BigEndian.PutUint32(g[4:8], st.opts.TunerType)
	binary.BigEndian.PutUint32(g[8:12], st.opts.GainCount)
	if _, err := conn.Write(g[:]); err != nil {
		return false, err
	}
	var refused atomic.Pointer[error]
	defer func() {
		if r := refused.Load(); r != nil {
			done, err = false, *r
		}
	}()
	var wg sync.WaitGroup
	wg.Add(1)
	go func() { // command reader
		defer wg.Done()
		var b [rtlCommandBytes]byte
		for {
			if _, err := io.ReadFull(conn, b[:]); err != nil {
				return
			}
			cmd := RTLCommand{Code: b[0], Param: binary.BigEndian.Uint32(b[1:])}
			if st.opts.OnCommand != nil {
				st.opts.OnCommand(cmd)
			}
			if st.opts.Check != nil {
				if err := st.opts.Check(cmd); err != nil {
					refused.Store(&err)
					conn.Close()
					return
				}
			}
		}
	}()
	defer wg.Wait()
	defer conn.Close() // unblocks the command reader
	rate := st.src.Info().SampleRate
	speed := st.opts.Speed
	if speed <= 0 && st.opts.Paced {
		speed = 1
	}
	connStart, connSent0 := time.Now(), st.sent
	for {
		n, rerr := st.next()
		if n > 0 {
			if speed > 0 && rate > 0 {
				// A receiver hands over a block once its last sample is in.
				due := connStart.Add(time.Duration(float64(st.sent-connSent0+int64(n/2)) / (rate * speed) * float64(time.Second)))
				if d := time.Until(due); d > 0 {
					t := time.NewTimer(d)
					select {
					case <-ctx.Done():
						t.Stop()
						return false, ctx.Err()
					case <-t.C:
					}
				}
			}
			if _, err := conn.Write(st.buf[:n]); err != nil {
				// Samples in this block are lost to the departed client.
				st.sent += int64(n / 2)
				return false, err
			}
			st.sent += int64(n / 2)
		}
		if rerr != nil {
			// End of recording: half-close so the client reads EOF while
			// commands it is still sending are accepted, then give it a
			// moment to hang up.
			if cw, ok := conn.(interface{ CloseWrite() error }); ok {
				cw.CloseWrite()
				conn.SetReadDeadline(time.Now().Add(2 * time.Second))
				wg.Wait()
			}
			if errors.Is(rerr, io.EOF) {
				return true, nil
			}
			return true, rerr
		}
	}
}
