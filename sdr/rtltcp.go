package sdr

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"net"
	"os"
	"sync"
	"sync/atomic"
	"time"
)

// rtl_tcp protocol (librtlsdr rtl_tcp.c, osmocom/rtl-sdr @ae0dd6d): the
// server greets with 12 bytes {"RTL0", uint32 tuner type, uint32 gain
// count} in network byte order, then streams cu8. The client sends 5-byte
// commands {uint8 cmd, uint32 param big-endian}.
const (
	rtlMagic         = "RTL0"
	rtlGreetingBytes = 12
	rtlCommandBytes  = 5
)

// rtl_tcp command codes (rtl_tcp.c command_worker).
const (
	CmdCenterFreq     byte = 0x01 // param: Hz (uint32)
	CmdSampleRate     byte = 0x02 // param: Hz
	CmdGainMode       byte = 0x03 // param: 1 manual, 0 automatic
	CmdGain           byte = 0x04 // param: tenths of a dB (signed)
	CmdFreqCorrection byte = 0x05 // param: ppm (signed)
	CmdIFGain         byte = 0x06 // param: stage<<16 | (tenths dB & 0xffff)
	CmdTestMode       byte = 0x07
	CmdAGCMode        byte = 0x08 // param: RTL2832 digital AGC on/off
	CmdDirectSampling byte = 0x09 // param: 0 off, 1 I branch, 2 Q branch
	CmdOffsetTuning   byte = 0x0a
	CmdRTLXtal        byte = 0x0b
	CmdTunerXtal      byte = 0x0c
	CmdGainByIndex    byte = 0x0d // param: index into the tuner's gain table
	CmdBiasTee        byte = 0x0e
)

// Tuner types reported in the greeting (rtl-sdr.h enum rtlsdr_tuner).
const (
	TunerUnknown uint32 = iota
	TunerE4000
	TunerFC0012
	TunerFC0013
	TunerFC2580
	TunerR820T
	TunerR828D
)

// RTLConfig sets up an RTL-SDR, over rtl_tcp or USB. Zero values leave the
// device's setting alone, except SampleRate, which is required.
type RTLConfig struct {
	// CenterHz is the tuning frequency in Hz (0 = leave as is). The
	// protocol carries a uint32, so at most about 4.29 GHz.
	CenterHz float64
	// SampleRate in Hz (required): 225001–300000 or 900001–3200000.
	SampleRate float64
	// GainDB is the manual tuner gain in dB (sent as tenths); ignored when
	// AutoGain is set. Zero with AutoGain false means manual 0 dB.
	GainDB float64
	// AutoGain selects the tuner's automatic gain.
	AutoGain bool
	// PPM is the frequency correction in parts per million.
	PPM int
	// AGC turns on the RTL2832's digital AGC.
	AGC bool
	// BiasTee powers the antenna input (5 V on supported dongles).
	BiasTee bool
	// DirectSampling is 0 (off), 1 (I branch) or 2 (Q branch).
	DirectSampling int
	// OffsetTuning enables offset tuning (E4000 tuners).
	OffsetTuning bool
	// NoDataTimeout is how long a read may wait for data before failing
	// (default 5 s).
	NoDataTimeout time.Duration
	// SettleSamples are read and dropped after configuration, so buffered
	// samples from before the settings took effect are not delivered.
	SettleSamples int
	// EOFOnClose makes a server closing the connection end the stream with
	// io.EOF (useful with a replay server); by default it is an error,
	// since a live receiver never ends.
	EOFOnClose bool
}

// Bounds of RTLConfig fields besides the sample rate (RTLMinRateLow …
// RTLMaxRateHigh) and the centre frequency (the protocol's uint32).
const (
	// MaxPPM bounds the frequency correction: ±1000 ppm. A dongle's
	// crystal is typically within ±100 ppm (±1–2 ppm with a TCXO); one
	// that needs more than 0.1 % is faulty (common practice).
	MaxPPM = 1000
	// MaxGainDB bounds the manual tuner gain: ±100 dB. Real tuner tables
	// span about −10…50 dB (rtl-sdr tuner_r82xx.c, tuner_e4k.c); the device
	// picks the nearest step.
	MaxGainDB = 100
	// MaxSettleS bounds SettleSamples to ten seconds of samples at the
	// configured rate: settling after a retune takes milliseconds.
	MaxSettleS = 10
	// MaxNoDataTimeout bounds NoDataTimeout to ten minutes.
	MaxNoDataTimeout = 10 * time.Minute
)

