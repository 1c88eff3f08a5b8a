package capture

import (
	"fmt"
	"io"
	"math"
	"os"
	"strings"
	"sync"
	"time"

	"golang.org/x/term"
)

// Status is a capture's progress, shown a few times a second.
type Status struct {
	// ElapsedS is the seconds of samples captured so far.
	ElapsedS float64
	// TotalS is the capture's planned length in seconds, 0 while it is not
	// known (a rotator sweep without a duration, before the sweep ends).
	TotalS float64
	// LevelDBFS is the mean power of the last block read, dB relative to a
	// full-scale complex tone, floored at −120 dB.
	LevelDBFS float64
	// SNRDB is how far LevelDBFS stands above the quietest block of the
	// last FloorWindowS seconds (the band's noise floor, common practice
	// for a wideband meter), valid when SNRKnown: the whole band's power,
	// so a narrow carrier shows less than its channel SNR.
	SNRDB    float64
	SNRKnown bool
	// Clipping is true when the last block touched the receiver's rails.
	Clipping bool
	// Source names the heading source: "rotator", "compass" or "turn"
	// ("" when the headings come from a file).
	Source string
	// HeadingDeg is the latest heading: the rotator's azimuth as rotctld
	// reports it, the compass heading, or the turn model's heading; valid
	// when HeadingKnown.
	HeadingDeg   float64
	HeadingKnown bool
}

// StatusSink is shown the progress during a capture and cleared at its end.
type StatusSink interface {
	Show(Status)
	Clear()
}

// Level bar: barCells cells from barFloorDB to 0 dBFS.
const (
	barCells   = 20
	barFloorDB = -60.0
)

// FloorWindowS is how far back Status.SNRDB's noise floor looks.
const FloorWindowS = 10.0

// DefaultPlainPeriod is how often a status that is not a terminal gets a
// line.
const DefaultPlainPeriod = 10 * time.Second

// LevelBar draws a level in dBFS as barCells cells from −60 to 0 dBFS
// with its value: "[#########...........]  -33.0 dBFS".
func LevelBar(db float64) string {
	if !finite(db) {
		db = minLevelDBFS
	}
	n := int(math.Round((db - barFloorDB) / -barFloorDB * barCells))
	n = max(0, min(barCells, n))
	return fmt.Sprintf("[%s%s] %6.1f dBFS", strings.Repeat("#", n), strings.Repeat(".", barCells-n), db)
}

// format is the status in one line of at most 80 columns, for example
//
//	level [#########...........]  -33.0 dBFS  SNR 22 dB  rotator   72.4°  12.0/27.1s
func (s Status) format() string {
	var b strings.Builder
	b.WriteString("level " + LevelBar(s.LevelDBFS))
	if s.SNRKnown && finite(s.SNRDB) {
		fmt.Fprintf(&b, "  SNR %2.0f dB", min(s.SNRDB, 99))
	}
	if s.Clipping {
		b.WriteString(" CLIPPING")
	}
	if s.Source != "" {
		if s.HeadingKnown && finite(s.HeadingDeg) {
			h := math.Round(s.HeadingDeg*10) / 10
			if s.Source != "rotator" && h >= 360 {
				h -= 360 // 359.96° shows as 0.0°; a rotator's own numbers are not wrapped
			}
			fmt.Fprintf(&b, "  %s %5.1f°", s.Source, h)
		} else {
			fmt.Fprintf(&b, "  %s    --", s.Source)
		}
	}
	if s.TotalS > 0 {
		fmt.Fprintf(&b, "  %.1f/%.1fs", s.ElapsedS, s.TotalS)
	} else {
		fmt.Fprintf(&b, "  %.1fs", s.ElapsedS)
	}
	return b.String()
}

// StatusLine draws the status on one terminal line, redrawn in place: a
// carriage return, the line, then ECMA-48's EL (Erase in Line, CSI K: to
// the end of the line), so a shorter line leaves nothing behind.
type StatusLine struct {
	mu    sync.Mutex
	w     io.Writer
	shown bool
}

// NewStatus returns the status display for w: a StatusLine redrawn in
// place when w is a terminal (an *os.File for which golang.org/x/term
// IsTerminal), else a PlainStatus writing a line every
// DefaultPlainPeriod (a log file, a pipe, a service's journal); nil for a
// nil w.
func NewStatus(w io.Writer) StatusSink {
	if w == nil {
		return nil
	}
	if f, ok := w.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		return &StatusLine{w: f}
	}
	return &PlainStatus{W: w, Every: DefaultPlainPeriod}
}

// PlainStatus writes the status as a plain line (no control characters)
// at most every Every, the first one Every after the capture starts.
type PlainStatus struct {
	W     io.Writer
	Every time.Duration
	// Now is the clock; nil is time.Now.
	Now func() time.Time

	mu   sync.Mutex
	last time.Time
}

// Show writes the line when Every has passed since the last one.
func (p *PlainStatus) Show(s Status) {
	p.mu.Lock()
	defer p.mu.Unlock()
	now := time.Now()
	if p.Now != nil {
		now = p.Now()
	}
	switch {
	case p.last.IsZero():
		p.last = now
		return
	case now.Sub(p.last) < p.Every:
		return
	}
	p.last = now
	fmt.Fprintln(p.W, "status "+s.format())
}

// Clear does nothing: plain lines are never redrawn.
func (p *PlainStatus) Clear() {}

// Show redraws the line.
func (l *StatusLine) Show(s Status) {
	l.mu.Lock()
	defer l.mu.Unlock()
	fmt.Fprintf(l.w, "\r%s\x1b[K", s.format())
	l.shown = true
}

// Clear erases the line, so that what is printed next starts clean.
func (l *StatusLine) Clear() {
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.shown {
		io.WriteString(l.w, "\r\x1b[K")
		l.shown = false
	}
}

// floor is the lowest level of the last FloorWindowS seconds, kept as a
// monotonic deque (the sliding-window minimum: each level enters once and
// leaves once).
type floor struct {
	t, db []float64
}

// add takes the level at time t (seconds) and returns how far it stands
// above the window's minimum; false until the window has a second of
// levels.
func (f *floor) add(t, db float64) (float64, bool) {
	if !finite(db) {
		return 0, false
	}
	for n := len(f.db); n > 0 && f.db[n-1] >= db; n = len(f.db) {
		f.t, f.db = f.t[:n-1], f.db[:n-1]
	}
	f.t, f.db = append(f.t, t), append(f.db, db)
	for len(f.t) > 1 && f.t[0] < t-FloorWindowS {
		f.t, f.db = f.t[1:], f.db[1:]
	}
	return db - f.db[0], t >= 1
}
