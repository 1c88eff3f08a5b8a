package capture

import (
	"fmt"
	"io"
	"math"
	"os"
	"strings"
	"sync"

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

// format is the status in one line of at most 80 columns, for example
//
//	level [#########...........]  -33.0 dBFS  rotator  72.4°  12.0 s of 27.1 s
func (s Status) format() string {
	var b strings.Builder
	lv := s.LevelDBFS
	if !finite(lv) {
		lv = minLevelDBFS
	}
	n := int(math.Round((lv - barFloorDB) / -barFloorDB * barCells))
	n = max(0, min(barCells, n))
	fmt.Fprintf(&b, "level [%s%s] %6.1f dBFS", strings.Repeat("#", n), strings.Repeat(".", barCells-n), lv)
	if s.Clipping {
		b.WriteString(" CLIPPING")
	}
	if s.Source != "" {
		if s.HeadingKnown && finite(s.HeadingDeg) {
			h := math.Round(s.HeadingDeg*10) / 10
			if s.Source != "rotator" && h >= 360 {
				h -= 360 // 359.96° shows as 0.0°; a rotator's own numbers are not wrapped
			}
			fmt.Fprintf(&b, "  %s %6.1f°", s.Source, h)
		} else {
			fmt.Fprintf(&b, "  %s     --", s.Source)
		}
	}
	if s.TotalS > 0 {
		fmt.Fprintf(&b, "  %.1f s of %.1f s", s.ElapsedS, s.TotalS)
	} else {
		fmt.Fprintf(&b, "  %.1f s", s.ElapsedS)
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

// NewStatusLine returns a StatusLine on f when f is a terminal
// (golang.org/x/term IsTerminal), and nil otherwise: a capture whose
// output goes to a file or a pipe stays quiet.
func NewStatusLine(f *os.File) StatusSink {
	if f == nil || !term.IsTerminal(int(f.Fd())) {
		return nil
	}
	return &StatusLine{w: f}
}

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
