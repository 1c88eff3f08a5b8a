package position

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"strings"
	"sync"
	"time"

	"nullseek/internal/nmea"
)

// maxNMEALine bounds one line held in memory. A sentence is at most
// nmea.MaxLen (82) bytes; a longer line is skipped to its end without being
// held and counted as too long.
const maxNMEALine = 512

// NMEAStats counts what an NMEA reader saw. Every line lands in exactly
// one of Garbage, TooLong, BadChecksum, NoChecksum, Invalid, Other or the
// GGA/RMC count; epochs (the GGA and RMC of one time of day) land in
// Fixes, NoFix, NoDate or OutOfOrder.
type NMEAStats struct {
	Lines int
	// GGA and RMC count the sentences read.
	GGA, RMC int
	// Other counts well-formed sentences of other types (GSA, GSV, VTG …).
	Other int
	// Garbage: not an NMEA sentence; TooLong: longer than 82 bytes with CR
	// LF; BadChecksum, NoChecksum: failed the *hh check; Invalid: a GGA or
	// RMC with a field out of form or range.
	Garbage, TooLong, BadChecksum, NoChecksum, Invalid int
	// Fixes: epochs that became fixes. NoFix: epochs the receiver marked
	// invalid (GGA quality 0, 7 manual or 8 simulation; RMC status V or
	// mode N, M or S). NoDate: GGA-only epochs before any RMC gave the
	// date. OutOfOrder: epochs earlier than the last fix.
	Fixes, NoFix, NoDate, OutOfOrder int
	// First describes the first problem line ("line 7: NMEA checksum
	// mismatch: …"), "" when none.
	First string
}

// Problems is the number of lines that failed a check.
func (s NMEAStats) Problems() int {
	return s.Garbage + s.TooLong + s.BadChecksum + s.NoChecksum + s.Invalid
}

func (s *NMEAStats) problem(n *int, line int, what string) {
	*n++
	if s.First == "" {
		s.First = fmt.Sprintf("line %d: %s", line, what)
	}
}

// NMEA is a position source reading GGA and RMC sentences from a stream:
// a serial port, a file or a TCP connection. Set Track's limits and OnFix
// before Run.
type NMEA struct {
	// Track receives every fix; At answers from it.
	Track *Track
	// OnFix, when set, is called with each fix after it joined Track (for
	// logging every fix); it runs in Run's goroutine.
	OnFix func(Fix)

	name string
	r    io.Reader

	mu    sync.Mutex
	stats NMEAStats
}

// NewNMEA returns a source reading r; name says what r is
// ("/dev/ttyUSB0", "tcp://10.0.0.5:10110", a file name) and is the fixes'
// Source after "nmea ".
func NewNMEA(name string, r io.Reader) *NMEA {
	return &NMEA{Track: &Track{}, name: name, r: r}
}

// Name returns "nmea " and the name given.
func (s *NMEA) Name() string { return "nmea " + s.name }

// At is Track.At.
func (s *NMEA) At(t time.Time) (Fix, error) { return s.Track.At(t) }

// Stats returns the counts so far; safe while Run is going.
func (s *NMEA) Stats() NMEAStats {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.stats
}

// Run reads until end of input (nil), a read error (returned, naming the
// source) or the end of ctx (nil). Skipped lines never stop it; Stats
// counts them. A reader with SetReadDeadline (net.Conn, an *os.File on a
// pipe or terminal) is woken as soon as ctx ends; any other returns once
// its pending Read does.
//
// Joining: GGA carries no date and RMC no altitude, HDOP or fix quality,
// so the GGA and RMC of one time of day (field 1) are one epoch, made a
// fix when both have arrived or when a sentence of another time of day
// begins the next epoch (an RMC-only or GGA-only receiver costs one epoch
// of delay). An epoch's date is its RMC's, else the last RMC's date, a day
// later when the time of day fell by more than 12 h (midnight passed).
// GGA's position, quality, HDOP and altitude are preferred; a no-fix mark
// in either sentence makes the epoch no fix. Mode is 3D when GGA gives an
// altitude, as gpsd 3.22 reports it (TPV mode 3 for such a GGA in the
// gpsfake test), else 2D.
func (s *NMEA) Run(ctx context.Context) error {
	if d, ok := s.r.(interface{ SetReadDeadline(time.Time) error }); ok {
		stop := context.AfterFunc(ctx, func() { d.SetReadDeadline(time.Now()) })
		defer stop()
	}
	br := bufio.NewReaderSize(s.r, maxNMEALine)
	j := joiner{source: s.Name(), emit: s.emit,
		onNoFix: func() { s.stats.NoFix++ }, onNoDate: func() { s.stats.NoDate++ }}
	line := 0
	for {
		b, err := br.ReadSlice('\n')
		if errors.Is(err, bufio.ErrBufferFull) {
			line++
			s.mu.Lock()
			s.stats.Lines++
			s.stats.problem(&s.stats.TooLong, line, fmt.Sprintf("a line of more than %d bytes", maxNMEALine))
			s.mu.Unlock()
			for errors.Is(err, bufio.ErrBufferFull) {
				_, err = br.ReadSlice('\n')
			}
			if err == nil {
				continue
			}
		} else if len(b) > 0 {
			line++
			s.mu.Lock()
			s.classify(&j, line, string(b))
			s.mu.Unlock()
		}
		if err != nil {
			s.mu.Lock()
			j.flush()
			s.mu.Unlock()
			if ctx.Err() != nil {
				return nil
			}
			if errors.Is(err, io.EOF) {
				return nil
			}
			return fmt.Errorf("%s: %w", s.Name(), err)
		}
	}
}

