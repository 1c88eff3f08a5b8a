package sdr

import (
	"errors"
	"fmt"
	"io"
	"os"
	"time"
)

// CU8Reader is implemented by sources whose underlying data is cu8 (RTL-SDR
// bytes: I, Q interleaved, unsigned, zero at 127.5). ReadCU8 copies raw bytes
// into dst and returns the number of bytes written, always an even number
// (whole IQ pairs; dst shorter than 2 bytes reads nothing). It shares the
// stream position with Read: a sample is delivered by one or the other,
// never both. At the end it returns 0, io.EOF.
type CU8Reader interface {
	ReadCU8(dst []byte) (int, error)
}

// RawParams describes raw interleaved IQ, which carries no metadata, and
// supplies or checks values for formats that do (see Open).
type RawParams struct {
	// SampleRate is the complex sample rate in Hz (--rate); required for
	// raw files.
	SampleRate float64
	// CenterHz is the RF centre frequency in Hz (--center); 0 = unknown.
	CenterHz float64
	// Format is a SigMF datatype such as "cu8" or "cf32_le" (--format);
	// required for raw files.
	Format string
	// Start is the UTC time of the first sample; zero = unknown.
	Start time.Time
}

// streamBufBytes is the fixed scratch size of a file source. Memory use does
// not depend on the recording's length.
const streamBufBytes = 64 << 10

// skipPoint says: before sample index at, discard n bytes (SigMF
// core:header_bytes of a capture segment).
type skipPoint struct {
	at, n int64
}

// streamSource delivers samples from a byte stream with a fixed buffer.
type streamSource struct {
	info   Info
	f      sampleFormat
	r      io.Reader
	closer io.Closer
	buf    []byte
	carry  [16]byte // partial sample left over from a short read (unknown length only)
	nc     int
	pos    int64 // next sample index
	total  int64 // samples in the stream, -1 when unknown
	skips  []skipPoint
	err    error // sticky
	// atEnd, when set, runs once when the last sample has been delivered
	// (hash verification); its error replaces io.EOF.
	atEnd func() error
}

// newStreamSource checks info (with the format's fields and total filled
// in) against the package bounds, naming the source in the error.
func newStreamSource(r io.Reader, closer io.Closer, f sampleFormat, info Info, total int64, skips []skipPoint) (*streamSource, error) {
	info.Format = f.name
	info.ClipLevel = f.clip
	info.Samples = total
	if err := info.Validate(); err != nil {
		return nil, fmt.Errorf("%s: %w", info.Name, err)
	}
	bps := f.bytesPerSample()
	return &streamSource{
		info:   info,
		f:      f,
		r:      r,
		closer: closer,
		buf:    make([]byte, streamBufBytes/bps*bps),
		total:  total,
		skips:  skips,
	}, nil
}

// NewRawSource streams raw interleaved IQ from r. sizeBytes is the number of
// bytes r will deliver, or -1 when unknown (a pipe); when known it must be a
// positive whole number of samples. name labels errors. p.SampleRate and
// p.Format are required. Closing the source closes r if it is an io.Closer.
func NewRawSource(r io.Reader, sizeBytes int64, p RawParams, name string) (Source, error) {
	s, err := newRaw(r, sizeBytes, p, name)
	if err != nil {
		return nil, err
	}
	return s, nil
}

func newRaw(r io.Reader, sizeBytes int64, p RawParams, name string) (*streamSource, error) {
	if p.Format == "" {
		return nil, fmt.Errorf("%s: raw IQ needs its sample format: give --format (cu8, ci8, ci16_le, cf32_le, ...)", name)
	}
	if p.SampleRate == 0 {
		return nil, fmt.Errorf("%s: raw IQ needs its sample rate: give --rate in Hz", name)
	}
	if err := checkRate(p.SampleRate); err != nil {
		return nil, fmt.Errorf("%s: --rate: %w", name, err)
	}
	if err := checkCenter(p.CenterHz); err != nil {
		return nil, fmt.Errorf("%s: --center: %w", name, err)
	}
	f, err := parseFormat(p.Format)
	if err != nil {
		return nil, fmt.Errorf("%s: --format: %w", name, err)
	}
	total := int64(-1)
	if sizeBytes >= 0 {
		total, err = wholeSamples(sizeBytes, f)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
	}
	c, _ := r.(io.Closer)
	info := Info{SampleRate: p.SampleRate, CenterHz: p.CenterHz, Start: p.Start.UTC(), Name: name}
	if p.Start.IsZero() {
		info.Start = time.Time{}
	}
	return newStreamSource(r, c, f, info, total, nil)
}

// wholeSamples converts a data size in bytes to a sample count, refusing
// empty data and sizes that end part-way through a sample.
func wholeSamples(n int64, f sampleFormat) (int64, error) {
	bps := int64(f.bytesPerSample())
	if n <= 0 {
		return 0, errors.New("no samples: the data is empty")
	}
	if rem := n % bps; rem != 0 {
		return 0, fmt.Errorf("data size %d bytes is not a whole number of %s samples (%d bytes each): %d bytes left over", n, f.name, bps, rem)
	}
	return n / bps, nil
}

