package heading

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"
)

// ReadLog reads a heading log in CSV: one "time,heading_deg" row per line.
//
//   - An optional header row whose first field starts with "time" or
//     "second" and second with "heading" (case-insensitive) may come first. Blank lines
//     and lines starting with '#' are skipped anywhere.
//
//   - time is either seconds from the capture start (a decimal number, may
//     be negative) or an RFC 3339 timestamp (e.g. 2025-06-01T10:00:00.5Z),
//     converted to seconds with captureStart; an RFC 3339 time with a zero
//     captureStart is an error. The two forms may be mixed.
//
//   - heading_deg is degrees clockwise from the ref north in [0, 360];
//     360 is read as 0 (some compasses print 360.0 for north). A negative
//     value, one above 360, NaN or Inf is an error naming the line: a log
//     that writes -10 for 350 is taken as corrupt rather than guessed at.
//
//   - Times must strictly increase; a row at or before the previous one is
//     an error naming the line. Holes are allowed (see Track.Gaps).
//
//   - A file with no data rows is an error.
//
//   - A time more than maxLogOffsetS from the capture start is an error:
//     no heading log of a recording spans years, and such a value is a
//     corrupt row (or a Unix time written as seconds).
//
// Every error names the line number (1-based).
func ReadLog(r io.Reader, captureStart time.Time, ref Ref) (*Track, error) {
	if ref != True && ref != Magnetic {
		return nil, fmt.Errorf("heading log: unknown reference %d", int(ref))
	}
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 256), maxLineBytes)
	tr := &Track{Ref: ref}
	lineNo := 0
	sawContent := false
	for sc.Scan() {
		lineNo++
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		if lineNo == 1 {
			line = strings.TrimPrefix(line, "\ufeff") // UTF-8 byte-order mark
		}
		fields := strings.Split(line, ",")
		if len(fields) != 2 {
			return nil, fmt.Errorf("heading log line %d: want 2 comma-separated fields (time,heading_deg), got %d", lineNo, len(fields))
		}
		f0 := strings.TrimSpace(fields[0])
		f1 := strings.TrimSpace(fields[1])
		if !sawContent {
			sawContent = true
			if isHeader(f0, f1) {
				continue
			}
		}
		ts, err := parseTime(f0, captureStart)
		if err != nil {
			return nil, fmt.Errorf("heading log line %d: %w", lineNo, err)
		}
		deg, err := parseHeadingDeg(f1)
		if err != nil {
			return nil, fmt.Errorf("heading log line %d: %w", lineNo, err)
		}
		if n := len(tr.Samples); n > 0 && ts <= tr.Samples[n-1].T {
			return nil, fmt.Errorf("heading log line %d: time %.6f s is not after the previous row's %.6f s (rows must be in time order)", lineNo, ts, tr.Samples[n-1].T)
		}
		tr.Samples = append(tr.Samples, Sample{T: ts, Deg: deg})
	}
	if err := sc.Err(); err != nil {
		if errors.Is(err, bufio.ErrTooLong) {
			return nil, fmt.Errorf("heading log line %d: line longer than %d bytes", lineNo+1, maxLineBytes)
		}
		return nil, fmt.Errorf("heading log: read after line %d: %w", lineNo, err)
	}
	if len(tr.Samples) == 0 {
		return nil, errors.New("heading log: no data rows (want lines of time,heading_deg)")
	}
	return tr, nil
}

func isHeader(f0, f1 string) bool {
	t := strings.ToLower(f0)
	return (strings.HasPrefix(t, "time") || strings.HasPrefix(t, "second")) && strings.HasPrefix(strings.ToLower(f1), "heading")
}

// maxLogOffsetS bounds a heading log's time from the capture start: 1e8 s
// is a little over three years.
const maxLogOffsetS = 1e8

var errNoCaptureStart = errors.New("RFC 3339 time but the capture start time is unknown; give the capture start or write seconds from it")

// parseTime reads seconds from the capture start or an RFC 3339 stamp.
func parseTime(s string, captureStart time.Time) (float64, error) {
	if s == "" {
		return 0, errors.New("empty time")
	}
	if v, err := strconv.ParseFloat(s, 64); err == nil {
		if !finite(v) {
			return 0, fmt.Errorf("time %q is not a finite number of seconds", s)
		}
		if math.Abs(v) > maxLogOffsetS {
			return 0, fmt.Errorf("time %s s is more than %.0e s (about 3 years) from the capture start: not a time of this recording", s, maxLogOffsetS)
		}
		return v, nil
	}
	if strings.ContainsAny(s, "T:") {
		t, err := time.Parse(time.RFC3339Nano, s)
		if err != nil {
			return 0, fmt.Errorf("time %q is neither seconds nor RFC 3339: %w", s, err)
		}
		if captureStart.IsZero() {
			return 0, fmt.Errorf("time %q: %w", s, errNoCaptureStart)
		}
		d := t.Sub(captureStart).Seconds()
		if math.Abs(d) > maxLogOffsetS {
			return 0, fmt.Errorf("time %s is more than %.0e s (about 3 years) from the capture start %s: not a time of this recording", s, maxLogOffsetS, captureStart.UTC().Format(time.RFC3339))
		}
		return d, nil
	}
	return 0, fmt.Errorf("time %q is neither seconds nor RFC 3339", s)
}

// parseHeadingDeg reads a heading in [0, 360], mapping 360 to 0.
func parseHeadingDeg(s string) (float64, error) {
	if s == "" {
		return 0, errors.New("empty heading")
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return 0, fmt.Errorf("heading %q is not a number", s)
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("heading %q is not finite", s)
	}
	if v < 0 || v > 360 {
		return 0, fmt.Errorf("heading %s° is outside [0, 360]", s)
	}
	if v == 360 {
		v = 0
	}
	return v, nil
}

// WriteLog writes the track's samples as a heading log ReadLog reads back:
// a "time_s,heading_deg" header, then seconds from the capture start (µs
// resolution, so close readings keep their order) and degrees (0.001°).
// It writes the samples as they are: the track's MountOffsetDeg and LagS
// are not applied, and its reference (true or magnetic) is the reader's to
// know.
func WriteLog(w io.Writer, tr *Track) error {
	bw := bufio.NewWriter(w)
	bw.WriteString("time_s,heading_deg\n")
	for _, s := range tr.Samples {
		fmt.Fprintf(bw, "%.6f,%.3f\n", s.T, s.Deg)
	}
	return bw.Flush()
}