// rtlRate returns the rate as the device gets it (the protocol and
// librtlsdr carry whole Hz) or an error naming the ranges librtlsdr
// accepts.
func rtlRate(hz float64) (uint32, error) {
	if math.IsNaN(hz) || math.IsInf(hz, 0) || hz <= 0 {
		return 0, fmt.Errorf("sample rate %v Hz is not a positive finite number", hz)
	}
	r := math.Round(hz)
	if !(r >= RTLMinRateLow && r <= RTLMaxRateLow) && !(r >= RTLMinRateHigh && r <= RTLMaxRateHigh) {
		return 0, fmt.Errorf("sample rate %v S/s is not one an RTL2832 supports (225001–300000 or 900001–3200000 S/s, librtlsdr rtlsdr_set_sample_rate)", hz)
	}
	return uint32(r), nil
}

// check validates every numeric field against its range.
func (c RTLConfig) check() error {
	if _, err := rtlRate(c.SampleRate); err != nil {
		return err
	}
	if !(c.CenterHz >= 0 && c.CenterHz <= math.MaxUint32) {
		return fmt.Errorf("centre frequency %v Hz is outside 0–%d Hz (rtl_tcp carries a uint32)", c.CenterHz, uint32(math.MaxUint32))
	}
	if c.DirectSampling < 0 || c.DirectSampling > 2 {
		return fmt.Errorf("direct sampling mode %d: want 0, 1 or 2", c.DirectSampling)
	}
	if !(math.Abs(c.GainDB) <= MaxGainDB) {
		return fmt.Errorf("gain %v dB is outside ±%d dB", c.GainDB, MaxGainDB)
	}
	if c.PPM < -MaxPPM || c.PPM > MaxPPM {
		return fmt.Errorf("frequency correction %d ppm is outside ±%d ppm (a crystal that far off is faulty)", c.PPM, MaxPPM)
	}
	if c.SettleSamples < 0 || float64(c.SettleSamples) > MaxSettleS*c.SampleRate {
		return fmt.Errorf("settle samples %d is outside 0–%d s of samples", c.SettleSamples, MaxSettleS)
	}
	if c.NoDataTimeout < 0 || c.NoDataTimeout > MaxNoDataTimeout {
		return fmt.Errorf("no-data timeout %v is outside 0–%v", c.NoDataTimeout, MaxNoDataTimeout)
	}
	return nil
}

// RTLTCP is an rtl_tcp client. It implements Source (cu8, normalised like
// all cu8 data) and CU8Reader. Info().Samples is -1. Info().Start is the
// wall-clock arrival time of the first delivered sample (after
// SettleSamples), taken when DialRTLTCP returns; network and USB buffering
// (typically tens of ms) are not corrected for.
type RTLTCP struct {
	conn      net.Conn
	addr      string
	info      Info
	timeout   time.Duration
	eofOK     bool
	tuner     uint32
	gainCount uint32
	buf       []byte // raw bytes; buf[lo:hi] pending
	lo, hi    int
	scratch   []byte
	pos       int64 // samples delivered
	// recvBytes counts IQ bytes received, dropBytes the settling bytes
	// dropped before sample 0; originNs is the stream-origin estimate (see
	// StreamOrigin), 0 until the first sample arrives.
	recvBytes, dropBytes int64
	originNs             atomic.Int64
	wmu                  sync.Mutex
	err                  error
	stop                 func() bool
	ctx                  context.Context
	watch                *dropWatch // nil unless a ResilientRTLTCP watches for drops
}

// DialRTLTCP connects to an rtl_tcp server at addr (host:port), reads the
// greeting, sends the configuration and waits for the first samples.
// Cancelling ctx closes the connection (also after Dial returns).
func DialRTLTCP(ctx context.Context, addr string, cfg RTLConfig) (*RTLTCP, error) {
	if err := cfg.check(); err != nil {
		return nil, fmt.Errorf("rtl_tcp %s: %w", addr, err)
	}
	return dialRTLTCP(ctx, addr, cfg, nil)
}

