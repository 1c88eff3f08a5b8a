package sdr

import (
	"archive/tar"
	"bufio"
	"crypto/sha512"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash"
	"io"
	"nullseek/internal/atomicfile"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"
)

// SigMFVersion is the SigMF version nullseek writes.
const SigMFVersion = "1.2.0"

// writeChunk is how many samples the writer encodes at a time.
const writeChunk = 4096

// SigMFWriter records complex samples as a SigMF pair. Both files are
// staged in an atomicfile.Set (temporary files beside their final names,
// mode 0666 less the umask, written through symbolic links) and Close
// renames them into place data first, meta last, without removing the old
// meta before the new data is in place: a crash leaves at worst hidden
// temporary files, or the new dataset beside the old meta (whose
// core:sha512 then no longer matches, which the reader reports), never a
// meta without its data. A failed or aborted recording leaves nothing.
type SigMFWriter struct {
	base    string
	f       sampleFormat
	info    Info
	set     *atomicfile.Set
	ownSet  bool
	data    *atomicfile.File
	bw      *bufio.Writer
	h       hash.Hash
	scratch []byte
	meta    Meta
	samples int64
	sat     int64
	err     error
	closed  bool
}

// CreateSigMF starts a recording at basePath (".sigmf-meta"/".sigmf-data"
// are appended; a given extension of either kind is stripped). info gives
// the sample rate (required, Hz), centre frequency (written as the capture's
// core:frequency when non-zero) and start time (core:datetime when
// non-zero). format is cu8, ci8, ci16_le or cf32_le (any complex SigMF
// datatype nullseek reads is accepted). Integer formats saturate at their
// rails; see Saturations.
func CreateSigMF(basePath string, info Info, format string, annotations ...Annotation) (*SigMFWriter, error) {
	w, err := CreateSigMFIn(&atomicfile.Set{}, basePath, info, format, annotations...)
	if err != nil {
		return nil, err
	}
	w.ownSet = true
	return w, nil
}

// CreateSigMFIn is CreateSigMF with the pair staged in set, the outputs of
// a whole run: Close then stages the meta after the data and leaves the
// commit (or abort) to the set's owner; Abort discards only this pair.
func CreateSigMFIn(set *atomicfile.Set, basePath string, info Info, format string, annotations ...Annotation) (*SigMFWriter, error) {
	basePath = strings.TrimSuffix(strings.TrimSuffix(basePath, ".sigmf-meta"), ".sigmf-data")
	f, err := parseFormat(format)
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", basePath, err)
	}
	if err := checkRate(info.SampleRate); err != nil {
		return nil, fmt.Errorf("create %s: %w", basePath, err)
	}
	if err := checkCenter(info.CenterHz); err != nil {
		return nil, fmt.Errorf("create %s: %w", basePath, err)
	}
	data, err := set.Create(basePath + ".sigmf-data")
	if err != nil {
		return nil, fmt.Errorf("create %s: %w", basePath, err)
	}
	w := &SigMFWriter{
		base:    basePath,
		f:       f,
		info:    info,
		set:     set,
		data:    data,
		h:       sha512.New(),
		scratch: make([]byte, writeChunk*f.bytesPerSample()),
	}
	w.bw = bufio.NewWriterSize(io.MultiWriter(data, w.h), 64<<10)
	w.meta.Global.Recorder = "nullseek"
	w.meta.Annotations = append(w.meta.Annotations, annotations...)
	return w, nil
}

// Meta returns the metadata that Close will write, so a caller can set
// descriptive fields (Description, Author, HW, Geolocation, Extra keys) or
// capture Extra keys before Close. Close overwrites datatype, version,
// sample rate and sha512, and sorts the annotations.
func (w *SigMFWriter) Meta() *Meta { return &w.meta }

// Write appends samples. Components are scaled like the reader's
// normalisation (cu8 x·127.5+127.5, ci8 x·128, ci16 x·32768), rounded to
// nearest and clamped; NaN is written as the code nearest zero and counted
// as a saturation.
func (w *SigMFWriter) Write(samples []complex64) error {
	if w.closed {
		return errors.New("sigmf writer: write after Close")
	}
	if w.err != nil {
		return w.err
	}
	bps := w.f.bytesPerSample()
	for len(samples) > 0 {
		n := min(len(samples), writeChunk)
		w.sat += int64(w.f.encode(w.scratch[:n*bps], samples[:n]))
		if _, err := w.bw.Write(w.scratch[:n*bps]); err != nil {
			w.err = fmt.Errorf("write %s.sigmf-data: %w", w.base, err)
			return w.err
		}
		w.samples += int64(n)
		samples = samples[n:]
	}
	return nil
}

// AddAnnotation adds an annotation (sample indices from the recording's
// first sample; frequency edges in RF Hz). Order does not matter.
func (w *SigMFWriter) AddAnnotation(a Annotation) { w.meta.Annotations = append(w.meta.Annotations, a) }

// Samples is the number of complex samples written so far.
func (w *SigMFWriter) Samples() int64 { return w.samples }

// Saturations is the number of I or Q components clamped (or NaN) so far.
func (w *SigMFWriter) Saturations() int64 { return w.sat }

