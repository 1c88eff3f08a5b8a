package heading

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
	"nullseek/internal/angle"
	"os"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"time"
)

// Rotator defaults.
const (
	// DefaultRotatorTimeout bounds each command's round trip.
	DefaultRotatorTimeout = 2 * time.Second
	// DefaultPollHz is the position polling rate during sweeps and the
	// minimum recommended for Poll: at 10 Hz a 30 °/s turn moves 3°
	// between samples.
	DefaultPollHz = 10.0
	// DefaultToleranceDeg is how close to a commanded azimuth counts as
	// arrived.
	DefaultToleranceDeg = 0.5
	// DefaultStallTimeout ends a move that shows no progress this long.
	DefaultStallTimeout = 10 * time.Second
)

// ErrRotatorClosed is wrapped by errors caused by the rotator (or the
// network) closing the connection.
var ErrRotatorClosed = errors.New("rotator connection closed")

// hamlibErrNames maps the Hamlib error codes (rig.h enum rig_errcode_e,
// sent negated after RPRT; Hamlib rotctld(1), 4.5.4) to their names and meanings.
var hamlibErrNames = [...][2]string{
	0: {"RIG_OK", "no error"}, 1: {"RIG_EINVAL", "invalid parameter"},
	2: {"RIG_ECONF", "invalid configuration"}, 3: {"RIG_ENOMEM", "out of memory"},
	4: {"RIG_ENIMPL", "function not implemented"}, 5: {"RIG_ETIMEOUT", "communication timed out"},
	6: {"RIG_EIO", "I/O error"}, 7: {"RIG_EINTERNAL", "internal Hamlib error"},
	8: {"RIG_EPROTO", "protocol error"}, 9: {"RIG_ERJCTED", "command rejected by the rotator"},
	10: {"RIG_ETRUNC", "argument truncated"}, 11: {"RIG_ENAVAIL", "function not available"},
	12: {"RIG_ENTARGET", "VFO not targetable"}, 13: {"RIG_BUSERROR", "bus error"},
	14: {"RIG_BUSBUSY", "bus collision"}, 15: {"RIG_EARG", "invalid argument"},
	16: {"RIG_EVFO", "invalid VFO"}, 17: {"RIG_EDOM", "argument out of domain"},
	18: {"RIG_EDEPRECATED", "function deprecated"}, 19: {"RIG_ESECURITY", "security error"},
	20: {"RIG_EPOWER", "rotator not powered on"}, 21: {"RIG_ELIMIT", "limit exceeded"},
	22: {"RIG_EACCESS", "access denied"},
}

// HamlibError is a non-zero "RPRT n" reply from rotctld.
type HamlibError struct {
	// Code is the value after RPRT as sent (negative, e.g. -1).
	Code int
	// Cmd is the command that was refused, as sent without the newline.
	Cmd string
}

// Name returns the rig.h name of the code ("RIG_EINVAL"), or "" if unknown.
func (e *HamlibError) Name() string {
	if c := -e.Code; c >= 0 && c < len(hamlibErrNames) {
		return hamlibErrNames[c][0]
	}
	return ""
}

func (e *HamlibError) Error() string {
	if c := -e.Code; c >= 0 && c < len(hamlibErrNames) {
		return fmt.Sprintf("Hamlib refused %q: RPRT %d (%s, %s)", e.Cmd, e.Code, hamlibErrNames[c][0], hamlibErrNames[c][1])
	}
	return fmt.Sprintf("Hamlib refused %q: RPRT %d (unknown code)", e.Cmd, e.Code)
}

// parseRPRT reads a "RPRT n" line; ok is false if the line is not one.
// rotctld writes it as "RPRT %d" (Hamlib 4.5.4 rotctl_parse.c, from
// memory): one space, then the code in plain decimal. Anything else after
// "RPRT" ("RPRT-01", "RPRT  1", "RPRT +0") is a malformed reply, not a
// code read generously.
func parseRPRT(line string) (code int, ok bool, err error) {
	rest, found := strings.CutPrefix(strings.TrimSpace(line), "RPRT")
	if !found {
		return 0, false, nil
	}
	field, spaced := strings.CutPrefix(rest, " ")
	code, err = strconv.Atoi(field)
	if !spaced || err != nil || strconv.Itoa(code) != field {
		return 0, true, fmt.Errorf("malformed reply %q", line)
	}
	return code, true, nil
}

