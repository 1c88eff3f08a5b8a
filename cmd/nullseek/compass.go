package main

import (
	"context"
	"errors"
	"fmt"
	"net"
	"strconv"
	"strings"
	"time"

	"nullseek/heading"
	"nullseek/sdr"
	"nullseek/survey"
)

// feedFlag is the live flag naming an NMEA 0183 compass, the live twin of
// --nmea FILE.
const feedFlag = "nmea-feed"

// defaultSerialBaud is NMEA 0183's classic line rate (REFERENCES §4,
// gpsfake -s default; common practice for marine compasses).
const defaultSerialBaud = 4800

// compassDialTimeout bounds connecting to a TCP compass.
const compassDialTimeout = 5 * time.Second

// compassAddr is a parsed --nmea-feed address.
type compassAddr struct {
	// network is "tcp", "udp" or "serial".
	network string
	// target is "tcp://host:port" / "udp://[host]:port" for
	// heading.DialNMEA, or the serial device path.
	target string
	// baud is the serial line rate (serial only).
	baud int
}

// parseCompassAddr reads tcp://HOST:PORT, udp://[HOST]:PORT (listen on
// that local address; empty HOST = all interfaces) or
// serial:/dev/ttyXXX[@BAUD] (default 4800 baud, 8N1).
func parseCompassAddr(s string) (compassAddr, error) {
	var a compassAddr
	bad := func(why string) (compassAddr, error) {
		return compassAddr{}, fmt.Errorf("--%s %q: %s; want tcp://HOST:PORT, udp://[HOST]:PORT or serial:/dev/ttyXXX[@BAUD]", feedFlag, s, why)
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
		a.network, a.baud = "serial", defaultSerialBaud
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
	return a, nil
}

// String is the address in messages.
func (a compassAddr) String() string {
	if a.network == "serial" {
		return fmt.Sprintf("serial:%s@%d", a.target, a.baud)
	}
	return a.target
}

// open connects to (TCP), listens on (UDP) or opens (serial) the compass.
func (a compassAddr) open(ctx context.Context) (*heading.NMEAStream, error) {
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

// headingRef reads --heading-ref.
func headingRef(s string) (heading.Ref, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "true", "t":
		return heading.True, nil
	case "magnetic", "mag", "m":
		return heading.Magnetic, nil
	}
	return heading.True, fmt.Errorf("--heading-ref %q: want true or magnetic", s)
}

// checkCompass checks the flags of a live capture with --nmea-feed before
// anything is connected: the compass is the only heading source, the
// capture has a duration, and magnetic headings have a declination.
func (f *liveFlags) checkCompass(hf *headingFlags) error {
	if _, err := parseCompassAddr(f.compass); err != nil {
		return err
	}
	if f.rotator != "" {
		return fmt.Errorf("--%s and --rotator both give the headings: use one", feedFlag)
	}
	if f.sweep != "" || f.step != "" {
		return fmt.Errorf("--sweep and --step turn a rotator: drop them with --%s", feedFlag)
	}
	if hf.log != "" || hf.nmea != "" || hf.turn != "" {
		return fmt.Errorf("--%s gives the headings: drop --headings, --nmea and --turn", feedFlag)
	}
	if f.duration == 0 {
		return fmt.Errorf("a live capture with --%s needs --duration SECONDS", feedFlag)
	}
	ref, err := headingRef(hf.ref)
	if err != nil {
		return err
	}
	if ref == heading.Magnetic {
		// The offline body converts with the capture's start time; this
		// only checks now that it will be able to.
		if _, err := hf.declinationAt(time.Now().UTC(), func(string) {}); err != nil {
			return err
		}
	}
	return nil
}

// startCompass opens the compass and starts recording it, before the
// receiver is dialled (an unreachable compass costs nothing, and no
// sentence waits unread in a socket buffer to be stamped late).
func (f *liveFlags) startCompass(ctx context.Context, hf *headingFlags, notes func(string)) (*liveCompass, error) {
	a, err := parseCompassAddr(f.compass)
	if err != nil {
		return nil, err
	}
	ref, err := headingRef(hf.ref)
	if err != nil {
		return nil, err
	}
	s, err := a.open(ctx)
	if err != nil {
		return nil, err
	}
	feed, err := survey.StartCompassFeed(ctx, s, survey.CompassOptions{Ref: ref})
	if err != nil {
		s.Close()
		return nil, err
	}
	notes(fmt.Sprintf("reading %s headings from the compass at %s", ref, a))
	return &liveCompass{feed: feed, stream: s, ref: ref}, nil
}

// liveCompass is a running compass feed and the stream it reads.
type liveCompass struct {
	feed   *survey.CompassFeed
	stream *heading.NMEAStream
	ref    heading.Ref
}

// close stops the feed, then closes the stream.
func (c *liveCompass) close() {
	c.feed.Stop()
	c.stream.Close()
}

// capture is survey.CompassFeed.Capture with a flag hint when the compass
// speaks of the other north.
func (c *liveCompass) capture(ctx context.Context, src sdr.Source, opts survey.LiveOptions) (*survey.LiveCapture, error) {
	lc, err := c.feed.Capture(ctx, src, opts)
	if errors.Is(err, survey.ErrCompassReference) {
		if c.ref == heading.True {
			return nil, fmt.Errorf("%w; for a magnetic compass give --heading-ref magnetic and --station LAT,LON (WMM2025) or --declination DEG", err)
		}
		return nil, fmt.Errorf("%w; for a compass that gives true headings give --heading-ref true", err)
	}
	return lc, err
}