// emit runs with s.mu held.
func (s *NMEA) emit(f Fix) {
	if err := s.Track.Add(f); err != nil {
		if errors.Is(err, ErrOutOfOrder) {
			s.stats.OutOfOrder++
		} else {
			s.stats.NoFix++
		}
		return
	}
	s.stats.Fixes++
	if s.OnFix != nil {
		s.mu.Unlock()
		s.OnFix(f)
		s.mu.Lock()
	}
}

// classify runs with s.mu held.
func (s *NMEA) classify(j *joiner, line int, text string) {
	st := &s.stats
	st.Lines++
	t := strings.TrimRight(text, "\r\n ")
	if t == "" {
		st.problem(&st.Garbage, line, "an empty line")
		return
	}
	if len(t)+2 > nmea.MaxLen {
		st.problem(&st.TooLong, line, fmt.Sprintf("a sentence of %d bytes with CR LF, longer than NMEA 0183's %d", len(t)+2, nmea.MaxLen))
		return
	}
	sen, err := nmea.Split(t, true)
	switch {
	case errors.Is(err, nmea.ErrChecksum):
		st.problem(&st.BadChecksum, line, err.Error())
		return
	case errors.Is(err, nmea.ErrNoChecksum):
		st.problem(&st.NoChecksum, line, err.Error())
		return
	case err != nil:
		st.problem(&st.Garbage, line, err.Error())
		return
	}
	switch sen.Type {
	case "GGA":
		g, err := ParseGGA(t)
		if err != nil {
			st.problem(&st.Invalid, line, err.Error())
			return
		}
		st.GGA++
		if !g.HasTime {
			st.NoFix++ // a no-fix report without a time joins no epoch
			return
		}
		j.gga(g)
	case "RMC":
		r, err := ParseRMC(t)
		if err != nil {
			st.problem(&st.Invalid, line, err.Error())
			return
		}
		st.RMC++
		if !r.HasTime {
			st.NoFix++
			return
		}
		j.rmc(r)
	default:
		st.Other++
	}
}

// joiner makes fixes of GGA/RMC epochs (NMEA.Run's doc).
type joiner struct {
	source string
	emit   func(Fix)

	open     bool
	tod      time.Duration
	g        *GGA
	r        *RMC
	day      time.Time // last known date (midnight UTC)
	dayTod   time.Duration
	haveDay  bool
	onNoFix  func()
	onNoDate func()
}

func (j *joiner) gga(g GGA) {
	if j.open && g.TimeOfDay != j.tod {
		j.flush()
	}
	j.open, j.tod, j.g = true, g.TimeOfDay, &g
	if j.r != nil {
		j.flush()
	}
}

func (j *joiner) rmc(r RMC) {
	tod := r.Time.Sub(midnight(r.Time))
	if j.open && tod != j.tod {
		j.flush()
	}
	j.open, j.tod, j.r = true, tod, &r
	if j.g != nil {
		j.flush()
	}
}

func midnight(t time.Time) time.Time {
	y, m, d := t.Date()
	return time.Date(y, m, d, 0, 0, 0, 0, time.UTC)
}

func (j *joiner) flush() {
	if !j.open {
		return
	}
	g, r, tod := j.g, j.r, j.tod
	j.open, j.g, j.r = false, nil, nil
	var day time.Time
	switch {
	case r != nil:
		day = midnight(r.Time)
	case j.haveDay:
		day = j.day
		if tod < j.dayTod-12*time.Hour {
			day = day.AddDate(0, 0, 1)
		}
	default:
		j.onNoDate()
		return
	}
	j.day, j.dayTod, j.haveDay = day, tod, true
	if g != nil && (g.Quality == 0 || g.Quality >= 7) || r != nil && !r.Valid {
		j.onNoFix()
		return
	}
	f := Fix{Time: day.Add(tod), Mode: Mode2D, Source: j.source}
	if g != nil {
		f.LatDeg, f.LonDeg, f.Quality, f.HDOP = g.LatDeg, g.LonDeg, g.Quality, g.HDOP
		if g.AltMSLM != nil {
			f.Mode, f.AltMSLM = Mode3D, g.AltMSLM
			if g.GeoidSepM != nil {
				f.AltHAEM = ptr(*g.AltMSLM + *g.GeoidSepM)
			}
		}
	} else {
		f.LatDeg, f.LonDeg = r.LatDeg, r.LonDeg
	}
	j.emit(f)
}
