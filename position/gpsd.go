package position

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"sync"
	"time"
)

// gpsd client defaults.
const (
	// DefaultGPSDAddr is gpsd's address and IANA-registered port
	// (gpsd(8): TCP 2947 on the loopback interface by default).
	DefaultGPSDAddr = "127.0.0.1:2947"
	// MaxGPSDLine bounds one JSON report held in memory. gpsd 3.22 builds
	// reports in buffers of GPS_JSON_RESPONSE_MAX = 4096 bytes (gpsd.h,
	// from memory); a SKY report with many satellites is the longest
	// seen. A longer line is skipped to its end and counted.
	MaxGPSDLine = 16 << 10
)

// gpsdWatch turns on JSON reports (gpsd_json(5), "?WATCH": "enable" and
// "json" booleans).
const gpsdWatch = `?WATCH={"enable":true,"json":true}` + "\n"

// GPSDStats counts what the gpsd client saw.
type GPSDStats struct {
	// Connects counts successful connections, Drops connections that
	// ended or could not be made (each followed by a backoff).
	Connects, Drops int
	// TPV counts TPV reports; Fixes those that became fixes (mode 2 or 3
	// with time and position); NoFix TPVs of mode 0/1 or without time or
	// position; OutOfOrder fixes earlier than the last.
	TPV, Fixes, NoFix, OutOfOrder int
	// Other counts reports of other classes (SKY, ATT, DEVICE, PPS …).
	Other int
	// Bad counts lines that were not JSON objects with a class, or too
	// long.
	Bad int
	// Release is gpsd's release from its VERSION report ("3.22"); Devices
	// the device paths of the last DEVICES report; LastError the message
	// of gpsd's last ERROR report.
	Release   string
	Devices   []string
	LastError string
	// Watching is the "enable" of the WATCH reply on the current
	// connection (false until it comes).
	Watching bool
	// First describes the first bad line, "" when none.
	First string
}

// GPSD is a position source reading gpsd's TPV reports over TCP. It
// reconnects with backoff when the connection drops or cannot be made, so
// a gpsd restarted mid-session costs only the fixes missed. Set the
// exported fields before Run.
type GPSD struct {
	// Addr is gpsd's HOST:PORT; "" means DefaultGPSDAddr.
	Addr string
	// Track receives every fix; At answers from it.
	Track *Track
	// OnFix, when set, is called with each fix after it joined Track; it
	// runs in Run's goroutine.
	OnFix func(Fix)
	// MinBackoff and MaxBackoff bound the wait before a reconnect,
	// doubling from the first to the second; zero means 250 ms and 10 s.
	MinBackoff, MaxBackoff time.Duration
	// Logger receives a line per dropped connection; slog.Default when nil.
	Logger *slog.Logger

	mu    sync.Mutex
	stats GPSDStats
}

// NewGPSD returns a client of gpsd at addr ("" for DefaultGPSDAddr).
func NewGPSD(addr string) *GPSD {
	if addr == "" {
		addr = DefaultGPSDAddr
	}
	return &GPSD{Addr: addr, Track: &Track{}}
}

// Name returns "gpsd HOST:PORT".
func (g *GPSD) Name() string { return "gpsd " + g.addr() }

func (g *GPSD) addr() string {
	if g.Addr == "" {
		return DefaultGPSDAddr
	}
	return g.Addr
}

// At is Track.At.
func (g *GPSD) At(t time.Time) (Fix, error) { return g.Track.At(t) }

// Stats returns the counts so far; safe while Run is going.
func (g *GPSD) Stats() GPSDStats {
	g.mu.Lock()
	defer g.mu.Unlock()
	s := g.stats
	s.Devices = append([]string(nil), s.Devices...)
	return s
}

// ErrGPSDProtocol: gpsd speaks a protocol major version other than 3, the
// one whose TPV fields this client reads (gpsd_json(5): proto_major
// changes on incompatible changes). Run returns it without retrying.
var ErrGPSDProtocol = errors.New("gpsd protocol major version is not 3")

// Run connects, asks for JSON reports with ?WATCH and feeds Track from TPV
// reports until ctx ends (then nil). A dropped or refused connection is
// retried after a backoff; only ErrGPSDProtocol ends Run early.
func (g *GPSD) Run(ctx context.Context) error {
	minB, maxB := g.MinBackoff, g.MaxBackoff
	if minB <= 0 {
		minB = 250 * time.Millisecond
	}
	if maxB < minB {
		maxB = max(10*time.Second, minB)
	}
	log := g.Logger
	if log == nil {
		log = slog.Default()
	}
	backoff := minB
	quiet := false // a failed dial after a failed dial is not logged again
	for {
		got, err := g.session(ctx)
		if ctx.Err() != nil {
			return nil
		}
		if errors.Is(err, ErrGPSDProtocol) {
			return fmt.Errorf("%s: %w", g.Name(), err)
		}
		g.mu.Lock()
		g.stats.Drops++
		g.mu.Unlock()
		if got {
			backoff, quiet = minB, false
		}
		if !quiet {
			log.Warn("gpsd connection lost or refused; retrying until it answers", "gpsd", g.addr(), "err", err)
		}
		quiet = !got
		select {
		case <-ctx.Done():
			return nil
		case <-time.After(backoff):
		}
		backoff = min(2*backoff, maxB)
	}
}

