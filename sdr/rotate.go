package sdr

import (
	"bufio"
	"crypto/sha512"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"time"

	"nullseek/internal/atomicfile"
)

// RotateOptions configures a RotatingSigMF.
type RotateOptions struct {
	// Dir is the directory the recordings go to (it must exist).
	Dir string
	// Prefix starts every file name (default "nullseek").
	Prefix string
	// Every rolls over to a new pair after this much receiver time
	// (samples plus gaps; 0 = no time limit).
	Every time.Duration
	// MaxBytes rolls over before a data file would exceed this size
	// (0 = no size limit; else at least one sample).
	MaxBytes int64
	// Format is the SigMF datatype written (default cu8).
	Format string
	// FlushEvery is how much receiver time may pass between flushes of the
	// current pair to disk (default 1 s; see RotatingSigMF for what an
	// interrupted run keeps).
	FlushEvery time.Duration
	// Position, if set, is asked for the receiver's position when a pair
	// starts and at each flush until it answers: a GeoJSON Point
	// ([longitude°, latitude°] or with altitude in metres above the WGS84
	// ellipsoid, RFC 7946 §3.1.2 as SigMF v1.2.5 core:geolocation
	// requires), or nil while unknown.
	Position func() *GeoPoint
}

// RotatingSigMF records a long capture as a series of SigMF pairs in one
// directory, PREFIX-YYYYMMDDTHHMMSS.mmmZ.sigmf-meta/-data named after the
// UTC receiver time of each pair's first sample, rolling over every
// RotateOptions.Every or before MaxBytes. Each pair carries
// core:geolocation in its global object once a position is known, and
// every gap (AddGap) as a new capture segment (core:sample_start,
// core:datetime: SigMF v1.2.5 starts a new segment where time jumps) plus
// an annotation labelled "gap" whose comment gives the samples and time
// missing and the cause.
//
// Unlike CreateSigMF, which stages both files and shows nothing until
// Close, a rotating recording must survive being interrupted, so its
// files are written in place: the data file is appended to under its
// final name (created exclusively: no recording is ever overwritten), and
// the metadata is rewritten atomically (atomicfile.Write: temporary file,
// rename) at each flush. What an interrupted run keeps:
//
//   - every completed pair, whole: its metadata has core:sha512;
//   - the current pair's data up to its last flush (fsynced, so also
//     across a power loss), and any later whole buffers the OS already
//     had (a killed process loses at most the 64 KiB write buffer; every
//     write is of whole samples, so the file never ends inside one);
//   - the current pair's metadata as of its last flush: no core:sha512
//     (the data may have grown past it), and only the gaps known then.
//
// A write error (a full disk) is returned, and Close then leaves the
// current pair as it is on disk with metadata lacking core:sha512.
type RotatingSigMF struct {
	o     RotateOptions
	info  Info
	f     sampleFormat
	enc   []byte
	pos   int64 // samples written over all pairs
	recvT int64 // receiver samples (written + missing) before the current pair

	cur      *rotFile
	done     []string
	pending  []Gap // gaps not yet reached, by Index
	lastSync int64 // receiver sample count at the last flush of cur
	err      error
	closed   bool
}

// rotFile is one pair being written.
type rotFile struct {
	base    string
	fh      *os.File
	bw      *bufio.Writer
	h       hash.Hash
	meta    Meta
	samples int64 // samples in this file
	missing int64 // gap samples inside it
	start   time.Time
}

// NewRotatingSigMF starts a rotating recording of a stream described by
// info (SampleRate required; CenterHz written as core:frequency when
// non-zero; Start the UTC time of sample 0, default now). The first pair
// is created with the first sample.
func NewRotatingSigMF(info Info, o RotateOptions) (*RotatingSigMF, error) {
	if o.Format == "" {
		o.Format = "cu8"
	}
	if o.Prefix == "" {
		o.Prefix = "nullseek"
	}
	if o.FlushEvery <= 0 {
		o.FlushEvery = time.Second
	}
	f, err := parseFormat(o.Format)
	if err != nil {
		return nil, fmt.Errorf("rotating recording: %w", err)
	}
	if err := checkRate(info.SampleRate); err != nil {
		return nil, fmt.Errorf("rotating recording: %w", err)
	}
	if err := checkCenter(info.CenterHz); err != nil {
		return nil, fmt.Errorf("rotating recording: %w", err)
	}
	if o.Every < 0 || (o.Every > 0 && float64(o.Every)/1e9*info.SampleRate < 1) {
		return nil, fmt.Errorf("rotating recording: every %v is shorter than one sample", o.Every)
	}
	if o.MaxBytes < 0 || (o.MaxBytes > 0 && o.MaxBytes < int64(f.bytesPerSample())) {
		return nil, fmt.Errorf("rotating recording: max bytes %d is less than one %s sample (%d bytes)", o.MaxBytes, f.name, f.bytesPerSample())
	}
	st, err := os.Stat(o.Dir)
	if err != nil || !st.IsDir() {
		return nil, fmt.Errorf("rotating recording: %s is not a directory", o.Dir)
	}
	if info.Start.IsZero() {
		info.Start = time.Now().UTC()
	}
	return &RotatingSigMF{o: o, info: info, f: f, enc: make([]byte, writeChunk*f.bytesPerSample())}, nil
}