// parseDeg reads one rotctld value line ("12.34").
func parseDeg(line string) (float64, error) {
	v, err := strconv.ParseFloat(strings.TrimSpace(line), 64)
	if err != nil || !finite(v) {
		return 0, fmt.Errorf("reply %q is not an angle", strings.TrimSpace(line))
	}
	return v, nil
}

// maxReplyBytes bounds one reply line read from rotctld: its replies are
// numbers, "RPRT n" or short info strings (Hamlib rotctld(1) 4.5.4).
const maxReplyBytes = 512

// rotctldCommandNames names the rotctld(1) default-protocol commands this
// package sends (Hamlib rotctld(1) 4.5.4, COMMANDS).
var rotctldCommandNames = map[string]string{
	"p": "get_pos", "P": "set_pos", "S": "stop", "M": "move", "K": "park", "R": "reset", "_": "get_info",
}

// RotatorTimeoutError says rotctld did not answer a command in time: the
// daemon is frozen, or the rotator controller behind it stopped
// answering. It matches os.ErrDeadlineExceeded with errors.Is.
type RotatorTimeoutError struct {
	Addr    string
	Cmd     string        // as sent, without the newline
	Timeout time.Duration // the per-command bound
	Got     int           // reply lines received before the deadline
	Want    int           // reply lines a get command owes (0: up to RPRT)
}

func (e *RotatorTimeoutError) Error() string {
	verb, _, _ := strings.Cut(e.Cmd, " ")
	name := rotctldCommandNames[verb]
	if name == "" {
		name = "command"
	}
	part := ""
	if e.Got > 0 && e.Want > 0 {
		part = fmt.Sprintf(" (%d of its %d reply lines came)", e.Got, e.Want)
	} else if e.Got > 0 {
		part = fmt.Sprintf(" (%d reply lines came, no RPRT)", e.Got)
	}
	return fmt.Sprintf("rotctld at %s did not answer `%s` (%s) within %g s%s: is rotctld or the rotator controller stuck?", e.Addr, e.Cmd, name, e.Timeout.Seconds(), part)
}

// Is makes errors.Is(err, os.ErrDeadlineExceeded) true.
func (e *RotatorTimeoutError) Is(target error) bool { return target == os.ErrDeadlineExceeded }

// RotatorOptions configures DialRotator. Zero values take the defaults.
type RotatorOptions struct {
	// Timeout bounds each command's round trip (DefaultRotatorTimeout).
	Timeout time.Duration
	// PollHz is the polling rate during sweeps (DefaultPollHz).
	PollHz float64
	// ToleranceDeg is how close to a target counts as arrived
	// (DefaultToleranceDeg).
	ToleranceDeg float64
	// StallTimeout ends a move that makes no progress (DefaultStallTimeout).
	StallTimeout time.Duration
	// ElevationDeg is the elevation sent with every set_pos (0 when the
	// rotator has no elevation axis).
	ElevationDeg float64
	// Ref is the north the rotator's azimuth is calibrated to (True).
	Ref Ref
	// CaptureStart is the time origin of recorded tracks; when zero, each
	// sweep's track counts from the moment the sweep was called.
	CaptureStart time.Time
	// Logger receives progress messages; slog.Default when nil.
	Logger *slog.Logger
}

// Rotator is a client of Hamlib's rotctld network daemon using its default
// protocol (Hamlib rotctld(1), 4.5.4): one command per line, get_pos answered by two
// value lines, set commands by "RPRT n". Methods are safe for concurrent
// use; commands are serialised. After a connection error or a timeout the
// Rotator is unusable (the reply stream may be out of step): dial again.
type Rotator struct {
	addr string
	opts RotatorOptions
	log  *slog.Logger

	mu     sync.Mutex
	conn   net.Conn
	br     *bufio.Reader
	broken error
}

