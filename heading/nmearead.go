package heading

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"strings"
	"time"
)

// NMEAStats counts what an NMEA reader saw. Skipped lines are counted, the
// first of each kind remembered for the message, and never stop the read.
type NMEAStats struct {
	// Lines is the number of non-blank, non-comment lines seen.
	Lines int
	// Accepted is the number of heading readings delivered (for a Track:
	// samples added).
	Accepted int
	// Garbage counts lines that are not a well-formed NMEA heading
	// sentence: no '$', too long, bad fields, unparseable timestamp.
	Garbage int
	// BadChecksum counts sentences whose *hh did not match.
	BadChecksum int
	// NoChecksum counts sentences rejected for lacking a checksum.
	NoChecksum int
	// Unsupported counts well-formed sentences of other types (GGA, RMC…).
	Unsupported int
	// OtherRef counts heading sentences without the wanted reference (an
	// HDM when a true track was asked for).
	OtherRef int
	// Stale counts readings whose time was not after the previous sample
	// (two sentences of one epoch, or a stamp that went backwards on a live
	// source); the first one is kept.
	Stale int
	// FirstProblem describes the first skipped line, with its line number.
	FirstProblem string
}

// Skipped returns the number of lines that did not become readings.
func (s NMEAStats) Skipped() int {
	return s.Garbage + s.BadChecksum + s.NoChecksum + s.Unsupported + s.OtherRef + s.Stale
}

// String summarises the counts in one line.
func (s NMEAStats) String() string {
	str := fmt.Sprintf("%d lines: %d accepted, %d garbage, %d bad checksum, %d without checksum, %d other sentence types, %d without the wanted reference, %d out of time order",
		s.Lines, s.Accepted, s.Garbage, s.BadChecksum, s.NoChecksum, s.Unsupported, s.OtherRef, s.Stale)
	if s.FirstProblem != "" {
		str += "; first problem: " + s.FirstProblem
	}
	return str
}

func (s *NMEAStats) note(lineNo int, what string) {
	if s.FirstProblem == "" {
		s.FirstProblem = fmt.Sprintf("line %d: %s", lineNo, what)
	}
}

// classify parses one sentence and counts the outcome; ok means r is a
// heading reading.
func (s *NMEAStats) classify(lineNo int, sentence string, allowNoChecksum bool) (r Reading, ok bool) {
	r, err := parseNMEA(sentence, !allowNoChecksum)
	switch {
	case err == nil:
		return r, true
	case errors.Is(err, ErrNMEAChecksum):
		s.BadChecksum++
	case errors.Is(err, ErrNMEANoChecksum):
		s.NoChecksum++
	case errors.Is(err, ErrNMEAUnsupported):
		s.Unsupported++
		return r, false // expected traffic, not a problem worth naming
	default:
		s.Garbage++
	}
	s.note(lineNo, err.Error())
	return r, false
}

// warn logs the summary when anything was skipped.
func (s NMEAStats) warn(log *slog.Logger, source string) {
	if s.Skipped() == 0 {
		return
	}
	if log == nil {
		log = slog.Default()
	}
	log.Warn("heading: skipped NMEA lines", "source", source, "skipped", s.Skipped(), "summary", s.String())
}

// NMEAFileOptions configures ReadNMEA.
type NMEAFileOptions struct {
	// Ref selects which heading goes into the track: True takes HDT and
	// HDG with variation; Magnetic takes HDM and HDG. Sentences without it
	// are counted in OtherRef and skipped.
	Ref Ref
	// CaptureStart converts RFC 3339 line stamps to seconds; required when
	// the file uses them.
	CaptureStart time.Time
	// PaceHz is the sentence rate for a file of bare sentences: the k-th
	// sentence line (k from 0, counting every line that starts with '$',
	// valid or not) is at StartS + k/PaceHz seconds. Required for bare
	// sentences, ignored for stamped ones.
	PaceHz float64
	// StartS is the capture time of the first bare sentence, in seconds.
	StartS float64
	// AllowMissingChecksum accepts sentences without *hh.
	AllowMissingChecksum bool
	// Name names the input in messages; "NMEA file" when empty.
	Name string
	// Logger receives the skipped-lines summary; slog.Default when nil.
	Logger *slog.Logger
}