// timeAt is the UTC receiver time of receiver sample k.
func (r *RotatingSigMF) timeAt(k int64) time.Time {
	return r.info.Start.Add(time.Duration(float64(k) / r.info.SampleRate * 1e9)).UTC()
}

// open starts a new pair at the current receiver time.
func (r *RotatingSigMF) open() error {
	start := r.timeAt(r.recvT)
	stem := filepath.Join(r.o.Dir, r.o.Prefix+"-"+start.Format("20060102T150405.000Z"))
	base := stem
	var fh *os.File
	for i := 2; ; i++ {
		var err error
		fh, err = os.OpenFile(base+".sigmf-data", os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o666)
		if err == nil {
			break
		}
		if !errors.Is(err, fs.ErrExist) || i > 1000 {
			return fmt.Errorf("rotating recording: %w", err)
		}
		base = fmt.Sprintf("%s-%d", stem, i)
	}
	c := &rotFile{base: base, fh: fh, h: sha512.New(), start: start}
	c.bw = bufio.NewWriterSize(fh, 64<<10)
	g := &c.meta.Global
	g.Datatype, g.Version, g.Recorder = r.f.name, SigMFVersion, "nullseek"
	rate := r.info.SampleRate
	g.SampleRate = &rate
	cp := Capture{SampleStart: 0, Datetime: start}
	if r.info.CenterHz != 0 {
		fr := r.info.CenterHz
		cp.Frequency = &fr
	}
	c.meta.Captures = []Capture{cp}
	r.cur = c
	r.lastSync = r.recvT
	r.position()
	return r.writeMeta(false)
}

// position fills core:geolocation once a valid position is known.
func (r *RotatingSigMF) position() {
	if r.o.Position == nil || r.cur.meta.Global.Geolocation != nil {
		return
	}
	if p := r.o.Position(); p != nil && p.check() == nil {
		q := *p
		q.Coordinates = append([]float64(nil), p.Coordinates...)
		r.cur.meta.Global.Geolocation = &q
	}
}

// writeMeta rewrites the current pair's metadata; final adds core:sha512.
func (r *RotatingSigMF) writeMeta(final bool) error {
	c := r.cur
	c.meta.Global.SHA512 = ""
	if final {
		c.meta.Global.SHA512 = hex.EncodeToString(c.h.Sum(nil))
	}
	b, err := metaJSON(&c.meta)
	if err != nil {
		return err
	}
	if err := atomicfile.Write(c.base+".sigmf-meta", b); err != nil {
		return fmt.Errorf("rotating recording: %w", err)
	}
	return nil
}

// roomLeft is how many samples the current pair takes before it rolls over.
func (r *RotatingSigMF) roomLeft() int64 {
	room := int64(math.MaxInt64)
	c := r.cur
	if r.o.Every > 0 {
		limit := int64(math.Ceil(float64(r.o.Every) / 1e9 * r.info.SampleRate))
		room = min(room, limit-(c.samples+c.missing))
	}
	if r.o.MaxBytes > 0 {
		room = min(room, r.o.MaxBytes/int64(r.f.bytesPerSample())-c.samples)
	}
	return room
}

// Write appends samples, rolling over where a limit falls.
func (r *RotatingSigMF) Write(samples []complex64) error {
	if r.closed {
		return errors.New("rotating recording: write after Close")
	}
	if r.err != nil {
		return r.err
	}
	bps := r.f.bytesPerSample()
	for len(samples) > 0 {
		if r.err = r.applyGaps(); r.err != nil {
			return r.err
		}
		if r.cur == nil {
			if r.err = r.open(); r.err != nil {
				return r.err
			}
		}
		room := r.roomLeft()
		if room <= 0 {
			if r.err = r.finish(); r.err != nil {
				return r.err
			}
			continue
		}
		n := int(min(int64(len(samples)), room, writeChunk))
		if len(r.pending) > 0 {
			n = int(min(int64(n), r.pending[0].Index-r.pos))
		}
		b := r.enc[:n*bps]
		r.f.encode(b, samples[:n])
		if _, err := r.cur.bw.Write(b); err != nil {
			r.err = fmt.Errorf("rotating recording: write %s.sigmf-data: %w", r.cur.base, err)
			return r.err
		}
		r.cur.h.Write(b)
		r.cur.samples += int64(n)
		r.pos += int64(n)
		samples = samples[n:]
		if now := r.recvT + r.cur.samples + r.cur.missing; float64(now-r.lastSync) >= float64(r.o.FlushEvery)/1e9*r.info.SampleRate {
			if r.err = r.flush(); r.err != nil {
				return r.err
			}
		}
	}
	return nil
}