// DialRotator connects to rotctld at addr ("host:port"; rotctld's default
// port is 4533) and checks that it answers get_pos.
func DialRotator(ctx context.Context, addr string, opts RotatorOptions) (*Rotator, error) {
	if opts.Timeout <= 0 {
		opts.Timeout = DefaultRotatorTimeout
	}
	if opts.PollHz == 0 {
		opts.PollHz = DefaultPollHz
	}
	if !(opts.PollHz > 0) || math.IsInf(opts.PollHz, 0) {
		return nil, fmt.Errorf("rotator %s: poll rate %v Hz must be positive", addr, opts.PollHz)
	}
	if opts.ToleranceDeg <= 0 {
		opts.ToleranceDeg = DefaultToleranceDeg
	}
	if opts.StallTimeout <= 0 {
		opts.StallTimeout = DefaultStallTimeout
	}
	if opts.Ref != True && opts.Ref != Magnetic {
		return nil, fmt.Errorf("rotator %s: unknown reference %d", addr, int(opts.Ref))
	}
	log := opts.Logger
	if log == nil {
		log = slog.Default()
	}
	d := net.Dialer{Timeout: opts.Timeout}
	c, err := d.DialContext(ctx, "tcp", addr)
	if err != nil {
		return nil, fmt.Errorf("rotator at %s: %w (is rotctld running?)", addr, err)
	}
	r := &Rotator{addr: addr, opts: opts, log: log, conn: c, br: bufio.NewReaderSize(c, maxReplyBytes)}
	if _, _, err := r.Position(); err != nil {
		c.Close()
		var te *RotatorTimeoutError
		if errors.As(err, &te) {
			return nil, err
		}
		return nil, fmt.Errorf("rotator at %s does not answer get_pos like rotctld: %w", addr, err)
	}
	return r, nil
}

// Addr returns the address dialled.
func (r *Rotator) Addr() string { return r.addr }

// Close closes the connection.
func (r *Rotator) Close() error {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.broken == nil {
		r.broken = net.ErrClosed
	}
	return r.conn.Close()
}

// roundTrip sends cmd and reads its reply: nLines value lines for a get
// command (an RPRT line instead means an error), or, with nLines 0 for a
// set command, lines up to and including the RPRT line. The caller holds
// r.mu.
func (r *Rotator) roundTrip(cmd string, nLines int) ([]string, error) {
	if r.broken != nil {
		return nil, fmt.Errorf("rotator at %s is unusable after an earlier error (%w); dial again", r.addr, r.broken)
	}
	fail := func(err error) ([]string, error) {
		if isClosedErr(err) {
			err = fmt.Errorf("%w: %w", ErrRotatorClosed, err)
		}
		r.broken = err
		return nil, err
	}
	if err := r.conn.SetDeadline(time.Now().Add(r.opts.Timeout)); err != nil {
		return fail(err)
	}
	if _, err := io.WriteString(r.conn, cmd+"\n"); err != nil {
		if errors.Is(err, os.ErrDeadlineExceeded) {
			return fail(&RotatorTimeoutError{Addr: r.addr, Cmd: cmd, Timeout: r.opts.Timeout, Want: nLines})
		}
		return fail(err)
	}
	var lines []string
	for nLines == 0 || len(lines) < nLines {
		if nLines == 0 && len(lines) > 8 {
			return fail(fmt.Errorf("no RPRT line after %q; is this rotctld's default protocol?", cmd))
		}
		b, err := r.br.ReadSlice('\n')
		line := string(b)
		if err == bufio.ErrBufferFull {
			return fail(fmt.Errorf("a reply line to %q is longer than %d bytes: is this rotctld?", cmd, maxReplyBytes))
		}
		if err != nil {
			if errors.Is(err, os.ErrDeadlineExceeded) {
				return fail(&RotatorTimeoutError{Addr: r.addr, Cmd: cmd, Timeout: r.opts.Timeout, Got: len(lines), Want: nLines})
			}
			if err == io.EOF && line != "" {
				err = io.ErrUnexpectedEOF
			}
			return fail(err)
		}
		if code, ok, perr := parseRPRT(line); ok {
			if perr != nil {
				return fail(perr)
			}
			if code != 0 {
				return nil, &HamlibError{Code: code, Cmd: cmd}
			}
			return lines, nil
		}
		lines = append(lines, line)
	}
	return lines, nil
}

func isClosedErr(err error) bool {
	return errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) ||
		errors.Is(err, syscall.ECONNRESET) || errors.Is(err, syscall.EPIPE) ||
		errors.Is(err, net.ErrClosed)
}

// Position returns the rotator's azimuth and elevation in degrees as
// rotctld reports them (get_pos, "p"). Azimuth is not normalised: rotators
// with overlap report values such as -90 or 420.
func (r *Rotator) Position() (azDeg, elDeg float64, err error) {
	r.mu.Lock()
	defer r.mu.Unlock()
	return r.position()
}

func (r *Rotator) position() (azDeg, elDeg float64, err error) {
	lines, err := r.roundTrip("p", 2)
	if err != nil {
		return 0, 0, err
	}
	if len(lines) != 2 {
		r.broken = fmt.Errorf("get_pos answered %d lines, want 2", len(lines))
		return 0, 0, r.broken
	}
	if azDeg, err = parseDeg(lines[0]); err == nil {
		elDeg, err = parseDeg(lines[1])
	}
	if err != nil {
		r.broken = fmt.Errorf("get_pos: %w", err)
		return 0, 0, r.broken
	}
	return azDeg, elDeg, nil
}

