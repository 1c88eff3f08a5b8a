package heading

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"strconv"
	"strings"
	"time"
)

// NMEAProblem is a kind of line an NMEA reader skipped.
type NMEAProblem int

// The kinds of skipped lines, in the order NMEAStats.String lists them.
const (
	// ProblemGarbage: not a well-formed heading sentence (no '$', bad
	// fields, a time stamp that is neither seconds nor RFC 3339).
	ProblemGarbage NMEAProblem = iota
	// ProblemTooLong: a sentence longer than MaxNMEALen (82 bytes with
	// CR LF, NMEA 0183), or a line longer than the reader's line buffer
	// (MaxLineBytes), which is skipped up to its end without being held.
	ProblemTooLong
	// ProblemChecksum: the *hh checksum does not match.
	ProblemChecksum
	// ProblemNoChecksum: no *hh checksum (rejected unless allowed).
	ProblemNoChecksum
	// ProblemUntimed: a reading whose time is unknown: a bare sentence in
	// a file of time-stamped lines, bare sentences without a sentence
	// rate, or an RFC 3339 stamp when the capture start is unknown.
	ProblemUntimed
	// ProblemOtherRef: a heading without the wanted reference.
	ProblemOtherRef
	// ProblemStale: a reading not after the previous one.
	ProblemStale
	nProblems
)

var problemNames = [nProblems]string{"garbage", "too long", "bad checksum", "without checksum", "untimed", "without the wanted reference", "out of time order"}

// String names the kind as NMEAStats.String does.
func (p NMEAProblem) String() string {
	if p >= 0 && p < nProblems {
		return problemNames[p]
	}
	return "unknown problem"
}

// maxNotedLines is how many line numbers of each problem kind are kept.
const maxNotedLines = 8

// NMEAStats counts what an NMEA reader saw. Skipped lines are counted by
// kind, the first few line numbers of each kind and the first problem's
// description remembered for the message; they never stop the read. It is
// a plain value: copies are independent.
type NMEAStats struct {
	// Lines is the number of non-blank, non-comment lines seen.
	Lines int
	// Accepted is the number of heading readings delivered (for a Track:
	// samples added).
	Accepted int
	// Garbage counts ProblemGarbage lines.
	Garbage int
	// TooLong counts ProblemTooLong lines.
	TooLong int
	// BadChecksum counts sentences whose *hh did not match.
	BadChecksum int
	// NoChecksum counts sentences rejected for lacking a checksum.
	NoChecksum int
	// Untimed counts ProblemUntimed readings.
	Untimed int
	// Unsupported counts well-formed sentences of other types (GGA, RMC…):
	// expected traffic, not a problem, so no line numbers are kept.
	Unsupported int
	// OtherRef counts heading sentences without the wanted reference (an
	// HDM when a true track was asked for).
	OtherRef int
	// Stale counts readings whose time was not after the previous sample
	// (two sentences of one epoch, or a stamp that went backwards); the
	// first one is kept.
	Stale int
	// FirstProblem describes the first skipped line, with its line number.
	FirstProblem string

	noted [nProblems][maxNotedLines]int
}

func (s *NMEAStats) counter(p NMEAProblem) *int {
	switch p {
	case ProblemGarbage:
		return &s.Garbage
	case ProblemTooLong:
		return &s.TooLong
	case ProblemChecksum:
		return &s.BadChecksum
	case ProblemNoChecksum:
		return &s.NoChecksum
	case ProblemUntimed:
		return &s.Untimed
	case ProblemOtherRef:
		return &s.OtherRef
	}
	return &s.Stale
}

// Count returns the number of lines skipped for problem p.
func (s NMEAStats) Count(p NMEAProblem) int { return *s.counter(p) }

// Where returns the first line numbers (1-based, at most 8) skipped for
// problem p, in file order. A live stream numbers its lines from 1 too.
func (s NMEAStats) Where(p NMEAProblem) []int {
	var out []int
	for _, n := range s.noted[p] {
		if n == 0 {
			break
		}
		out = append(out, n)
	}
	return out
}

// Skipped returns the number of lines that did not become readings.
func (s NMEAStats) Skipped() int {
	return s.Garbage + s.TooLong + s.BadChecksum + s.NoChecksum + s.Untimed + s.Unsupported + s.OtherRef + s.Stale
}

// Problems returns the number of lines that failed a check (garbage, too
// long, bad or missing checksum): the ones worth a warning on a live link,
// unlike other sentence types or the other north.
func (s NMEAStats) Problems() int {
	return s.Garbage + s.TooLong + s.BadChecksum + s.NoChecksum
}