// session runs one connection; got says gpsd answered (a VERSION or any
// report), which resets the backoff.
func (g *GPSD) session(ctx context.Context) (got bool, err error) {
	var d net.Dialer
	d.Timeout = 5 * time.Second
	c, err := d.DialContext(ctx, "tcp", g.addr())
	if err != nil {
		return false, err
	}
	defer c.Close()
	stop := context.AfterFunc(ctx, func() { c.SetDeadline(time.Now()) })
	defer stop()
	g.mu.Lock()
	g.stats.Connects++
	g.stats.Watching = false // until this gpsd's WATCH reply
	g.mu.Unlock()
	c.SetWriteDeadline(time.Now().Add(5 * time.Second))
	if _, err := io.WriteString(c, gpsdWatch); err != nil {
		return false, err
	}
	c.SetWriteDeadline(time.Time{})
	br := bufio.NewReaderSize(c, MaxGPSDLine)
	for {
		b, err := br.ReadSlice('\n')
		if errors.Is(err, bufio.ErrBufferFull) {
			g.bad(fmt.Sprintf("a report longer than %d bytes", MaxGPSDLine))
			for errors.Is(err, bufio.ErrBufferFull) {
				_, err = br.ReadSlice('\n')
			}
		} else if len(b) > 0 {
			got = true
			if perr := g.report(b); perr != nil {
				return got, perr
			}
		}
		if err != nil {
			return got, err
		}
	}
}

func (g *GPSD) bad(what string) {
	g.mu.Lock()
	defer g.mu.Unlock()
	g.stats.Bad++
	if g.stats.First == "" {
		g.stats.First = what
	}
}

// tpv holds the TPV fields read (gpsd_json(5), gpsd 3.22): mode (0 unseen,
// 1 no fix, 2 2D, 3 3D), time (ISO 8601 UTC), lat/lon (degrees), altHAE
// (metres above the WGS84 ellipsoid), altMSL (metres above mean sea
// level), eph (horizontal position error, metres), epx/epy (longitude and
// latitude error, metres, 95 % confidence), status (fix type; 2 DGPS).
// "alt", deprecated since gpsd 3.20 for altMSL/altHAE, is not read.
type tpv struct {
	Class  string   `json:"class"`
	Device string   `json:"device"`
	Mode   int      `json:"mode"`
	Time   string   `json:"time"`
	Lat    *float64 `json:"lat"`
	Lon    *float64 `json:"lon"`
	AltHAE *float64 `json:"altHAE"`
	AltMSL *float64 `json:"altMSL"`
	Eph    *float64 `json:"eph"`
	Epx    *float64 `json:"epx"`
	Epy    *float64 `json:"epy"`
	// VERSION, DEVICES, WATCH, ERROR fields.
	Release    string `json:"release"`
	ProtoMajor *int   `json:"proto_major"`
	Devices    []struct {
		Path string `json:"path"`
	} `json:"devices"`
	Enable  *bool  `json:"enable"`
	Message string `json:"message"`
}

// report handles one line; only a wrong protocol version is an error.
func (g *GPSD) report(b []byte) error {
	var r tpv
	if err := json.Unmarshal(b, &r); err != nil || r.Class == "" {
		if err == nil {
			err = errors.New("no class")
		}
		g.bad(fmt.Sprintf("not a gpsd report: %v", err))
		return nil
	}
	g.mu.Lock()
	defer g.mu.Unlock()
	st := &g.stats
	switch r.Class {
	case "VERSION":
		st.Release = r.Release
		if r.ProtoMajor == nil || *r.ProtoMajor != 3 {
			v := "none"
			if r.ProtoMajor != nil {
				v = fmt.Sprint(*r.ProtoMajor)
			}
			return fmt.Errorf("%w: release %q, proto_major %s", ErrGPSDProtocol, r.Release, v)
		}
	case "DEVICES":
		st.Devices = st.Devices[:0]
		for _, d := range r.Devices {
			st.Devices = append(st.Devices, d.Path)
		}
	case "WATCH":
		st.Watching = r.Enable != nil && *r.Enable
	case "ERROR":
		st.LastError = r.Message
	case "TPV":
		st.TPV++
		f, ok := g.fix(r)
		if !ok {
			st.NoFix++
			return nil
		}
		if err := g.Track.Add(f); err != nil {
			if errors.Is(err, ErrOutOfOrder) {
				st.OutOfOrder++
			} else {
				st.NoFix++
			}
			return nil
		}
		st.Fixes++
		if g.OnFix != nil {
			g.mu.Unlock()
			g.OnFix(f)
			g.mu.Lock()
		}
	default:
		st.Other++
	}
	return nil
}

func (g *GPSD) fix(r tpv) (Fix, bool) {
	if r.Mode != 2 && r.Mode != 3 || r.Lat == nil || r.Lon == nil || r.Time == "" {
		return Fix{}, false
	}
	t, err := time.Parse(time.RFC3339Nano, r.Time)
	if err != nil {
		return Fix{}, false
	}
	f := Fix{Time: t.UTC(), LatDeg: *r.Lat, LonDeg: *r.Lon, Mode: Mode(r.Mode),
		AltHAEM: r.AltHAE, AltMSLM: r.AltMSL, Source: g.Name()}
	switch {
	case r.Eph != nil:
		f.HErrM = r.Eph
	case r.Epx != nil && r.Epy != nil:
		f.HErrM = ptr(max(*r.Epx, *r.Epy))
	}
	if f.Mode == Mode2D {
		f.AltHAEM, f.AltMSLM = nil, nil // a 2D fix's altitude is not measured
	}
	return f, f.Usable() == nil
}