// Abort discards the recording: its staged files are removed and no file
// is created or replaced.
func (w *SigMFWriter) Abort() error {
	if w.closed {
		return nil
	}
	w.closed = true
	if w.ownSet {
		w.set.Abort()
	} else {
		w.set.Discard(w.data)
	}
	return nil
}

// SetStart changes the UTC time of sample 0 written into the metadata at
// Close (for a live capture whose clock was refined after it began).
func (w *SigMFWriter) SetStart(t time.Time) { w.info.Start = t }

// Close finishes the dataset and the metadata and renames them into place,
// NAME.sigmf-data first and NAME.sigmf-meta last (with CreateSigMFIn it
// stages the meta after the data and the set's Commit renames them). On
// any error nothing is left.
func (w *SigMFWriter) Close() error {
	if w.closed {
		return errors.New("sigmf writer: already closed")
	}
	if w.err != nil {
		w.Abort()
		return w.err
	}
	fail := func(err error) error {
		w.Abort()
		return fmt.Errorf("write %s.sigmf-data: %w", w.base, err)
	}
	if err := w.bw.Flush(); err != nil {
		return fail(err)
	}
	if err := w.data.Close(); err != nil {
		w.Abort()
		return err
	}
	g := &w.meta.Global
	g.Datatype = w.f.name
	g.Version = SigMFVersion
	rate := w.info.SampleRate
	g.SampleRate = &rate
	g.SHA512 = hex.EncodeToString(w.h.Sum(nil))
	if len(w.meta.Captures) == 0 {
		w.meta.Captures = []Capture{{}}
	}
	c := &w.meta.Captures[0]
	c.SampleStart = 0
	if w.info.CenterHz != 0 {
		fr := w.info.CenterHz
		c.Frequency = &fr
	}
	if !w.info.Start.IsZero() {
		c.Datetime = w.info.Start.UTC()
	}
	sort.SliceStable(w.meta.Annotations, func(i, j int) bool {
		return w.meta.Annotations[i].SampleStart < w.meta.Annotations[j].SampleStart
	})
	b, err := metaJSON(&w.meta)
	if err != nil {
		w.Abort()
		return fmt.Errorf("write %s.sigmf-meta: %w", w.base, err)
	}
	if err := w.set.Write(w.base+".sigmf-meta", b); err != nil {
		w.Abort()
		return err
	}
	w.closed = true
	if w.ownSet {
		return w.set.Commit()
	}
	return nil
}

// metaJSON renders m as indented JSON with a final newline.
func metaJSON(m *Meta) ([]byte, error) {
	b, err := json.Marshal(m)
	if err != nil {
		return nil, err
	}
	var v any
	if err := json.Unmarshal(b, &v); err != nil {
		return nil, err
	}
	b, err = json.MarshalIndent(v, "", "    ")
	return append(b, '\n'), err
}

// WriteSigMFArchive packs the SigMF pair at basePath into a .sigmf archive
// (POSIX.1-2001 pax tar, SigMF v1.2.5 archive) at archivePath. Inside, the files
// sit in a directory named after the archive: DIR/NAME.sigmf-meta first,
// then DIR/NAME.sigmf-data, which is streamed, not loaded. The archive is
// written through a temporary file and renamed into place.
func WriteSigMFArchive(archivePath, basePath string) error {
	basePath = strings.TrimSuffix(strings.TrimSuffix(basePath, ".sigmf-meta"), ".sigmf-data")
	metaPath := basePath + ".sigmf-meta"
	mb, err := readLimited(metaPath)
	if err != nil {
		return err
	}
	if _, err := ParseMeta(mb); err != nil {
		return fmt.Errorf("%s: %w", metaPath, err)
	}
	data, err := os.Open(basePath + ".sigmf-data")
	if err != nil {
		return fmt.Errorf("archive %s: %w", basePath, err)
	}
	defer data.Close()
	st, err := data.Stat()
	if err != nil {
		return err
	}
	dir := strings.TrimSuffix(filepath.Base(archivePath), ".sigmf")
	name := filepath.Base(basePath)
	now := time.Now().UTC().Truncate(time.Second)
	return atomicfile.WriteFunc(archivePath, func(w io.Writer) error {
		tw := tar.NewWriter(w)
		hdr := func(n string, size int64) *tar.Header {
			return &tar.Header{Typeflag: tar.TypeReg, Name: dir + "/" + n, Size: size, Mode: 0o644, ModTime: now, Format: tar.FormatPAX}
		}
		if err := tw.WriteHeader(&tar.Header{Typeflag: tar.TypeDir, Name: dir + "/", Mode: 0o755, ModTime: now, Format: tar.FormatPAX}); err != nil {
			return err
		}
		if err := tw.WriteHeader(hdr(name+".sigmf-meta", int64(len(mb)))); err != nil {
			return err
		}
		if _, err := tw.Write(mb); err != nil {
			return err
		}
		if err := tw.WriteHeader(hdr(name+".sigmf-data", st.Size())); err != nil {
			return err
		}
		if n, err := io.Copy(tw, data); err != nil {
			return err
		} else if n != st.Size() {
			return fmt.Errorf("%s.sigmf-data changed size while archiving", basePath)
		}
		return tw.Close()
	})
}