// String summarises the counts in one line: the lines seen and accepted,
// then each kind of skipped line with its count and first line numbers,
// then the first problem, e.g. "1800 lines: 1798 accepted, 1 garbage (line
// 17), 1 bad checksum (line 903); first problem: line 17: …".
func (s NMEAStats) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%d lines: %d accepted", s.Lines, s.Accepted)
	for p := NMEAProblem(0); p < nProblems; p++ {
		n := s.Count(p)
		if p == ProblemOtherRef && s.Unsupported > 0 {
			fmt.Fprintf(&b, ", %d other sentence types", s.Unsupported)
		}
		if n == 0 {
			continue
		}
		fmt.Fprintf(&b, ", %d %s", n, p)
		if w := s.Where(p); len(w) > 0 {
			nums := make([]string, len(w))
			for i, l := range w {
				nums[i] = strconv.Itoa(l)
			}
			word := "line"
			if n > 1 {
				word = "lines"
			}
			more := ""
			if n > len(w) {
				more = fmt.Sprintf(" and %d more", n-len(w))
			}
			fmt.Fprintf(&b, " (%s %s%s)", word, strings.Join(nums, ", "), more)
		}
	}
	if s.FirstProblem != "" {
		b.WriteString("; first problem: " + s.FirstProblem)
	}
	return b.String()
}

// add counts one skipped line of kind p at lineNo, with what for the
// first problem's description.
func (s *NMEAStats) add(p NMEAProblem, lineNo int, what string) {
	*s.counter(p)++
	for i := range s.noted[p] {
		if s.noted[p][i] == 0 {
			s.noted[p][i] = lineNo
			break
		}
	}
	if s.FirstProblem == "" {
		s.FirstProblem = fmt.Sprintf("line %d: %s", lineNo, what)
	}
}

// merge adds o's counts and line numbers to s (line numbers in order).
func (s *NMEAStats) merge(o NMEAStats) {
	s.Lines += o.Lines
	s.Accepted += o.Accepted
	s.Unsupported += o.Unsupported
	for p := NMEAProblem(0); p < nProblems; p++ {
		*s.counter(p) += o.Count(p)
		all := append(s.Where(p), o.Where(p)...)
		sortInts(all)
		s.noted[p] = [maxNotedLines]int{}
		copy(s.noted[p][:], all)
	}
	if s.FirstProblem == "" {
		s.FirstProblem = o.FirstProblem
	} else if o.FirstProblem != "" && firstLine(o.FirstProblem) < firstLine(s.FirstProblem) {
		s.FirstProblem = o.FirstProblem
	}
}

func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return fmt.Sprintf("%d %s", n, many)
}

func sortInts(a []int) {
	for i := 1; i < len(a); i++ {
		for j := i; j > 0 && a[j] < a[j-1]; j-- {
			a[j], a[j-1] = a[j-1], a[j]
		}
	}
}

// firstLine reads the number of a "line N: ..." description.
func firstLine(desc string) int {
	var n int
	fmt.Sscanf(desc, "line %d:", &n)
	return n
}

