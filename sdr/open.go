package sdr

import (
	"archive/tar"
	"crypto/sha512"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"
)

// maxMetaBytes bounds how much metadata is read into memory.
const maxMetaBytes = 16 << 20

// MetaSource is implemented by sources opened from SigMF: Meta returns the
// parsed metadata (do not modify it).
type MetaSource interface {
	Meta() *Meta
}

// Open opens a recording by its file name:
//
//   - NAME.sigmf-meta or NAME.sigmf-data: the SigMF pair (both must exist);
//   - NAME.sigmf: a SigMF archive (POSIX tar holding one recording's meta and
//     data); the data is streamed from inside the tar, never extracted;
//   - NAME.wav: 2-channel WAV IQ (channel 0 = I, 1 = Q) in 8-bit unsigned,
//     16-bit signed or 32-bit float PCM; the rate comes from the header;
//   - anything else: raw interleaved IQ, which needs raw.SampleRate (--rate)
//     and raw.Format (--format).
//
// For SigMF and WAV, raw supplies values the file lacks (rate, centre
// frequency, start time) and is checked against values it has: a
// difference is an error, never silently overridden. Rates and frequencies
// agree when within 1e-9 relative; times when within 1 µs. Errors are one
// line, wrapped with the path. Every source streams with a fixed buffer.
// SigMF sources also implement MetaSource; cu8 sources implement CU8Reader.
func Open(path string, raw RawParams) (Source, error) {
	lower := strings.ToLower(path)
	switch {
	case strings.HasSuffix(lower, ".sigmf-meta"), strings.HasSuffix(lower, ".sigmf-data"):
		return openPair(path[:len(path)-len(".sigmf-meta")], raw)
	case strings.HasSuffix(lower, ".sigmf"):
		return openArchive(path, raw)
	case strings.HasSuffix(lower, ".sigmf-collection"):
		return nil, fmt.Errorf("%s: SigMF collections are not supported: open one recording's .sigmf-meta", path)
	case strings.HasSuffix(lower, ".wav"):
		return openWAV(path, raw)
	}
	return openRaw(path, raw)
}

type sigmfSource struct {
	*streamSource
	meta *Meta
}

func (s *sigmfSource) Meta() *Meta { return s.meta }

