package heading

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"os"
	"strings"
	"sync"
	"time"

	"go.bug.st/serial"
)

// DefaultIdleTimeout is how long a live NMEA source may stay silent before
// NMEAStream.Run gives up, when NMEAStream.IdleTimeout is 0.
const DefaultIdleTimeout = 5 * time.Second

// LiveReading is a heading sentence stamped with its arrival time.
type LiveReading struct {
	// Time is the local clock when the line was read (UTC-comparable).
	Time time.Time
	Reading
}

// NMEAStream reads heading sentences from a live source (TCP, UDP or a
// serial port) and stamps each on arrival. Set the exported fields before
// calling Run or Record. One Run at a time.
type NMEAStream struct {
	// AllowMissingChecksum accepts sentences without *hh.
	AllowMissingChecksum bool
	// IdleTimeout ends Run with an error when nothing at all arrives for
	// this long; 0 means DefaultIdleTimeout.
	IdleTimeout time.Duration
	// Logger receives the skipped-lines summary; slog.Default when nil.
	Logger *slog.Logger

	name  string
	next  func(ctx context.Context, idle time.Duration) (lines []liveLine, at time.Time, err error)
	cls   func() error
	local net.Addr

	mu    sync.Mutex
	stats NMEAStats
}

// Name returns the source as given ("tcp://host:port", a serial port).
func (s *NMEAStream) Name() string { return s.name }

// Stats returns the counts so far; safe to call while Run is going.
func (s *NMEAStream) Stats() NMEAStats {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.stats
}

// Close releases the connection or port.
func (s *NMEAStream) Close() error { return s.cls() }

// DialNMEA opens a network NMEA source. addr is "tcp://host:port" (connect
// to a server that streams sentences, one per line) or "udp://host:port"
// (listen on that local address for datagrams of one or more lines;
// "udp://:10110" listens on all interfaces). The context bounds the dial.
func DialNMEA(ctx context.Context, addr string) (*NMEAStream, error) {
	scheme, hostport, ok := strings.Cut(addr, "://")
	if !ok || hostport == "" {
		return nil, fmt.Errorf("NMEA source %q: want tcp://host:port or udp://[host]:port", addr)
	}
	if _, _, err := net.SplitHostPort(hostport); err != nil {
		return nil, fmt.Errorf("NMEA source %q: %w", addr, err)
	}
	switch scheme {
	case "tcp":
		var d net.Dialer
		c, err := d.DialContext(ctx, "tcp", hostport)
		if err != nil {
			return nil, fmt.Errorf("NMEA source %s: %w", addr, err)
		}
		return newLineStream(addr, c, func(t time.Time) error { return c.SetReadDeadline(t) }, c.Close), nil
	case "udp":
		var lc net.ListenConfig
		pc, err := lc.ListenPacket(ctx, "udp", hostport)
		if err != nil {
			return nil, fmt.Errorf("NMEA source %s: %w", addr, err)
		}
		return newPacketStream(addr, pc), nil
	}
	return nil, fmt.Errorf("NMEA source %q: scheme %q is neither tcp nor udp", addr, scheme)
}

// LocalAddr returns the bound address of a UDP source (useful with port 0)
// and nil for other sources.
func (s *NMEAStream) LocalAddr() net.Addr { return s.local }