// dialRTLTCP is DialRTLTCP on a checked cfg, with a drop watch (nil for
// none) fed by every read.
func dialRTLTCP(ctx context.Context, addr string, cfg RTLConfig, watch *dropWatch) (*RTLTCP, error) {
	timeout := cfg.NoDataTimeout
	if timeout <= 0 {
		timeout = 5 * time.Second
	}
	var d net.Dialer
	dctx, cancel := context.WithTimeout(ctx, timeout)
	conn, err := d.DialContext(dctx, "tcp", addr)
	cancel()
	if err != nil {
		return nil, fmt.Errorf("rtl_tcp: cannot connect to %s: %w", addr, err)
	}
	return startRTLTCP(ctx, conn, addr, cfg, timeout, watch)
}

// startRTLTCP runs the client side of the protocol on an open connection
// (a TCP one, or a net.Pipe in tests); cfg has been checked.
func startRTLTCP(ctx context.Context, conn net.Conn, addr string, cfg RTLConfig, timeout time.Duration, watch *dropWatch) (*RTLTCP, error) {
	c := &RTLTCP{
		watch:   watch,
		conn:    conn,
		addr:    addr,
		timeout: timeout,
		eofOK:   cfg.EOFOnClose,
		buf:     make([]byte, 64<<10),
		ctx:     ctx,
		info: Info{
			SampleRate: math.Round(cfg.SampleRate),
			CenterHz:   cfg.CenterHz,
			Format:     "cu8",
			Name:       "rtl_tcp " + addr,
			Samples:    -1,
			ClipLevel:  1,
		},
	}
	c.stop = context.AfterFunc(ctx, func() { conn.Close() })
	fail := func(err error) (*RTLTCP, error) {
		c.Close()
		return nil, err
	}
	var g [rtlGreetingBytes]byte
	conn.SetReadDeadline(time.Now().Add(timeout))
	n, err := io.ReadFull(conn, g[:])
	if err != nil {
		return fail(c.greetingErr(g[:n], err))
	}
	tuner, gains, err := parseGreeting(g[:])
	if err != nil {
		return fail(fmt.Errorf("rtl_tcp %s: %w", addr, err))
	}
	c.tuner, c.gainCount = tuner, gains
	if err := c.configure(cfg); err != nil {
		return fail(err)
	}
	// Drop settling samples, then wait for the first sample and stamp it.
	drop := 2 * int64(cfg.SettleSamples)
	c.dropBytes = drop
	for drop > 0 || c.hi-c.lo < 2 {
		if c.hi-c.lo >= 2 && drop > 0 {
			k := min(drop, int64((c.hi-c.lo)/2*2))
			c.lo += int(k)
			drop -= k
			continue
		}
		if err := c.fill(); err != nil {
			if err == io.EOF {
				err = fmt.Errorf("rtl_tcp %s closed the connection after its greeting, before the first sample", c.addr)
			}
			return fail(err)
		}
	}
	c.info.Start = time.Now().UTC()
	return c, nil
}

func (c *RTLTCP) configure(cfg RTLConfig) error {
	type cmd struct {
		code  byte
		param uint32
	}
	rate, _ := rtlRate(cfg.SampleRate) // checked by DialRTLTCP
	cmds := []cmd{{CmdSampleRate, rate}}
	if cfg.CenterHz > 0 {
		cmds = append(cmds, cmd{CmdCenterFreq, uint32(math.Round(cfg.CenterHz))})
	}
	if cfg.AutoGain {
		cmds = append(cmds, cmd{CmdGainMode, 0})
	} else {
		cmds = append(cmds, cmd{CmdGainMode, 1}, cmd{CmdGain, uint32(int32(math.Round(cfg.GainDB * 10)))})
	}
	if cfg.PPM != 0 {
		cmds = append(cmds, cmd{CmdFreqCorrection, uint32(int32(cfg.PPM))})
	}
	if cfg.AGC {
		cmds = append(cmds, cmd{CmdAGCMode, 1})
	}
	if cfg.BiasTee {
		cmds = append(cmds, cmd{CmdBiasTee, 1})
	}
	if cfg.DirectSampling != 0 {
		cmds = append(cmds, cmd{CmdDirectSampling, uint32(cfg.DirectSampling)})
	}
	if cfg.OffsetTuning {
		cmds = append(cmds, cmd{CmdOffsetTuning, 1})
	}
	for _, k := range cmds {
		if err := c.Command(k.code, k.param); err != nil {
			return err
		}
	}
	return nil
}