func openPair(base string, raw RawParams) (Source, error) {
	metaPath := base + ".sigmf-meta"
	mb, err := readLimited(metaPath)
	if err != nil {
		return nil, err
	}
	meta, err := ParseMeta(mb)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", metaPath, err)
	}
	dataPath := base + ".sigmf-data"
	if meta.Global.Dataset != "" {
		if strings.ContainsAny(meta.Global.Dataset, `/\`) {
			return nil, fmt.Errorf("%s: core:dataset %q must be a file name in the same directory", metaPath, meta.Global.Dataset)
		}
		dataPath = filepath.Join(filepath.Dir(base), meta.Global.Dataset)
	}
	fh, err := os.Open(dataPath)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("%s: missing data file %s (a .sigmf-meta needs its data file beside it)", metaPath, filepath.Base(dataPath))
		}
		return nil, err
	}
	st, err := fh.Stat()
	if err != nil {
		fh.Close()
		return nil, err
	}
	s, err := newSigMFSource(meta, fh, fh, st.Size(), dataPath, raw)
	if err != nil {
		fh.Close()
		return nil, err
	}
	return s, nil
}

func readLimited(path string) ([]byte, error) {
	fh, err := os.Open(path)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, fmt.Errorf("%s: no such metadata file", path)
		}
		return nil, err
	}
	defer fh.Close()
	b, err := io.ReadAll(io.LimitReader(fh, maxMetaBytes+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if len(b) > maxMetaBytes {
		return nil, fmt.Errorf("%s: metadata larger than %d MiB: not a SigMF metadata file?", path, maxMetaBytes>>20)
	}
	return b, nil
}

// newSigMFSource checks meta against what nullseek reads and against raw,
// then streams size bytes of data from r.
func newSigMFSource(meta *Meta, r io.Reader, closer io.Closer, size int64, name string, raw RawParams) (*sigmfSource, error) {
	g := &meta.Global
	if g.NumChannels > 1 {
		return nil, fmt.Errorf("%s: core:num_channels is %d: multi-channel recordings are not supported (split them into one recording per channel)", name, g.NumChannels)
	}
	if g.MetadataOnly && g.Dataset == "" {
		return nil, fmt.Errorf("%s: core:metadata_only is true: this recording carries no samples", name)
	}
	f, err := parseFormat(g.Datatype)
	if err != nil {
		return nil, fmt.Errorf("%s: core:datatype: %w", name, err)
	}
	if raw.Format != "" && raw.Format != g.Datatype {
		return nil, fmt.Errorf("%s: --format %s conflicts with core:datatype %s in the metadata", name, raw.Format, g.Datatype)
	}
	info := Info{Name: name}
	switch {
	case g.SampleRate != nil:
		info.SampleRate = *g.SampleRate
		if err := checkRate(info.SampleRate); err != nil {
			return nil, fmt.Errorf("%s: core:sample_rate: %w", name, err)
		}
		if raw.SampleRate != 0 && !close9(raw.SampleRate, info.SampleRate) {
			return nil, fmt.Errorf("%s: --rate %v Hz conflicts with core:sample_rate %v Hz in the metadata", name, raw.SampleRate, info.SampleRate)
		}
	case raw.SampleRate != 0:
		if err := checkRate(raw.SampleRate); err != nil {
			return nil, fmt.Errorf("%s: --rate: %w", name, err)
		}
		info.SampleRate = raw.SampleRate
	default:
		return nil, fmt.Errorf("%s: the metadata has no core:sample_rate: give --rate in Hz", name)
	}
	for i, c := range meta.Captures {
		if c.Frequency != nil {
			if err := checkCenter(*c.Frequency); err != nil {
				return nil, fmt.Errorf("%s: captures[%d] core:frequency: %w", name, i, err)
			}
		}
	}
	if err := checkCenter(raw.CenterHz); err != nil {
		return nil, fmt.Errorf("%s: --center: %w", name, err)
	}
	var first Capture
	if len(meta.Captures) > 0 {
		first = meta.Captures[0]
	}
	if first.Frequency != nil {
		info.CenterHz = *first.Frequency
		if raw.CenterHz != 0 && !close9(raw.CenterHz, info.CenterHz) {
			return nil, fmt.Errorf("%s: --center %v Hz conflicts with core:frequency %v Hz in the metadata", name, raw.CenterHz, info.CenterHz)
		}
	} else {
		info.CenterHz = raw.CenterHz
	}

	// Header bytes before segments and trailing bytes are not samples:
	// each, and their sum, must fit in the data (checked one at a time,
	// so no sum of huge uint64 values can wrap around).
	var skips []skipPoint
	if g.TrailingBytes > uint64(size) {
		return nil, fmt.Errorf("%s: core:trailing_bytes %d exceeds the data size %d", name, g.TrailingBytes, size)
	}
	nonSample := int64(g.TrailingBytes)
	for i, c := range meta.Captures {
		if c.HeaderBytes == 0 {
			continue
		}
		if c.HeaderBytes > uint64(size-nonSample) {
			return nil, fmt.Errorf("%s: captures[%d] core:header_bytes %d with the other header and trailing bytes (%d) exceed the data size %d", name, i, c.HeaderBytes, nonSample, size)
		}
		nonSample += int64(c.HeaderBytes)
		if c.SampleStart > math.MaxInt64 {
			return nil, fmt.Errorf("%s: captures[%d] core:sample_start %d is out of range", name, i, c.SampleStart)
		}
		skips = append(skips, skipPoint{at: int64(c.SampleStart), n: int64(c.HeaderBytes)})
	}
	total, err := wholeSamples(size-nonSample, f)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	// Capture indices point into the data (a segment may start at its end,
	// empty, but not beyond it).
	for i, c := range meta.Captures {
		if c.SampleStart > uint64(total) {
			return nil, fmt.Errorf("%s: captures[%d] core:sample_start %d is beyond the %d samples of the data", name, i, c.SampleStart, total)
		}
	}
	if err := checkLength(total, info.SampleRate); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	if !first.Datetime.IsZero() {
		// The datetime belongs to the capture's first sample; shift it back
		// to sample 0 of the dataset (at most MaxRecordingS, checked above).
		off := time.Duration(float64(first.SampleStart) / info.SampleRate * 1e9)
		info.Start = first.Datetime.Add(-off)
		if !raw.Start.IsZero() {
			if d := raw.Start.Sub(info.Start); d > time.Microsecond || d < -time.Microsecond {
				return nil, fmt.Errorf("%s: start time %s conflicts with core:datetime %s in the metadata", name, raw.Start.UTC().Format(time.RFC3339Nano), FormatDatetime(first.Datetime))
			}
		}
	} else if !raw.Start.IsZero() {
		info.Start = raw.Start.UTC()
	}
	s, err := newStreamSource(r, closer, f, info, total, skips)
	if err != nil {
		return nil, err
	}
	if g.SHA512 != "" {
		h := sha512.New()
		s.r = io.TeeReader(r, h)
		s.atEnd = func() error { return checkHash(s, h, g.SHA512, int64(g.TrailingBytes)) }
	}
	return &sigmfSource{streamSource: s, meta: meta}, nil
}

// checkHash reads any trailing bytes into the hash and compares it with
// core:sha512.
func checkHash(s *streamSource, h hash.Hash, want string, trailing int64) error {
	if trailing > 0 {
		if _, err := io.CopyN(io.Discard, s.r, trailing); err != nil {
			return fmt.Errorf("%s: data ends inside its %d trailing bytes", s.info.Name, trailing)
		}
	}
	if got := hex.EncodeToString(h.Sum(nil)); !strings.EqualFold(got, want) {
		return fmt.Errorf("%s: SHA-512 of the data does not match core:sha512 in the metadata: the data file is corrupt or was changed", s.info.Name)
	}
	return nil
}

func close9(a, b float64) bool {
	return math.Abs(a-b) <= 1e-9*math.Max(math.Abs(a), math.Abs(b))
}

// openArchive reads a .sigmf archive: it scans the tar headers once
// (seeking over contents), keeps the metadata, and streams the dataset as a
// section of the archive file.
func openArchive(path string, raw RawParams) (Source, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	s, err := archiveSource(fh, fh, path, raw)
	if err != nil {
		fh.Close()
		return nil, err
	}
	return s, nil
}

// printableName returns s, or s quoted when it holds bytes that are not
// printable ASCII (a name from an archive may hold a newline), so errors
// stay one line.
func printableName(s string) string {
	for i := 0; i < len(s); i++ {
		if s[i] < 0x20 || s[i] > 0x7e {
			return strconv.Quote(s)
		}
	}
	return s
}

// archiveFile is what archiveSource reads: an *os.File, or a bytes.Reader
// in tests.
type archiveFile interface {
	io.Reader
	io.ReaderAt
	io.Seeker
}

// maxArchiveEntries bounds the tar entries read from a .sigmf archive: one
// recording's archive holds a directory, a .sigmf-meta and a .sigmf-data
// (SigMF v1.2.5, Archive), so 256 is generous; an archive of millions of
// empty entries is refused rather than walked.
const maxArchiveEntries = 256

// memberPathOK refuses a tar member name that is absolute or climbs out of
// the archive with "..": SigMF v1.2.5 (Archive) puts a recording's files in
// one folder named after the archive, so such a name is no SigMF archive,
// and is the classic path trick against extractors (what GNU tar refuses
// by default, leading "/" stripped and ".." members skipped).
func memberPathOK(name string) error {
	n := strings.ReplaceAll(name, "\\", "/")
	if strings.HasPrefix(n, "/") || (len(n) > 1 && n[1] == ':') {
		return errors.New("has an absolute path: a SigMF archive's files sit in its own folder")
	}
	for _, part := range strings.Split(n, "/") {
		if part == ".." {
			return errors.New(`climbs out of the archive with "..": a SigMF archive's files sit in its own folder`)
		}
	}
	return nil
}