// OpenNMEASerial opens a serial port (e.g. /dev/ttyUSB0) at baud bits per
// second, 8N1, the usual setting of NMEA 0183 devices (4800 baud for the
// classic standard, 38400 for high-speed).
func OpenNMEASerial(port string, baud int) (*NMEAStream, error) {
	if baud <= 0 {
		return nil, fmt.Errorf("serial NMEA source %s: baud rate %d must be positive", port, baud)
	}
	p, err := serial.Open(port, &serial.Mode{BaudRate: baud, DataBits: 8, Parity: serial.NoParity, StopBits: serial.OneStopBit})
	if err != nil {
		return nil, fmt.Errorf("serial NMEA source %s at %d baud: %w", port, baud, err)
	}
	const poll = 100 * time.Millisecond
	if err := p.SetReadTimeout(poll); err != nil {
		p.Close()
		return nil, fmt.Errorf("serial NMEA source %s: %w", port, err)
	}
	var deadline time.Time
	var dmu sync.Mutex
	r := readerFunc(func(b []byte) (int, error) {
		for {
			n, err := p.Read(b)
			if n > 0 || err != nil {
				return n, err
			}
			dmu.Lock()
			d := deadline
			dmu.Unlock()
			if !d.IsZero() && !time.Now().Before(d) {
				return 0, os.ErrDeadlineExceeded
			}
		}
	})
	setDeadline := func(t time.Time) error {
		dmu.Lock()
		deadline = t
		dmu.Unlock()
		return nil
	}
	return newLineStream(port, r, setDeadline, p.Close), nil
}

type readerFunc func([]byte) (int, error)

func (f readerFunc) Read(b []byte) (int, error) { return f(b) }

// liveLine is one line from a live source; tooLong marks a line longer
// than MaxLineBytes, of which text holds only the start.
type liveLine struct {
	text    string
	tooLong bool
}

// newLineStream wraps a byte stream whose reads honour setDeadline. Lines
// are read in bounded memory: a line longer than MaxLineBytes is reported
// once as too long and the rest of it is discarded as it arrives, each
// call with a fresh idle deadline, so a flood without newlines neither
// grows memory nor passes for silence.
func newLineStream(name string, r io.Reader, setDeadline func(time.Time) error, cls func() error) *NMEAStream {
	lr := newLineReader(r)
	s := &NMEAStream{name: name, cls: cls}
	s.next = func(ctx context.Context, idle time.Duration) ([]liveLine, time.Time, error) {
		if err := setDeadline(time.Now().Add(idle)); err != nil {
			return nil, time.Time{}, err
		}
		stop := context.AfterFunc(ctx, func() { setDeadline(time.Unix(1, 0)) })
		defer stop()
		line, kind, err := lr.next()
		at := time.Now()
		switch {
		case kind == lineTooLong:
			return []liveLine{{text: line, tooLong: true}}, at, nil
		case kind == lineRest:
			if err != nil {
				return nil, at, err
			}
			return nil, at, nil
		case err != nil && !(err == io.EOF && line != ""):
			return nil, at, err
		}
		return []liveLine{{text: line}}, at, nil
	}
	return s
}

// newPacketStream wraps a datagram socket; each datagram may hold several
// lines (a datagram is at most 64 KiB; lines longer than MaxLineBytes in
// it are reported as too long).
func newPacketStream(name string, pc net.PacketConn) *NMEAStream {
	buf := make([]byte, 65536)
	s := &NMEAStream{name: name, cls: pc.Close, local: pc.LocalAddr()}
	s.next = func(ctx context.Context, idle time.Duration) ([]liveLine, time.Time, error) {
		if err := pc.SetReadDeadline(time.Now().Add(idle)); err != nil {
			return nil, time.Time{}, err
		}
		stop := context.AfterFunc(ctx, func() { pc.SetReadDeadline(time.Unix(1, 0)) })
		defer stop()
		n, _, err := pc.ReadFrom(buf)
		at := time.Now()
		if err != nil {
			return nil, at, err
		}
		return splitDatagram(buf[:n]), at, nil
	}
	return s
}

// splitDatagram cuts a datagram into its non-blank lines.
func splitDatagram(b []byte) []liveLine {
	var lines []liveLine
	for _, l := range strings.Split(string(b), "\n") {
		if strings.TrimSpace(l) == "" {
			continue
		}
		if len(l) > maxLineBytes {
			lines = append(lines, liveLine{text: l[:maxLineBytes], tooLong: true})
			continue
		}
		lines = append(lines, liveLine{text: l})
	}
	return lines
}

