package capture

import (
	"context"
	"fmt"
	"net"
	"strconv"
	"strings"
	"time"

	"nullseek/heading"
)

// DefaultSerialBaud is NMEA 0183's classic line rate (gpsfake -s default;
// common practice for marine compasses).
const DefaultSerialBaud = 4800

// compassDialTimeout bounds connecting to a TCP compass.
const compassDialTimeout = 5 * time.Second

// CompassAddr is where a live NMEA 0183 compass is read (--nmea-feed).
type CompassAddr struct {
	// network is "tcp", "udp" or "serial".
	network string
	// target is "tcp://host:port" / "udp://[host]:port" for
	// heading.DialNMEA, or the serial device path.
	target string
	// baud is the serial line rate (serial only).
	baud int
}

// ParseCompassAddr reads --nmea-feed: tcp://HOST:PORT (connect to a server
// that streams sentences), udp://[HOST]:PORT (listen on that local address;
// empty HOST = all interfaces) or serial:/dev/ttyXXX[@BAUD] (default 4800
// baud, 8N1).
func ParseCompassAddr(s string) (*CompassAddr, error) {
	var a CompassAddr
	bad := func(why string) (*CompassAddr, error) {
		return nil, fmt.Errorf("--nmea-feed %q: %s; want tcp://HOST:PORT, udp://[HOST]:PORT or serial:/dev/ttyXXX[@BAUD]", s, why)
	}
	scheme, rest, ok := strings.Cut(strings.TrimSpace(s), ":")
	if !ok || rest == "" {
		return bad("no scheme")
	}
	switch strings.ToLower(scheme) {
	case "tcp", "udp":
		hostport, ok := strings.CutPrefix(rest, "//")
		if !ok {
			return bad("missing // after the scheme")
		}
		hostport = strings.TrimSuffix(hostport, "/")
		host, port, err := net.SplitHostPort(hostport)
		if err != nil {
			return bad("not HOST:PORT")
		}
		if p, err := strconv.Atoi(port); err != nil || p < 1 || p > 65535 {
			return bad("port must be 1–65535")
		}
		a.network = strings.ToLower(scheme)
		if a.network == "tcp" && host == "" {
			return bad("a TCP compass needs the host to connect to")
		}
		if strings.ContainsAny(host, "/ @") {
			return bad("bad host")
		}
		a.target = a.network + "://" + net.JoinHostPort(host, port)
	case "serial":
		dev := rest
		if strings.HasPrefix(dev, "//") { // serial:///dev/ttyUSB0
			dev = dev[2:]
		}
		a.network, a.baud = "serial", DefaultSerialBaud
		if i := strings.LastIndexByte(dev, '@'); i >= 0 {
			b, err := strconv.Atoi(dev[i+1:])
			if err != nil || b < 50 || b > 4000000 {
				return bad("baud rate must be a whole number from 50 to 4000000")
			}
			a.baud, dev = b, dev[:i]
		}
		if dev == "" || strings.ContainsAny(dev, "\x00\n") {
			return bad("no serial device")
		}
		a.target = dev
	default:
		return bad(fmt.Sprintf("unknown scheme %q", scheme))
	}
	return &a, nil
}

// String is the address in messages.
func (a *CompassAddr) String() string {
	if a.network == "serial" {
		return fmt.Sprintf("serial:%s@%d", a.target, a.baud)
	}
	return a.target
}

// open connects to (TCP), listens on (UDP) or opens (serial) the compass.
// Open connects to the compass (a TCP server, a UDP port to listen on, or
// a serial device).
func (a *CompassAddr) Open(ctx context.Context) (*heading.NMEAStream, error) { return a.open(ctx) }

func (a *CompassAddr) open(ctx context.Context) (*heading.NMEAStream, error) {
	if a.network == "serial" {
		s, err := heading.OpenNMEASerial(a.target, a.baud)
		if err != nil {
			return nil, fmt.Errorf("compass: %w", err)
		}
		return s, nil
	}
	dctx, cancel := context.WithTimeout(ctx, compassDialTimeout)
	defer cancel()
	s, err := heading.DialNMEA(dctx, a.target)
	if err != nil {
		return nil, fmt.Errorf("compass unreachable: %w", err)
	}
	return s, nil
}