// flush writes the buffer, syncs the data and rewrites the metadata.
func (r *RotatingSigMF) flush() error {
	c := r.cur
	if err := c.bw.Flush(); err != nil {
		return fmt.Errorf("rotating recording: write %s.sigmf-data: %w", c.base, err)
	}
	if err := c.fh.Sync(); err != nil {
		return fmt.Errorf("rotating recording: sync %s.sigmf-data: %w", c.base, err)
	}
	r.lastSync = r.recvT + c.samples + c.missing
	r.position()
	return r.writeMeta(false)
}

// finish completes the current pair: data flushed and closed, metadata
// with core:sha512.
func (r *RotatingSigMF) finish() error {
	c := r.cur
	if err := c.bw.Flush(); err != nil {
		return fmt.Errorf("rotating recording: write %s.sigmf-data: %w", c.base, err)
	}
	if err := c.fh.Sync(); err != nil {
		return fmt.Errorf("rotating recording: sync %s.sigmf-data: %w", c.base, err)
	}
	if err := c.fh.Close(); err != nil {
		return fmt.Errorf("rotating recording: close %s.sigmf-data: %w", c.base, err)
	}
	r.position()
	if err := r.writeMeta(true); err != nil {
		return err
	}
	r.done = append(r.done, c.base)
	r.recvT += c.samples + c.missing
	r.cur = nil
	return nil
}

// AddGap records a gap found by a resilient receiver. g.Index counts
// samples written to this recording (the caller writes every sample it
// reads, in order): a gap at or beyond the samples written so far is
// placed when writing reaches it (in-connection drops are found on
// arrival, before the samples are read), in the pair holding the sample
// after it, or at the start of the next pair when it falls at a rollover.
// A gap before the samples written is refused.
func (r *RotatingSigMF) AddGap(g Gap) error {
	if r.closed {
		return errors.New("rotating recording: gap after Close")
	}
	if r.err != nil {
		return r.err
	}
	if g.Index < r.pos {
		return fmt.Errorf("rotating recording: gap at sample %d, but %d samples were already written: add gaps as they are found", g.Index, r.pos)
	}
	i := len(r.pending)
	for i > 0 && r.pending[i-1].Index > g.Index {
		i--
	}
	r.pending = append(r.pending, Gap{})
	copy(r.pending[i+1:], r.pending[i:])
	r.pending[i] = g
	return nil
}

// applyGaps places the pending gaps at the current position.
func (r *RotatingSigMF) applyGaps() error {
	for len(r.pending) > 0 && r.pending[0].Index == r.pos {
		if err := r.applyGap(r.pending[0]); err != nil {
			return err
		}
		r.pending = r.pending[1:]
	}
	return nil
}

func (r *RotatingSigMF) applyGap(g Gap) error {
	if r.cur == nil || r.roomLeft() <= 0 {
		if r.cur != nil {
			if err := r.finish(); err != nil {
				return err
			}
		}
		r.recvT += g.Missing // the new pair starts after the gap
		if err := r.open(); err != nil {
			return err
		}
	} else {
		r.cur.missing += g.Missing
	}
	c := r.cur
	at := uint64(c.samples)
	dt := r.timeAt(r.recvT + c.samples + c.missing)
	if last := &c.meta.Captures[len(c.meta.Captures)-1]; last.SampleStart == at {
		last.Datetime = dt
	} else {
		cp := Capture{SampleStart: at, Datetime: dt, Frequency: c.meta.Captures[0].Frequency}
		c.meta.Captures = append(c.meta.Captures, cp)
	}
	c.meta.Annotations = append(c.meta.Annotations, Annotation{
		SampleStart: at, Label: "gap", Generator: "nullseek",
		Comment: fmt.Sprintf("%d samples (%v) missing before this sample (%s): %s", g.Missing, g.Lost.Round(time.Microsecond), g.Kind, g.Cause),
	})
	return nil
}

// Files returns the base paths (without .sigmf-meta/-data) of the pairs
// completed so far.
func (r *RotatingSigMF) Files() []string { return append([]string(nil), r.done...) }

// Current returns the base path of the pair being written ("" between
// pairs).
func (r *RotatingSigMF) Current() string {
	if r.cur == nil {
		return ""
	}
	return r.cur.base
}

// Close completes the current pair. After a write error it leaves the
// pair as it is on disk, with metadata lacking core:sha512, and returns
// the error.
func (r *RotatingSigMF) Close() error {
	if r.closed {
		return errors.New("rotating recording: already closed")
	}
	if r.err == nil && r.cur != nil && r.roomLeft() > 0 {
		// A gap right after the last sample is still recorded in its pair;
		// none opens a pair without samples.
		r.err = r.applyGaps()
	}
	r.closed = true
	if r.cur == nil {
		return r.err
	}
	if r.err != nil {
		r.cur.fh.Close()
		r.writeMeta(false)
		return r.err
	}
	return r.finish()
}