// classify parses one sentence and counts a failure; ok means r is a
// heading reading (not yet counted as accepted).
func (s *NMEAStats) classify(lineNo int, sentence string, allowNoChecksum bool) (r Reading, ok bool) {
	if n := len(strings.TrimRight(sentence, "\r\n ")) + 2; n > MaxNMEALen {
		s.add(ProblemTooLong, lineNo, fmt.Sprintf("sentence of %d bytes with CR LF, longer than NMEA 0183's %d", n, MaxNMEALen))
		return r, false
	}
	r, err := parseNMEA(sentence, !allowNoChecksum)
	switch {
	case err == nil:
		return r, true
	case errors.Is(err, ErrNMEAChecksum):
		s.add(ProblemChecksum, lineNo, err.Error())
	case errors.Is(err, ErrNMEANoChecksum):
		s.add(ProblemNoChecksum, lineNo, err.Error())
	case errors.Is(err, ErrNMEAUnsupported):
		s.Unsupported++ // expected traffic, not a problem worth naming
	default:
		s.add(ProblemGarbage, lineNo, err.Error())
	}
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

// MaxLineBytes bounds one line of a heading log or NMEA file, or of a live
// NMEA stream, held in memory: an NMEA sentence is at most 82 bytes
// (NMEA 0183) and a time stamp in front adds at most about 40, so 4096
// leaves room for anything real. A longer line is skipped to its end
// without being held and counted as ProblemTooLong.
const MaxLineBytes = 4096

// maxLineBytes is the package's name for MaxLineBytes.
const maxLineBytes = MaxLineBytes

// lineReader reads lines of at most maxLineBytes from a stream, in bounded
// memory, never waiting for the end of an over-long line in one call.
type lineReader struct {
	br       *bufio.Reader
	skipping bool // inside a line longer than the buffer
}

func newLineReader(r io.Reader) *lineReader {
	return &lineReader{br: bufio.NewReaderSize(r, maxLineBytes)}
}

// lineKind says what lineReader.next returned.
type lineKind int

const (
	lineWhole   lineKind = iota // a whole line (without a final newline at EOF)
	lineTooLong                 // the first maxLineBytes of a longer line
	lineRest                    // more of a long line, discarded; no text
)

// next returns the next line or piece of an over-long line. At the end
// of the stream it returns io.EOF (after delivering a last line without a
// newline); other errors are the reader's.
func (l *lineReader) next() (string, lineKind, error) {
	b, err := l.br.ReadSlice('\n')
	if err == bufio.ErrBufferFull {
		if l.skipping {
			return "", lineRest, nil
		}
		l.skipping = true
		return string(b), lineTooLong, nil
	}
	if l.skipping {
		l.skipping = false
		if err != nil && err != io.EOF {
			return "", lineRest, err
		}
		if err == io.EOF && len(b) == 0 {
			return "", lineRest, io.EOF
		}
		return "", lineRest, nil
	}
	if err != nil && err != io.EOF {
		return "", lineWhole, err
	}
	if err == io.EOF && len(b) == 0 {
		return "", lineWhole, io.EOF
	}
	return string(b), lineWhole, nil
}

// NMEAFileOptions configures ReadNMEA.
type NMEAFileOptions struct {
	// Ref selects which heading goes into the track: True takes HDT and
	// HDG with variation; Magnetic takes HDM and HDG. Sentences without it
	// are counted in OtherRef and skipped.
	Ref Ref
	// CaptureStart converts RFC 3339 line stamps to seconds; lines with
	// such stamps are untimed without it.
	CaptureStart time.Time
	// PaceHz is the sentence rate for a file of bare sentences (the
	// --nmea-rate flag): the k-th sentence line (k from 0, counting every
	// line that starts with '$', valid or not) is at StartS + k/PaceHz
	// seconds. Needed for bare sentences, ignored for stamped ones; when
	// given it must be positive and at most MaxPaceHz.
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

// MaxPaceHz bounds NMEAFileOptions.PaceHz: 100 sentences a second, well
// above the 1–20 Hz of heading sensors (common practice) and of what
// NMEA 0183's 4800 baud carries (about 10 short sentences a second).
const MaxPaceHz = 100

// ReadNMEA reads a file of NMEA 0183 heading sentences into a Track.
//
// Each non-blank line that does not start with '#' is either
//   - "<time> <sentence>": time is seconds from the capture start or an
//     RFC 3339 stamp (converted with opts.CaptureStart), separated from the
//     sentence by spaces or a tab; or
//   - "<sentence>" alone (a bare sentence, starting with '$'), timed by
//     opts.PaceHz and opts.StartS.
//
// Bad lines are skipped and counted by kind with their line numbers (see
// NMEAStats): garbage, too long (over 82 bytes per NMEA 0183, or over
// MaxLineBytes, which is skipped without being held, so any line costs
// bounded memory), bad or missing checksum, untimed, other reference,
// out of time order (a stamp not after the previous reading: the earlier
// one is kept), and other sentence types. One summary warning goes to
// opts.Logger when a track is returned (a refusal's error carries the
// summary instead). The file's form follows its readings: when any stamped line
// gives a reading, the track is the stamped readings and bare sentences
// are counted untimed; otherwise bare readings are paced by opts.PaceHz.
// The file is refused only when no reading is left, with an error that
// says what was seen and which flag or change would help.
func ReadNMEA(r io.Reader, opts NMEAFileOptions) (*Track, NMEAStats, error) {
	name := opts.Name
	if name == "" {
		name = "NMEA file"
	}
	if opts.Ref != True && opts.Ref != Magnetic {
		return nil, NMEAStats{}, fmt.Errorf("%s: unknown reference %d", name, int(opts.Ref))
	}
	if opts.PaceHz != 0 && !(opts.PaceHz > 0 && opts.PaceHz <= MaxPaceHz) {
		return nil, NMEAStats{}, fmt.Errorf("%s: sentence rate %v Hz (--nmea-rate) is outside (0, %d] Hz", name, opts.PaceHz, MaxPaceHz)
	}
	if !finite(opts.StartS) {
		return nil, NMEAStats{}, fmt.Errorf("%s: start %v s is not finite", name, opts.StartS)
	}
	type bareReading struct {
		k, line int
		deg     float64
	}
	var (
		stamped, bare NMEAStats // problems of lines of each form
		track         = &Track{Ref: opts.Ref}
		bareOK        []bareReading
		noStartLines  int
	)
	lr := newLineReader(r)
	lineNo, bareK := 0, 0
	for {
		raw, kind, err := lr.next()
		if err != nil && err != io.EOF {
			return nil, NMEAStats{}, fmt.Errorf("%s: read after line %d: %w", name, lineNo, err)
		}
		if kind == lineRest {
			if err == io.EOF {
				break
			}
			continue
		}
		if err == io.EOF && kind == lineWhole && raw == "" {
			break
		}
		lineNo++
		line := strings.TrimSpace(raw)
		if kind == lineTooLong {
			st := &stamped
			if strings.HasPrefix(line, "$") {
				st = &bare
				bareK++ // a bad line still takes its slot
			}
			st.Lines++
			st.add(ProblemTooLong, lineNo, fmt.Sprintf("line longer than %d bytes, skipped to its end", maxLineBytes))
			continue
		}
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		if strings.HasPrefix(line, "$") {
			k := bareK
			bareK++
			bare.Lines++
			if rd, ok := bare.classify(lineNo, line, opts.AllowMissingChecksum); ok {
				if deg, has := rd.Heading(opts.Ref); has {
					bareOK = append(bareOK, bareReading{k: k, line: lineNo, deg: deg})
				} else {
					bare.add(ProblemOtherRef, lineNo, fmt.Sprintf("%s%s has no %s heading", rd.Talker, rd.Type, opts.Ref))
				}
			}
			continue
		}
		stamped.Lines++
		i := strings.IndexAny(line, " \t")
		if i < 0 {
			stamped.add(ProblemGarbage, lineNo, "neither a sentence nor \"<time> <sentence>\"")
			continue
		}
		ts, perr := parseTime(line[:i], opts.CaptureStart)
		if perr != nil {
			if errors.Is(perr, errNoCaptureStart) {
				noStartLines++
				stamped.add(ProblemUntimed, lineNo, perr.Error())
			} else {
				stamped.add(ProblemGarbage, lineNo, perr.Error())
			}
			continue
		}
		rd, ok := stamped.classify(lineNo, strings.TrimSpace(line[i:]), opts.AllowMissingChecksum)
		if !ok {
			continue
		}
		deg, has := rd.Heading(opts.Ref)
		switch {
		case !has:
			stamped.add(ProblemOtherRef, lineNo, fmt.Sprintf("%s%s has no %s heading", rd.Talker, rd.Type, opts.Ref))
		case len(track.Samples) > 0 && ts <= track.Samples[len(track.Samples)-1].T:
			stamped.add(ProblemStale, lineNo, fmt.Sprintf("time %.6f s is not after the previous reading's %.6f s", ts, track.Samples[len(track.Samples)-1].T))
		default:
			track.Samples = append(track.Samples, Sample{T: ts, Deg: deg})
			stamped.Accepted++
		}
	}
	var st NMEAStats
	st.merge(stamped)
	useBare := len(track.Samples) == 0 && len(bareOK) > 0 && opts.PaceHz > 0
	if useBare {
		for _, b := range bareOK {
			track.Samples = append(track.Samples, Sample{T: opts.StartS + float64(b.k)/opts.PaceHz, Deg: b.deg})
		}
		bare.Accepted = len(bareOK)
	} else {
		why := "a bare sentence in a file of time-stamped lines"
		if opts.PaceHz == 0 {
			why = "a bare sentence, and no sentence rate (--nmea-rate) was given"
		}
		for _, b := range bareOK {
			bare.add(ProblemUntimed, b.line, why)
		}
	}
	st.merge(bare)
	if len(track.Samples) == 0 { // the error carries the summary
		advice := ""
		switch {
		case len(bareOK) > 0:
			advice = fmt.Sprintf(": %s no time: give the rate they were logged at with --nmea-rate HZ, or write each line as \"<seconds or RFC 3339> <sentence>\"", plural(len(bareOK), "bare sentence carries", "bare sentences carry"))
		case noStartLines > 0:
			advice = ": the lines' RFC 3339 times need the recording's start time: give --start (UTC of its first sample) or write seconds from the capture start"
		case st.NoChecksum > 0:
			advice = ": this reader requires the *hh checksum (NMEA 0183), so that a heading corrupted on the line cannot pass as valid"
		}
		return nil, st, fmt.Errorf("%s: no usable %s heading sentences (%s)%s", name, opts.Ref, st, advice)
	}
	st.warn(opts.Logger, name)
	return track, st, nil
}