// SetPosition commands azimuth and elevation in degrees (set_pos, "P").
// A refusal comes back as a *HamlibError carrying the RPRT code (the
// dummy rotator answers RPRT -1, RIG_EINVAL, outside azimuth −180…450).
func (r *Rotator) SetPosition(azDeg, elDeg float64) error {
	if !finite(azDeg) || !finite(elDeg) {
		return fmt.Errorf("rotator at %s: set_pos %v %v: angles must be finite", r.addr, azDeg, elDeg)
	}
	r.mu.Lock()
	defer r.mu.Unlock()
	_, err := r.roundTrip(fmt.Sprintf("P %.3f %.3f", azDeg, elDeg), 0)
	if err != nil {
		return fmt.Errorf("rotator at %s: set_pos %.1f° %.1f°: %w", r.addr, azDeg, elDeg, err)
	}
	return nil
}

// Stop halts the rotator (stop, "S").
func (r *Rotator) Stop() error {
	r.mu.Lock()
	defer r.mu.Unlock()
	if _, err := r.roundTrip("S", 0); err != nil {
		return fmt.Errorf("rotator at %s: stop: %w", r.addr, err)
	}
	return nil
}

// Poll reads the azimuth at hz polls per second (0 means DefaultPollHz;
// 10 Hz or more is advised for tracks) and calls fn with the midpoint
// between sending get_pos and receiving the reply, and the azimuth in
// degrees as reported. A poll that overruns its slot delays the next one
// instead of queueing. It returns nil when ctx ends and an error when a
// read fails.
func (r *Rotator) Poll(ctx context.Context, hz float64, fn func(t time.Time, azDeg float64)) error {
	if hz == 0 {
		hz = DefaultPollHz
	}
	if !(hz > 0) || math.IsInf(hz, 0) {
		return fmt.Errorf("rotator at %s: poll rate %v Hz must be positive", r.addr, hz)
	}
	tick := time.NewTicker(time.Duration(float64(time.Second) / hz))
	defer tick.Stop()
	for {
		t0 := time.Now()
		az, _, err := r.Position()
		if err != nil {
			return fmt.Errorf("rotator at %s: poll: %w", r.addr, err)
		}
		t1 := time.Now()
		fn(t0.Add(t1.Sub(t0)/2), az)
		select {
		case <-ctx.Done():
			return nil
		case <-tick.C:
		}
	}
}

// sweepRec records a sweep and wraps its errors with the last position.
type sweepRec struct {
	r      *Rotator
	origin time.Time
	track  *Track
	lastAz float64
	known  bool
}

func (s *sweepRec) wrap(err error) error {
	at := "before the first position reading"
	if s.known {
		at = fmt.Sprintf("at %.1f°", s.lastAz)
	}
	var he *HamlibError
	switch {
	case errors.Is(err, ErrRotatorClosed):
		return fmt.Errorf("rotator at %s closed the connection during the sweep %s: %w", s.r.addr, at, err)
	case errors.Is(err, os.ErrDeadlineExceeded):
		return fmt.Errorf("rotator sweep stopped %s: %w", at, err)
	case errors.As(err, &he):
		return fmt.Errorf("rotator at %s refused a command during the sweep %s: %w", s.r.addr, at, err)
	}
	return fmt.Errorf("rotator at %s: sweep stopped %s: %w", s.r.addr, at, err)
}

// poll reads one position and records it when rec is set.
func (s *sweepRec) poll(rec bool) (float64, error) {
	t0 := time.Now()
	az, _, err := s.r.Position()
	if err != nil {
		return 0, err
	}
	t := t0.Add(time.Since(t0) / 2)
	s.lastAz, s.known = az, true
	if rec {
		ts := t.Sub(s.origin).Seconds()
		if n := len(s.track.Samples); n == 0 || ts > s.track.Samples[n-1].T {
			s.track.Samples = append(s.track.Samples, Sample{T: ts, Deg: angle.Wrap360(az)})
		}
	}
	return az, nil
}

