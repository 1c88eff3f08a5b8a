package sdr

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
)

// wavHeader is what openWAV needs from a RIFF/WAVE file.
type wavHeader struct {
	channels   int
	rateHz     uint32
	bits       int
	blockAlign int
	float      bool
	dataOffset int64
	dataBytes  int64
}

// extensible sub-format GUID tails (KSDATAFORMAT_SUBTYPE_PCM / _IEEE_FLOAT):
// the first two bytes carry the format tag, the rest is fixed.
var wavGUIDTail = []byte{0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71}

// maxWAVChunks bounds the chunks read before the data chunk. A WAV file
// holds a handful (fmt, fact, LIST, bext, JUNK padding) before its data;
// a file of millions of empty chunks would otherwise cost one read each.
const maxWAVChunks = 256

// parseWAV walks the RIFF chunks up to the data chunk. size is the file
// size; a data chunk length of 0 or 0xFFFFFFFF, or one running past the end
// of the file (a recorder that never patched its header), is read as "to
// the end of the file".
func parseWAV(r io.ReaderAt, size int64) (wavHeader, error) {
	var h wavHeader
	var hdr [12]byte
	if _, err := r.ReadAt(hdr[:], 0); err != nil {
		return h, errors.New("not a WAV file: shorter than a RIFF header")
	}
	if string(hdr[0:4]) != "RIFF" || string(hdr[8:12]) != "WAVE" {
		if string(hdr[0:4]) == "RF64" {
			return h, errors.New("RF64 WAV files are not supported: convert to SigMF or raw IQ")
		}
		return h, errors.New("not a WAV file: no RIFF/WAVE header")
	}
	off := int64(12)
	haveFmt := false
	for chunks := 0; ; chunks++ {
		if chunks == maxWAVChunks {
			return h, fmt.Errorf("WAV file has more than %d chunks before its data chunk: not an IQ recording?", maxWAVChunks)
		}
		var ch [8]byte
		if _, err := r.ReadAt(ch[:], off); err != nil {
			if !haveFmt {
				return h, errors.New("WAV file has no fmt chunk")
			}
			return h, errors.New("WAV file has no data chunk")
		}
		id := string(ch[0:4])
		n := int64(binary.LittleEndian.Uint32(ch[4:8]))
		body := off + 8
		switch id {
		case "fmt ":
			if n < 16 || n > 1024 {
				return h, fmt.Errorf("WAV fmt chunk has an invalid size %d", n)
			}
			b := make([]byte, n)
			if _, err := r.ReadAt(b, body); err != nil {
				return h, errors.New("WAV fmt chunk is truncated")
			}
			tag := binary.LittleEndian.Uint16(b[0:2])
			h.channels = int(binary.LittleEndian.Uint16(b[2:4]))
			h.rateHz = binary.LittleEndian.Uint32(b[4:8])
			h.blockAlign = int(binary.LittleEndian.Uint16(b[12:14]))
			h.bits = int(binary.LittleEndian.Uint16(b[14:16]))
			if tag == 0xFFFE { // WAVE_FORMAT_EXTENSIBLE
				if n < 40 || !bytes.Equal(b[26:40], wavGUIDTail) {
					return h, errors.New("WAV extensible format with an unknown sub-format")
				}
				tag = binary.LittleEndian.Uint16(b[24:26])
			}
			switch tag {
			case 1:
				h.float = false
			case 3:
				h.float = true
			default:
				return h, fmt.Errorf("WAV format tag %#x is not PCM or IEEE float", tag)
			}
			haveFmt = true
		case "data":
			if !haveFmt {
				return h, errors.New("WAV data chunk comes before the fmt chunk")
			}
			h.dataOffset = body
			if n == 0 || n == 0xFFFFFFFF || body+n > size {
				n = size - body
			}
			h.dataBytes = n
			return h, nil
		}
		off = body + n + n&1 // chunks are padded to even length
		if off >= size {
			if !haveFmt {
				return h, errors.New("WAV file has no fmt chunk")
			}
			return h, errors.New("WAV file has no data chunk")
		}
	}
}