func archiveSource(fh archiveFile, closer io.Closer, path string, raw RawParams) (Source, error) {
	tr := tar.NewReader(fh)
	type entry struct {
		name      string
		off, size int64
	}
	var metas []string
	var metaBytes [][]byte
	datas := map[string]entry{}
	for n := 0; ; n++ {
		if n == maxArchiveEntries {
			return nil, fmt.Errorf("%s: more than %d entries in the archive: a .sigmf archive holds one recording's meta and data", path, maxArchiveEntries)
		}
		hdr, err := tr.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("%s: not a readable tar archive: %w", path, err)
		}
		name := printableName(hdr.Name)
		if err := memberPathOK(hdr.Name); err != nil {
			return nil, fmt.Errorf("%s: member %s %v", path, name, err)
		}
		switch {
		case strings.HasSuffix(name, ".sigmf-meta"):
			if hdr.Typeflag != tar.TypeReg {
				return nil, fmt.Errorf("%s: %s is not a regular file in the archive", path, name)
			}
			if len(metas) == 1 {
				// Refused at once, not after reading every meta into memory.
				return nil, fmt.Errorf("%s: the archive holds 2 recordings or more (%s.sigmf-meta, %s, ...): nullseek reads archives of one recording", path, printableName(metas[0]), name)
			}
			if hdr.Size > maxMetaBytes {
				return nil, fmt.Errorf("%s: %s is larger than %d MiB", path, name, maxMetaBytes>>20)
			}
			b, err := io.ReadAll(tr)
			if err != nil {
				return nil, fmt.Errorf("%s: reading %s: %w", path, name, err)
			}
			metas = append(metas, strings.TrimSuffix(hdr.Name, ".sigmf-meta"))
			metaBytes = append(metaBytes, b)
		case strings.HasSuffix(name, ".sigmf-data"):
			if hdr.Typeflag != tar.TypeReg {
				return nil, fmt.Errorf("%s: %s is not a regular file in the archive", path, name)
			}
			off, err := fh.Seek(0, io.SeekCurrent)
			if err != nil {
				return nil, fmt.Errorf("%s: %w", path, err)
			}
			datas[strings.TrimSuffix(hdr.Name, ".sigmf-data")] = entry{name, off, hdr.Size}
		}
	}
	switch len(metas) {
	case 0:
		return nil, fmt.Errorf("%s: the archive holds no .sigmf-meta file", path)
	case 1:
	default:
		return nil, fmt.Errorf("%s: the archive holds %d recordings (%s, ...): nullseek reads archives of one recording", path, len(metas), printableName(metas[0]))
	}
	meta, err := ParseMeta(metaBytes[0])
	if err != nil {
		return nil, fmt.Errorf("%s: %s: %w", path, printableName(metas[0]+".sigmf-meta"), err)
	}
	base := metas[0]
	if meta.Global.Dataset != "" {
		base = strings.TrimSuffix(filepath.ToSlash(filepath.Join(filepath.Dir(base), meta.Global.Dataset)), ".sigmf-data")
	}
	d, ok := datas[base]
	if !ok {
		return nil, fmt.Errorf("%s: missing data file %s in the archive", path, printableName(base+".sigmf-data"))
	}
	name := path + ":" + d.name
	if d.off < 0 || d.size < 0 {
		return nil, fmt.Errorf("%s: %s has a negative offset or size in the archive", path, d.name)
	}
	return newSigMFSource(meta, io.NewSectionReader(fh, d.off, d.size), closer, d.size, name, raw)
}
