package sdr

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
)

// DefaultReplayAddr is where a replay listens unless told otherwise:
// loopback, on rtl_tcp's own default port 1234 (osmocom rtl-sdr
// src/rtl_tcp.c, -p), so a client set up for a local dongle connects
// unchanged.
const DefaultReplayAddr = "127.0.0.1:1234"

// ErrNotLoopback refuses a replay address outside the loopback range
// without ReplayOptions.AllowRemote.
var ErrNotLoopback = errors.New("is not a loopback address")

// ListenReplay listens on addr (host:port) for a replay. Unless
// allowRemote is set, every address the host stands for must be loopback
// (127.0.0.0/8 or ::1): an empty host or 0.0.0.0 (every interface) and
// any other address are refused with ErrNotLoopback, since rtl_tcp has no
// authentication and the recording would be open to the network.
func ListenReplay(addr string, allowRemote bool) (net.Listener, error) {
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return nil, fmt.Errorf("replay address %q: want HOST:PORT (e.g. %s): %v", addr, DefaultReplayAddr, err)
	}
	if !allowRemote {
		if host == "" {
			return nil, fmt.Errorf("replay address %q listens on every interface and %w: give 127.0.0.1:PORT, or allow remote clients explicitly", addr, ErrNotLoopback)
		}
		ips, err := net.DefaultResolver.LookupIPAddr(context.Background(), host)
		if err != nil {
			return nil, fmt.Errorf("replay address %q: %v", addr, err)
		}
		for _, ip := range ips {
			if !ip.IP.IsLoopback() {
				return nil, fmt.Errorf("replay address %q (%s) %w: rtl_tcp has no authentication; give 127.0.0.1:PORT, or allow remote clients explicitly", addr, ip.IP, ErrNotLoopback)
			}
		}
	}
	ln, err := net.Listen("tcp", addr)
	if err != nil {
		return nil, fmt.Errorf("replay: cannot listen on %s: %w", addr, err)
	}
	return ln, nil
}

// ReplayOptions configures ServeReplay.
type ReplayOptions struct {
	// Speed is the pace: 1 real time, 2 twice as fast, 0.5 half; 0 as fast
	// as the client reads. Negative or non-finite is refused.
	Speed float64
	// Loop starts the recording again at its end, forever (the sample
	// after the last is the first again: a discontinuity the client is not
	// told of). Without it the replay ends with the recording.
	Loop bool
	// TunerType and GainCount fill the greeting (ServeOptions' defaults).
	TunerType, GainCount uint32
	// Logger receives connection events and refused commands; nil =
	// slog.Default().
	Logger *slog.Logger
}

// ServeReplay serves a recording over rtl_tcp on ln, built on ServeRTLTCP.
// open opens the recording (any Source; it is called again for each loop).
//
// Commands are honoured as far as the recording allows, since a replay
// can neither retune nor resample: a set-sample-rate (0x02) to the
// recording's rate (to the Hz, as the protocol carries it) and a
// set-centre-frequency (0x01) to its centre are accepted; one to any other
// value is refused, ending that client's connection with a logged reason
// naming both values (the protocol has no way to answer a command), since
// the client would otherwise take the samples for what it asked for. A
// recording of unknown centre (0) accepts any frequency and logs that it
// is unknown. Gain, frequency correction, AGC, bias-tee and the other
// settings change nothing and are accepted.
//
// It returns nil at the end of the recording (without Loop), ctx.Err()
// when ctx is cancelled, or the recording's or the listener's error. It
// closes ln and every source it opened.
func ServeReplay(ctx context.Context, ln net.Listener, open func() (Source, error), opts ReplayOptions) error {
	if math.IsNaN(opts.Speed) || math.IsInf(opts.Speed, 0) || opts.Speed < 0 {
		ln.Close()
		return fmt.Errorf("replay speed %v: want 0 (as fast as the client reads) or a positive factor (1 = real time)", opts.Speed)
	}
	log := opts.Logger
	if log == nil {
		log = slog.Default()
	}
	src, err := open()
	if err != nil {
		ln.Close()
		return err
	}
	var s Source = src
	if opts.Loop {
		s = &loopSource{cur: src, info: src.Info(), open: open, log: log}
	}
	defer s.Close()
	info := s.Info()
	rate, center := math.Round(info.SampleRate), info.CenterHz
	check := func(c RTLCommand) error {
		switch c.Code {
		case CmdSampleRate:
			if math.Abs(float64(c.Param)-info.SampleRate) > 0.5 {
				return fmt.Errorf("client asked for %d S/s; the recording %s is %.0f S/s and a replay cannot resample: set the client to %.0f S/s", c.Param, info.Name, info.SampleRate, rate)
			}
		case CmdCenterFreq:
			if center == 0 {
				log.Info("rtl_tcp replay: the recording's centre frequency is unknown; taking the client's", "hz", c.Param)
				return nil
			}
			if math.Abs(float64(c.Param)-center) > 0.5 {
				return fmt.Errorf("client tuned to %d Hz; the recording %s is centred on %.0f Hz and a replay cannot retune: set the client to %.0f Hz", c.Param, info.Name, center, center)
			}
		}
		return nil
	}
	return ServeRTLTCP(ctx, ln, s, ServeOptions{
		TunerType: opts.TunerType, GainCount: opts.GainCount,
		Speed: opts.Speed, Check: check, Logger: log,
	})
}

// loopSource plays a recording again and again.
type loopSource struct {
	cur    Source
	info   Info
	open   func() (Source, error)
	log    *slog.Logger
	pass   int
	inPass int64 // samples in the current pass
}

func (l *loopSource) Info() Info {
	i := l.info
	i.Samples = -1
	return i
}

func (l *loopSource) Close() error { return l.cur.Close() }

func (l *loopSource) Read(dst []complex64) (int, error) {
	return l.read(func(s Source) (int, int, error) { n, err := s.Read(dst); return n, n, err })
}

// ReadCU8 reads raw bytes of a cu8 recording (ServeRTLTCP calls it only
// when Info().Format is cu8).
func (l *loopSource) ReadCU8(dst []byte) (int, error) {
	return l.read(func(s Source) (int, int, error) {
		cr, ok := s.(CU8Reader)
		if !ok {
			return 0, 0, fmt.Errorf("%s: not a cu8 source", l.info.Name)
		}
		n, err := cr.ReadCU8(dst)
		return n, n / 2, err
	})
}

// read calls rd (returning units read, samples read, error) and reopens
// the recording at its end.
func (l *loopSource) read(rd func(Source) (int, int, error)) (int, error) {
	for {
		n, samples, err := rd(l.cur)
		l.inPass += int64(samples)
		if n > 0 || err == nil {
			return n, nil
		}
		if !errors.Is(err, io.EOF) {
			return 0, err
		}
		if l.inPass == 0 {
			return 0, fmt.Errorf("%s holds no samples: nothing to loop", l.info.Name)
		}
		l.cur.Close()
		next, err := l.open()
		if err != nil {
			return 0, fmt.Errorf("looping: %w", err)
		}
		l.cur, l.inPass = next, 0
		l.pass++
		l.log.Info("rtl_tcp replay: recording starts again", "pass", l.pass+1)
	}
}