// moveTo commands target and polls until within tolerance, recording the
// positions when rec is set. hold > 0 keeps polling for that long after
// arrival (a dwell).
func (s *sweepRec) moveTo(ctx context.Context, target float64, rec bool, hold time.Duration) error {
	r := s.r
	if err := r.SetPosition(target, r.opts.ElevationDeg); err != nil {
		return err
	}
	period := time.Duration(float64(time.Second) / r.opts.PollHz)
	tick := time.NewTicker(period)
	defer tick.Stop()
	var arrived time.Time
	progressAz, progressT := math.NaN(), time.Now()
	for {
		az, err := s.poll(rec)
		if err != nil {
			return err
		}
		now := time.Now()
		if arrived.IsZero() && math.Abs(az-target) <= r.opts.ToleranceDeg {
			arrived = now
		}
		if !arrived.IsZero() && now.Sub(arrived) >= hold {
			return nil
		}
		if arrived.IsZero() {
			if math.IsNaN(progressAz) || math.Abs(az-progressAz) > 0.05 {
				progressAz, progressT = az, now
			} else if now.Sub(progressT) > r.opts.StallTimeout {
				return fmt.Errorf("rotator stopped at %.1f°, %.1f° short of the target %.1f° (no movement for %v)", az, math.Abs(target-az), target, r.opts.StallTimeout)
			}
		}
		select {
		case <-ctx.Done():
			if err := r.Stop(); err != nil {
				r.log.Warn("heading: could not stop the rotator after cancellation", "addr", r.addr, "err", err)
			}
			return ctx.Err()
		case <-tick.C:
		}
	}
}

func (r *Rotator) newSweep() *sweepRec {
	origin := r.opts.CaptureStart
	if origin.IsZero() {
		origin = time.Now()
	}
	return &sweepRec{r: r, origin: origin, track: &Track{Ref: r.opts.Ref}}
}

// ContinuousSweep turns the rotator to fromDeg (not recorded), then
// commands toDeg and records the azimuth at PollHz until it is within
// ToleranceDeg of toDeg. The rotator takes its own way between the two
// numbers (rotctld azimuths are not circular: 350 → 370 passes north on a
// rotator with overlap, 350 → 10 turns back through 180). Track times are
// seconds from CaptureStart (or from the call), headings wrapped to
// [0, 360). Errors name the address and the last azimuth; a closed
// connection wraps ErrRotatorClosed. On cancellation the rotator is
// stopped and ctx.Err() is returned (wrapped).
func (r *Rotator) ContinuousSweep(ctx context.Context, fromDeg, toDeg float64) (*Track, error) {
	s := r.newSweep()
	if err := s.moveTo(ctx, fromDeg, false, 0); err != nil {
		return nil, s.wrap(err)
	}
	if err := s.moveTo(ctx, toDeg, true, 0); err != nil {
		return nil, s.wrap(err)
	}
	return s.track, nil
}

// StepSweep turns to fromDeg, then steps by stepDeg to toDeg (the last step
// is shortened to land on toDeg), waiting at each position until within
// ToleranceDeg and then for dwell, polling and recording throughout from
// the first dwell on. stepDeg must be non-zero and point from fromDeg
// towards toDeg; at most 3600 steps.
func (r *Rotator) StepSweep(ctx context.Context, fromDeg, stepDeg, toDeg float64, dwell time.Duration) (*Track, error) {
	if !finite(fromDeg) || !finite(stepDeg) || !finite(toDeg) {
		return nil, fmt.Errorf("rotator at %s: step sweep angles must be finite", r.addr)
	}
	if stepDeg == 0 || (toDeg-fromDeg)*stepDeg < 0 {
		return nil, fmt.Errorf("rotator at %s: step %.2f° does not lead from %.2f° to %.2f°", r.addr, stepDeg, fromDeg, toDeg)
	}
	if dwell < 0 {
		return nil, fmt.Errorf("rotator at %s: dwell %v is negative", r.addr, dwell)
	}
	n := int(math.Ceil(math.Abs(toDeg-fromDeg)/math.Abs(stepDeg) - 1e-9))
	if n > 3600 {
		return nil, fmt.Errorf("rotator at %s: %d steps is too many (limit 3600)", r.addr, n)
	}
	s := r.newSweep()
	if err := s.moveTo(ctx, fromDeg, false, 0); err != nil {
		return nil, s.wrap(err)
	}
	for k := 0; k <= n; k++ {
		target := fromDeg + float64(k)*stepDeg
		if k == n {
			target = toDeg
		}
		if err := s.moveTo(ctx, target, true, dwell); err != nil {
			return nil, s.wrap(err)
		}
	}
	return s.track, nil
}