// ReadNMEA reads a file of NMEA 0183 heading sentences into a Track.
//
// Each non-blank line that does not start with '#' is either
//   - "<time> <sentence>": time is seconds from the capture start or an
//     RFC 3339 stamp (converted with opts.CaptureStart), separated from the
//     sentence by spaces or a tab; or
//   - "<sentence>" alone, timed by opts.PaceHz and opts.StartS.
//
// A file must use one form throughout; mixing them is an error naming the
// line, and so is a stamp earlier than the previous line's (an equal stamp
// keeps the first sentence and counts the rest as Stale). Garbage lines,
// bad or missing checksums, other sentence types and readings without the
// wanted reference are counted and skipped, with one summary warning on
// opts.Logger. If no reading is accepted the error says what was seen.
func ReadNMEA(r io.Reader, opts NMEAFileOptions) (*Track, NMEAStats, error) {
	var st NMEAStats
	name := opts.Name
	if name == "" {
		name = "NMEA file"
	}
	if opts.Ref != True && opts.Ref != Magnetic {
		return nil, st, fmt.Errorf("%s: unknown reference %d", name, int(opts.Ref))
	}
	br := bufio.NewReaderSize(r, maxLineBytes)
	tr := &Track{Ref: opts.Ref}
	const (
		modeUnknown = iota
		modeStamped
		modeBare
	)
	mode := modeUnknown
	lineNo, bareK := 0, 0
	for {
		raw, tooLong, err := readLine(br)
		if err != nil && err != io.EOF {
			return nil, st, fmt.Errorf("%s: read after line %d: %w", name, lineNo, err)
		}
		if err == io.EOF {
			break
		}
		lineNo++
		line := strings.TrimSpace(raw)
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		st.Lines++
		var ts float64
		var sentence string
		if tooLong {
			st.Garbage++
			st.note(lineNo, fmt.Sprintf("line longer than %d bytes", maxLineBytes))
			if mode == modeBare {
				bareK++
			}
			goto next
		}
		if strings.HasPrefix(line, "$") {
			if mode == modeStamped {
				return nil, st, fmt.Errorf("%s line %d: a bare sentence in a file of time-stamped lines", name, lineNo)
			}
			if mode == modeUnknown && !(opts.PaceHz > 0 && finite(opts.PaceHz) && finite(opts.StartS)) {
				return nil, st, fmt.Errorf("%s line %d: bare sentence without a time stamp; give a sentence rate (PaceHz) or write lines as \"<seconds or RFC 3339> <sentence>\"", name, lineNo)
			}
			mode = modeBare
			ts = opts.StartS + float64(bareK)/opts.PaceHz
			bareK++
			sentence = line
		} else {
			i := strings.IndexAny(line, " \t")
			if i < 0 {
				st.Garbage++
				st.note(lineNo, "neither a sentence nor \"<time> <sentence>\"")
				goto next
			}
			var perr error
			ts, perr = parseTime(line[:i], opts.CaptureStart)
			if perr != nil {
				if errors.Is(perr, errNoCaptureStart) {
					return nil, st, fmt.Errorf("%s line %d: %w", name, lineNo, perr)
				}
				st.Garbage++
				st.note(lineNo, perr.Error())
				goto next
			}
			if mode == modeBare {
				return nil, st, fmt.Errorf("%s line %d: a time-stamped line in a file of bare sentences", name, lineNo)
			}
			mode = modeStamped
			sentence = strings.TrimSpace(line[i:])
			if n := len(tr.Samples); n > 0 && ts < tr.Samples[n-1].T {
				return nil, st, fmt.Errorf("%s line %d: time %.6f s is before the previous line's %.6f s (lines must be in time order)", name, lineNo, ts, tr.Samples[n-1].T)
			}
		}
		if rd, ok := st.classify(lineNo, sentence, opts.AllowMissingChecksum); ok {
			deg, has := rd.Heading(opts.Ref)
			switch {
			case !has:
				st.OtherRef++
				st.note(lineNo, fmt.Sprintf("%s%s has no %s heading", rd.Talker, rd.Type, opts.Ref))
			case len(tr.Samples) > 0 && ts <= tr.Samples[len(tr.Samples)-1].T:
				st.Stale++
			default:
				tr.Samples = append(tr.Samples, Sample{T: ts, Deg: deg})
				st.Accepted++
			}
		}
	next:
	}
	st.warn(opts.Logger, name)
	if len(tr.Samples) == 0 {
		return nil, st, fmt.Errorf("%s: no usable %s heading sentences (%s)", name, opts.Ref, st)
	}
	return tr, st, nil
}

// readLine returns the next '\n'-terminated line (a final line without
// '\n' too); a line longer than the reader's buffer is discarded up to its
// newline and reported as tooLong. After the last line it returns io.EOF.
func readLine(br *bufio.Reader) (line string, tooLong bool, err error) {
	b, err := br.ReadSlice('\n')
	if err == bufio.ErrBufferFull {
		for err == bufio.ErrBufferFull {
			_, err = br.ReadSlice('\n')
		}
		if err != nil && err != io.EOF {
			return "", true, err
		}
		return "", true, nil
	}
	if err != nil && err != io.EOF {
		return "", false, err
	}
	if err == io.EOF && len(b) == 0 {
		return "", false, io.EOF
	}
	return string(b), false, nil
}