// EncodeRTLCommand returns the 5 bytes rtl_tcp expects for a command.
func EncodeRTLCommand(code byte, param uint32) [rtlCommandBytes]byte {
	var b [rtlCommandBytes]byte
	b[0] = code
	binary.BigEndian.PutUint32(b[1:], param)
	return b
}

// Command sends one raw rtl_tcp command. It is safe to call while another
// goroutine reads samples.
func (c *RTLTCP) Command(code byte, param uint32) error {
	b := EncodeRTLCommand(code, param)
	c.wmu.Lock()
	defer c.wmu.Unlock()
	c.conn.SetWriteDeadline(time.Now().Add(c.timeout))
	if _, err := c.conn.Write(b[:]); err != nil {
		return fmt.Errorf("rtl_tcp %s: sending command %#02x: %w", c.addr, code, err)
	}
	return nil
}

func boolParam(b bool) uint32 {
	if b {
		return 1
	}
	return 0
}

// SetCenterHz retunes to hz (0 < hz ≤ 4294967295). Info().CenterHz is
// updated; samples already in flight were taken at the old frequency.
func (c *RTLTCP) SetCenterHz(hz float64) error {
	if !(hz > 0 && hz <= math.MaxUint32) {
		return fmt.Errorf("rtl_tcp %s: centre frequency %v Hz is outside 1–%d Hz", c.addr, hz, uint32(math.MaxUint32))
	}
	if err := c.Command(CmdCenterFreq, uint32(math.Round(hz))); err != nil {
		return err
	}
	c.info.CenterHz = hz
	return nil
}

// SetSampleRate changes the sample rate (Hz). Info().SampleRate is updated.
func (c *RTLTCP) SetSampleRate(hz float64) error {
	cfg := RTLConfig{SampleRate: hz}
	if err := cfg.check(); err != nil {
		return fmt.Errorf("rtl_tcp %s: %w", c.addr, err)
	}
	r, _ := rtlRate(hz)
	if err := c.Command(CmdSampleRate, r); err != nil {
		return err
	}
	c.info.SampleRate = float64(r)
	return nil
}

// SetAutoGain selects automatic (true) or manual (false) tuner gain.
func (c *RTLTCP) SetAutoGain(auto bool) error { return c.Command(CmdGainMode, boolParam(!auto)) }

// SetGainDB sets the manual tuner gain in dB (sent in tenths of a dB; the
// device picks the nearest step of its gain table).
func (c *RTLTCP) SetGainDB(db float64) error {
	if !(math.Abs(db) <= MaxGainDB) {
		return fmt.Errorf("rtl_tcp %s: gain %v dB is outside ±%d dB", c.addr, db, MaxGainDB)
	}
	return c.Command(CmdGain, uint32(int32(math.Round(db*10))))
}

// SetGainIndex sets the gain by index into the tuner's gain table
// (0 ≤ i < GainCount()).
func (c *RTLTCP) SetGainIndex(i int) error {
	if i < 0 || uint32(i) >= c.gainCount {
		return fmt.Errorf("rtl_tcp %s: gain index %d outside 0–%d", c.addr, i, int(c.gainCount)-1)
	}
	return c.Command(CmdGainByIndex, uint32(i))
}

// SetPPM sets the frequency correction in parts per million.
func (c *RTLTCP) SetPPM(ppm int) error {
	if ppm < -MaxPPM || ppm > MaxPPM {
		return fmt.Errorf("rtl_tcp %s: frequency correction %d ppm is outside ±%d ppm", c.addr, ppm, MaxPPM)
	}
	return c.Command(CmdFreqCorrection, uint32(int32(ppm)))
}