func openRaw(path string, p RawParams) (Source, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	st, err := fh.Stat()
	if err != nil {
		fh.Close()
		return nil, err
	}
	size := st.Size()
	if !st.Mode().IsRegular() {
		size = -1 // FIFO or device: length unknown
	}
	s, err := newRaw(fh, size, p, path)
	if err != nil {
		fh.Close()
		return nil, err
	}
	return s, nil
}

func (s *streamSource) Info() Info { return s.info }

func (s *streamSource) Close() error {
	if s.closer == nil {
		return nil
	}
	c := s.closer
	s.closer = nil
	return c.Close()
}

// Read implements Source. It fills dst completely unless the stream ends or
// fails. Float data containing NaN or Inf stops with an error naming the
// sample index; the samples before it are returned.
func (s *streamSource) Read(dst []complex64) (int, error) {
	bps := s.f.bytesPerSample()
	n := 0
	for n < len(dst) {
		want := min(len(dst)-n, len(s.buf)/bps)
		start := s.pos
		got, err := s.readRaw(s.buf[:want*bps])
		if got > 0 {
			if bad := s.f.convert(dst[n:n+got], s.buf[:got*bps]); bad >= 0 {
				v := dst[n+bad]
				s.err = fmt.Errorf("%s: sample %d is not finite (%v): the float data is corrupt", s.info.Name, start+int64(bad), v)
				return n + bad, s.err
			}
			n += got
		}
		if err != nil {
			if n > 0 && err == io.EOF {
				return n, nil
			}
			return n, err
		}
	}
	return n, nil
}

// ReadCU8 implements CU8Reader for cu8 data; other formats return an error.
func (s *streamSource) ReadCU8(dst []byte) (int, error) {
	if s.f.name != "cu8" {
		return 0, fmt.Errorf("%s: ReadCU8 on %s data (only cu8 has a raw byte path)", s.info.Name, s.f.name)
	}
	n := 0
	for n+2 <= len(dst) {
		got, err := s.readRaw(dst[n : n+(len(dst)-n)/2*2])
		n += 2 * got
		if err != nil {
			if n > 0 && err == io.EOF {
				return n, nil
			}
			return n, err
		}
	}
	return n, nil
}

// readRaw reads whole samples into p (len(p) a positive multiple of the
// sample size) and returns how many samples it delivered; fewer than fit
// only at a segment boundary, at the end, or on error.
func (s *streamSource) readRaw(p []byte) (int, error) {
	if s.err != nil {
		return 0, s.err
	}
	bps := s.f.bytesPerSample()
	for len(s.skips) > 0 && s.skips[0].at <= s.pos {
		k := s.skips[0]
		s.skips = s.skips[1:]
		if m, err := io.CopyN(io.Discard, s.r, k.n); err != nil {
			s.err = fmt.Errorf("%s: data ends inside the %d header bytes before sample %d (read %d): truncated file?", s.info.Name, k.n, k.at, m)
			return 0, s.err
		}
	}
	want := len(p) / bps
	if s.total >= 0 {
		if s.pos >= s.total {
			if s.atEnd != nil {
				f := s.atEnd
				s.atEnd = nil
				if err := f(); err != nil {
					s.err = err
					return 0, err
				}
			}
			return 0, io.EOF
		}
		want = int(min(int64(want), s.total-s.pos))
	}
	if len(s.skips) > 0 {
		want = int(min(int64(want), s.skips[0].at-s.pos))
	}
	p = p[:want*bps]
	if s.total >= 0 {
		m, err := io.ReadFull(s.r, p)
		if err != nil {
			got := m / bps
			s.pos += int64(got)
			s.err = fmt.Errorf("%s: data ends at sample %d of %d: file truncated or being rewritten? (%v)", s.info.Name, s.pos, s.total, err)
			return got, s.err
		}
		s.pos += int64(want)
		return want, nil
	}
	// Unknown length: deliver whatever whole samples one read brings.
	copy(p, s.carry[:s.nc])
	have := s.nc
	s.nc = 0
	for have < bps {
		m, err := s.r.Read(p[have:])
		have += m
		if err != nil && have < bps {
			if err == io.EOF {
				if have > 0 {
					s.err = fmt.Errorf("%s: stream ended with %d bytes left over (not a whole %s sample of %d bytes)", s.info.Name, have, s.f.name, bps)
					return 0, s.err
				}
				if s.pos == 0 {
					s.err = fmt.Errorf("%s: no samples: the stream is empty", s.info.Name)
					return 0, s.err
				}
				return 0, io.EOF
			}
			s.err = fmt.Errorf("%s: %w", s.info.Name, err)
			return 0, s.err
		}
		if err != nil { // have >= bps: deliver, report the error next time
			if err != io.EOF {
				err = fmt.Errorf("%s: %w", s.info.Name, err)
			}
			whole := have / bps
			s.nc = copy(s.carry[:], p[whole*bps:have])
			if err == io.EOF && s.nc > 0 {
				err = fmt.Errorf("%s: stream ended with %d bytes left over (not a whole %s sample of %d bytes)", s.info.Name, s.nc, s.f.name, bps)
			}
			s.err = err
			s.pos += int64(whole)
			return whole, nil
		}
	}
	whole := have / bps
	s.nc = copy(s.carry[:], p[whole*bps:have])
	s.pos += int64(whole)
	return whole, nil
}