// wavFormat maps the WAV sample layout to a SigMF datatype.
func (h wavHeader) format() (string, error) {
	if h.channels == 1 {
		return "", errors.New("WAV file has 1 channel: IQ needs 2 channels (I left, Q right); a 1-channel file is real audio, not IQ")
	}
	if h.channels != 2 {
		return "", fmt.Errorf("WAV file has %d channels: IQ needs exactly 2 (I, Q)", h.channels)
	}
	// The block (one sample frame of every channel) is nChannels ×
	// wBitsPerSample/8 bytes (RIFF/WAVE, Microsoft/IBM Multimedia
	// Programming Interface and Data Specifications 1.0, 1991, "Data
	// Packing for PCM WAVE Files"); any other nBlockAlign leaves the
	// layout of the data unknown.
	if h.bits%8 == 0 && h.blockAlign != h.channels*h.bits/8 {
		return "", fmt.Errorf("WAV header says %d-byte sample frames but %d channels of %d bits make %d: the header is corrupt", h.blockAlign, h.channels, h.bits, h.channels*h.bits/8)
	}
	switch {
	case !h.float && h.bits == 8:
		return "cu8", nil
	case !h.float && h.bits == 16:
		return "ci16_le", nil
	case !h.float && h.bits == 32:
		return "ci32_le", nil
	case h.float && h.bits == 32:
		return "cf32_le", nil
	case h.float && h.bits == 64:
		return "cf64_le", nil
	}
	kind := "PCM"
	if h.float {
		kind = "float"
	}
	return "", fmt.Errorf("WAV %d-bit %s samples are not supported (8-bit unsigned, 16/32-bit PCM or 32/64-bit float)", h.bits, kind)
}

// openWAV opens 2-channel WAV IQ. 8-bit WAV data is unsigned and is read
// like RTL-SDR cu8 (zero at 127.5, scale 1/127.5), which is what 8-bit IQ
// WAV recorders store; 16-bit PCM is ci16_le (/32768).
func openWAV(path string, raw RawParams) (Source, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	st, err := fh.Stat()
	if err != nil {
		fh.Close()
		return nil, err
	}
	s, err := wavSource(fh, fh, st.Size(), path, raw)
	if err != nil {
		fh.Close()
		return nil, err
	}
	return s, nil
}

// wavSource streams the WAV file r of size bytes; closer closes it.
func wavSource(fh io.ReaderAt, closer io.Closer, size int64, path string, raw RawParams) (Source, error) {
	h, err := parseWAV(fh, size)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	dt, err := h.format()
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	f, err := parseFormat(dt)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	rate := float64(h.rateHz)
	if err := checkRate(rate); err != nil {
		return nil, fmt.Errorf("%s: the WAV header's rate: %w", path, err)
	}
	if err := checkCenter(raw.CenterHz); err != nil {
		return nil, fmt.Errorf("%s: --center: %w", path, err)
	}
	if raw.SampleRate != 0 && !close9(raw.SampleRate, rate) {
		return nil, fmt.Errorf("%s: --rate %v Hz conflicts with the WAV header's %d Hz", path, raw.SampleRate, h.rateHz)
	}
	if raw.Format != "" && raw.Format != dt {
		return nil, fmt.Errorf("%s: --format %s conflicts with the WAV header (%s)", path, raw.Format, dt)
	}
	total, err := wholeSamples(h.dataBytes, f)
	if err != nil {
		return nil, fmt.Errorf("%s: WAV data chunk: %w", path, err)
	}
	info := Info{SampleRate: rate, CenterHz: raw.CenterHz, Name: path}
	if !raw.Start.IsZero() {
		info.Start = raw.Start.UTC()
	}
	s, err := newStreamSource(io.NewSectionReader(fh, h.dataOffset, h.dataBytes), closer, f, info, total, nil)
	if err != nil {
		return nil, err
	}
	return s, nil
}