// SetAGC turns the RTL2832 digital AGC on or off.
func (c *RTLTCP) SetAGC(on bool) error { return c.Command(CmdAGCMode, boolParam(on)) }

// SetBiasTee turns antenna power on or off.
func (c *RTLTCP) SetBiasTee(on bool) error { return c.Command(CmdBiasTee, boolParam(on)) }

// SetDirectSampling selects 0 (off), 1 (I branch) or 2 (Q branch).
func (c *RTLTCP) SetDirectSampling(mode int) error {
	if mode < 0 || mode > 2 {
		return fmt.Errorf("rtl_tcp %s: direct sampling mode %d: want 0, 1 or 2", c.addr, mode)
	}
	return c.Command(CmdDirectSampling, uint32(mode))
}

// SetOffsetTuning turns offset tuning on or off.
func (c *RTLTCP) SetOffsetTuning(on bool) error { return c.Command(CmdOffsetTuning, boolParam(on)) }

// TunerType is the tuner code from the greeting (TunerR820T, ...).
func (c *RTLTCP) TunerType() uint32 { return c.tuner }

// GainCount is the length of the tuner's gain table from the greeting.
func (c *RTLTCP) GainCount() int { return int(c.gainCount) }

// Info implements Source.
func (c *RTLTCP) Info() Info { return c.info }

// Close closes the connection.
func (c *RTLTCP) Close() error {
	if c.stop != nil {
		c.stop()
	}
	return c.conn.Close()
}

// greetingLayout states the greeting as the protocol defines it, for
// messages.
const greetingLayout = `the rtl_tcp protocol (osmocom rtl-sdr src/rtl_tcp.c, dongle_info_t) starts with a 12-byte greeting: "RTL0", then the tuner type and the tuner's gain count as big-endian uint32`

// parseGreeting checks the 12-byte rtl_tcp greeting and returns the tuner
// type and gain count. The magic must be "RTL0"; any tuner type and gain
// count are accepted (librtlsdr's rtlsdr_tuner enum may grow).
func parseGreeting(g []byte) (tuner, gains uint32, err error) {
	if len(g) != rtlGreetingBytes {
		return 0, 0, fmt.Errorf("greeting of %d bytes: %s", len(g), greetingLayout)
	}
	if string(g[:4]) != rtlMagic {
		return 0, 0, fmt.Errorf("not an rtl_tcp server: its greeting starts % x (%q), want \"RTL0\"; %s", g[:4], printable(g[:4]), greetingLayout)
	}
	return binary.BigEndian.Uint32(g[4:8]), binary.BigEndian.Uint32(g[8:12]), nil
}

// printable replaces non-printable bytes by '.' for messages.
func printable(b []byte) string {
	out := make([]byte, len(b))
	for i, c := range b {
		if c < 0x20 || c > 0x7e {
			c = '.'
		}
		out[i] = c
	}
	return string(out)
}

// greetingErr explains a greeting that did not arrive whole: what came
// (bytes in hex) and what the protocol expects.
func (c *RTLTCP) greetingErr(got []byte, err error) error {
	if c.ctx.Err() != nil {
		return fmt.Errorf("rtl_tcp %s: %w", c.addr, c.ctx.Err())
	}
	then := fmt.Sprintf("then nothing for %v", c.timeout)
	switch {
	case errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF):
		then = "then closed the connection"
		if len(got) == 0 {
			return fmt.Errorf("rtl_tcp %s closed the connection before its greeting: is another client connected? (rtl_tcp serves one at a time; %s)", c.addr, greetingLayout)
		}
	case errors.Is(err, os.ErrDeadlineExceeded):
		if len(got) == 0 {
			return fmt.Errorf("rtl_tcp %s sent no greeting within %v: is it an rtl_tcp server? (%s)", c.addr, c.timeout, greetingLayout)
		}
	default:
		return fmt.Errorf("rtl_tcp %s: reading the greeting: %w", c.addr, err)
	}
	if len(got) >= 4 && string(got[:4]) != rtlMagic {
		_, _, perr := parseGreeting(append(got[:4:4], make([]byte, 8)...))
		return fmt.Errorf("rtl_tcp %s: %w", c.addr, perr)
	}
	return fmt.Errorf("rtl_tcp %s sent a %d-byte greeting (% x), %s: %s", c.addr, len(got), got, then, greetingLayout)
}