// Run reads the source, calling fn for every valid heading sentence (any
// reference) in arrival order. It returns
//   - nil when ctx ends or the source closes cleanly (TCP EOF) after at
//     least one valid sentence;
//   - an error naming the source and the counts when nothing valid arrived
//     by then, when nothing at all arrives for IdleTimeout, or on an I/O
//     error.
//
// Garbage, bad checksums and other sentence types are counted (Stats) and
// summarised in one warning at the end.
func (s *NMEAStream) Run(ctx context.Context, fn func(LiveReading)) error {
	idle := s.IdleTimeout
	if idle <= 0 {
		idle = DefaultIdleTimeout
	}
	lineNo := 0
	defer func() { s.Stats().warn(s.Logger, s.name) }()
	for {
		lines, at, err := s.next(ctx, idle)
		if err != nil {
			if ctx.Err() != nil || errors.Is(err, io.EOF) {
				return s.endErr(fmt.Sprintf("%v", ctxOrEOF(ctx.Err(), err)))
			}
			if errors.Is(err, os.ErrDeadlineExceeded) {
				return fmt.Errorf("NMEA source %s: nothing received for %v (%s)", s.name, idle, s.Stats())
			}
			return fmt.Errorf("NMEA source %s: %w", s.name, err)
		}
		for _, l := range lines {
			line := strings.TrimSpace(l.text)
			if line == "" && !l.tooLong {
				continue
			}
			lineNo++
			s.mu.Lock()
			s.stats.Lines++
			var rd Reading
			ok := false
			if l.tooLong {
				s.stats.add(ProblemTooLong, lineNo, fmt.Sprintf("line longer than %d bytes, skipped to its end", maxLineBytes))
			} else {
				rd, ok = s.stats.classify(lineNo, line, s.AllowMissingChecksum)
				if ok {
					s.stats.Accepted++
				}
			}
			s.mu.Unlock()
			if ok {
				fn(LiveReading{Time: at, Reading: rd})
			}
		}
	}
}

func ctxOrEOF(ctxErr, err error) error {
	if ctxErr != nil {
		return ctxErr
	}
	return err
}

func (s *NMEAStream) endErr(why string) error {
	st := s.Stats()
	if st.Accepted == 0 {
		return fmt.Errorf("NMEA source %s: no valid heading sentence before the end (%s): %s", s.name, why, st)
	}
	return nil
}

// Record runs the source until ctx ends or it closes, and returns the
// track of headings with reference ref, each stamped with its arrival time
// in seconds from captureStart. Readings without ref are counted as
// OtherRef; a reading not later than the previous sample is counted as
// Stale. It fails when no sample was recorded.
func (s *NMEAStream) Record(ctx context.Context, captureStart time.Time, ref Ref) (*Track, error) {
	if ref != True && ref != Magnetic {
		return nil, fmt.Errorf("NMEA source %s: unknown reference %d", s.name, int(ref))
	}
	if captureStart.IsZero() {
		return nil, fmt.Errorf("NMEA source %s: capture start time is needed to stamp live headings", s.name)
	}
	tr := &Track{Ref: ref}
	err := s.Run(ctx, func(lr LiveReading) {
		deg, has := lr.Heading(ref)
		ts := lr.Time.Sub(captureStart).Seconds()
		s.mu.Lock()
		defer s.mu.Unlock()
		switch {
		case !has:
			s.stats.OtherRef++
			s.stats.Accepted--
		case len(tr.Samples) > 0 && ts <= tr.Samples[len(tr.Samples)-1].T:
			s.stats.Stale++
			s.stats.Accepted--
		default:
			tr.Samples = append(tr.Samples, Sample{T: ts, Deg: deg})
		}
	})
	if err != nil {
		return nil, err
	}
	if len(tr.Samples) == 0 {
		return nil, fmt.Errorf("NMEA source %s: no %s heading recorded (%s)", s.name, ref, s.Stats())
	}
	return tr, nil
}