// wrapReadErr turns network errors into one clear line.
func (c *RTLTCP) wrapReadErr(err error, what string) error {
	if c.ctx.Err() != nil {
		return fmt.Errorf("rtl_tcp %s: %w", c.addr, c.ctx.Err())
	}
	if errors.Is(err, os.ErrDeadlineExceeded) {
		return fmt.Errorf("no samples from rtl_tcp at %s for %v: is the receiver still connected?", c.addr, c.timeout)
	}
	if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
		return fmt.Errorf("rtl_tcp %s closed the connection after %d samples", c.addr, c.pos)
	}
	return fmt.Errorf("rtl_tcp %s: %s: %w", c.addr, what, err)
}

// fill reads more bytes into the buffer, compacting it first.
func (c *RTLTCP) fill() error {
	if c.lo > 0 {
		c.hi = copy(c.buf, c.buf[c.lo:c.hi])
		c.lo = 0
	}
	c.conn.SetReadDeadline(time.Now().Add(c.timeout))
	n, err := c.conn.Read(c.buf[c.hi:])
	c.hi += n
	if n > 0 {
		c.noteArrival(time.Now(), n)
	}
	if err != nil && n == 0 {
		if errors.Is(err, io.EOF) && c.eofOK && c.ctx.Err() == nil {
			return io.EOF
		}
		return c.wrapReadErr(err, "read")
	}
	return nil
}

// noteArrival refines the stream-origin estimate with n bytes that
// arrived at time a.
func (c *RTLTCP) noteArrival(a time.Time, n int) {
	c.recvBytes += int64(n)
	got := (c.recvBytes - c.dropBytes) / 2 // samples from sample 0 on, all in by a
	if got <= 0 || !(c.info.SampleRate > 0) {
		return
	}
	c.watch.note(a, got, min(got, int64(n/2)))
	cand := a.UnixNano() - int64(float64(got)/c.info.SampleRate*1e9)
	if old := c.originNs.Load(); old == 0 || cand < old {
		c.originNs.Store(cand)
	}
}

// StreamOrigin is the best estimate so far of when sample 0 was taken by
// the receiver: the earliest, over every read, of the read's arrival time
// less the duration of the samples received up to it. A sample cannot
// arrive before it is taken, and USB transfers, the network and the
// scheduler only ever add delay, so the minimum converges on the true
// origin plus the smallest delay seen — unlike Info().Start, the arrival of
// the first bytes, which lags by a whole receiver transfer and by whatever
// delay that first read met. Zero before the first sample.
func (c *RTLTCP) StreamOrigin() time.Time {
	ns := c.originNs.Load()
	if ns == 0 {
		return time.Time{}
	}
	return time.Unix(0, ns).UTC()
}

// ReadCU8 implements CU8Reader: whole IQ byte pairs, blocking until at
// least one pair is available.
func (c *RTLTCP) ReadCU8(dst []byte) (int, error) {
	if c.err != nil {
		return 0, c.err
	}
	if len(dst) < 2 {
		return 0, nil
	}
	for c.hi-c.lo < 2 {
		if err := c.fill(); err != nil {
			c.err = err
			return 0, err
		}
	}
	n := copy(dst[:len(dst)/2*2], c.buf[c.lo:c.lo+(c.hi-c.lo)/2*2])
	c.lo += n
	c.pos += int64(n / 2)
	return n, nil
}

// Read implements Source. It returns as soon as at least one sample is
// available (it does not wait to fill dst).
func (c *RTLTCP) Read(dst []complex64) (int, error) {
	if len(dst) == 0 {
		return 0, nil
	}
	if c.scratch == nil {
		c.scratch = make([]byte, 32<<10)
	}
	p := c.scratch[:min(len(c.scratch), 2*len(dst))]
	n, err := c.ReadCU8(p)
	for i := 0; i < n/2; i++ {
		dst[i] = complex(cu8Table[p[2*i]], cu8Table[p[2*i+1]])
	}
	return n / 2, err
}
