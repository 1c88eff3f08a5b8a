package sdr

import (
	"archive/tar"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"strings"
	"testing"
	"time"
)

// FuzzParseMeta: any input gives a *Meta or an error, never a panic; what
// parses survives a marshal/parse round trip. Seeds stay small and on one
// line: the official logo meta (1.4 kB, indented) as a seed kept both
// workers in Go's quadratic minimiser (72 executions in 30 s); its fields
// are in the compact seed below instead (TestParseMetaOfficialLogo reads
// the file itself).
func FuzzParseMeta(f *testing.F) {
	seeds := []string{
		`{"global":{"core:datatype":"ri16_le","core:version":"1.2.0","core:sample_rate":48000,"core:num_channels":2,"core:license":"x","core:sha512":"` + strings.Repeat("a", 128) + `"},"captures":[{"core:sample_start":0,"core:datetime":"2021-06-18T23:17:51.163959Z"}],"annotations":[{"core:sample_start":0,"core:sample_count":9,"core:freq_lower_edge":-22000,"core:freq_upper_edge":22000,"core:comment":"c"}]}`,
		`{"global":{"core:datatype":"cu8","core:version":"1.2.0"},"captures":[],"annotations":[]}`,
		`{"global":{"core:datatype":"cf32_le","core:version":"1.2.0","core:sample_rate":2.4e6,"core:extensions":[{"name":"antenna","version":"1.0.0","optional":true}],"core:geolocation":{"type":"Point","coordinates":[1,2,3]}},"captures":[{"core:sample_start":0,"core:frequency":1.455e8,"core:datetime":"2024-01-01T00:00:00.5Z","core:header_bytes":4}],"annotations":[{"core:sample_start":1,"core:sample_count":2,"core:freq_lower_edge":1,"core:freq_upper_edge":2,"core:label":"x"}]}`,
		`{"global":{"core:datatype":"ci16_le","core:version":"1.2.0"},"captures":[{"core:sample_start":5},{"core:sample_start":1}]}`,
		`{"global":null}`, `[]`, `{`, `{"global":{"core:datatype":1}}`, `{"captures":[{"core:datetime":"x"}]}`,
	}
	for _, s := range seeds {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := ParseMeta(b)
		if err != nil {
			if m != nil {
				t.Fatal("meta and error")
			}
			return
		}
		out, err := m.MarshalJSON()
		if err != nil {
			t.Fatalf("marshal of parsed meta: %v", err)
		}
		if _, err := ParseMeta(out); err != nil {
			t.Fatalf("re-parse failed: %v\ninput %q\noutput %s", err, b, out)
		}
	})
}

// FuzzRawReader: arbitrary bytes in any datatype, known or unknown length,
// read with arbitrary block sizes: no panic, sample counts consistent with
// the byte count, errors only for leftover bytes, emptiness or non-finite
// floats.
func FuzzRawReader(f *testing.F) {
	f.Add([]byte{0, 255, 127, 128}, uint8(0), uint8(3), false)
	f.Add([]byte{1, 2, 3, 4, 5, 6, 7, 8, 0, 0, 0xc0, 0x7f, 0, 0, 0, 0}, uint8(3), uint8(1), true)
	f.Add([]byte{1, 2, 3}, uint8(2), uint8(7), false)
	f.Add([]byte{}, uint8(1), uint8(1), true)
	formats := []string{"cu8", "ci8", "ci16_le", "cf32_le", "cf32_be", "cf64_le", "cu16_be", "ci32_le"}
	f.Fuzz(func(t *testing.T, data []byte, fi, block uint8, unknown bool) {
		dt := formats[int(fi)%len(formats)]
		fmt, _ := parseFormat(dt)
		size := int64(len(data))
		if unknown {
			size = -1
		}
		s, err := NewRawSource(bytes.NewReader(data), size, RawParams{SampleRate: 1e6, Format: dt}, "fuzz")
		if err != nil {
			if !unknown && (len(data) == 0 || len(data)%fmt.bytesPerSample() != 0) {
				return
			}
			t.Fatalf("unexpected open error: %v", err)
		}
		buf := make([]complex64, int(block)+1)
		total := 0
		for {
			n, err := s.Read(buf)
			if n < 0 || n > len(buf) {
				t.Fatalf("n = %d", n)
			}
			total += n
			if err != nil {
				if !errors.Is(err, io.EOF) && !fmt.isFloat() && len(data)%fmt.bytesPerSample() == 0 && len(data) > 0 {
					t.Fatalf("integer data of whole samples failed: %v", err)
				}
				break
			}
		}
		if total > len(data)/fmt.bytesPerSample() {
			t.Fatalf("read %d samples from %d bytes", total, len(data))
		}
		if !fmt.isFloat() && len(data)%fmt.bytesPerSample() == 0 && total != len(data)/fmt.bytesPerSample() {
			t.Fatalf("read %d of %d samples", total, len(data)/fmt.bytesPerSample())
		}
	})
}

// drain reads s to its end in blocks of block+1 samples and returns the
// count and the final error (nil at a clean end).
func drain(t *testing.T, s Source, block int) (int64, error) {
	buf := make([]complex64, block+1)
	var total int64
	for {
		n, err := s.Read(buf)
		if n < 0 || n > len(buf) {
			t.Fatalf("Read returned n = %d for %d", n, len(buf))
		}
		total += int64(n)
		if err != nil {
			if errors.Is(err, io.EOF) {
				return total, nil
			}
			return total, err
		}
	}
}

// oneLine fails the test on an error of more than one line.
func oneLine(t *testing.T, err error) {
	if err != nil && strings.Contains(err.Error(), "\n") {
		t.Fatalf("multi-line error %q", err)
	}
}

// FuzzWAVHeader: any bytes as a .wav file (RIFF/WAVE, Microsoft/IBM
// Multimedia Programming Interface and Data Specifications 1.0): no panic,
// one-line errors; what opens passes Info.Validate, its data chunk lies in
// the file, and it delivers at most Info().Samples samples.
func FuzzWAVHeader(f *testing.F) {
	f.Add(wavBytes(48000, 2, 16, 4, 1, 16), uint8(3))
	f.Add(wavBytes(2400000, 2, 8, 2, 1, 10), uint8(0))
	f.Add(wavBytes(96000, 2, 32, 8, 3, 64), uint8(7))
	f.Add(wavBytes(48000, 1, 16, 2, 1, 8), uint8(1))
	ext := wavBytes(48000, 2, 32, 8, 0xfffe, 32)
	f.Add(ext, uint8(2))
	f.Add([]byte("RIFF\x00\x00\x00\x00WAVE"), uint8(1))
	f.Fuzz(func(t *testing.T, data []byte, block uint8) {
		h, err := parseWAV(bytes.NewReader(data), int64(len(data)))
		oneLine(t, err)
		if err == nil && (h.dataOffset < 12 || h.dataBytes < 0 || h.dataOffset+h.dataBytes > int64(len(data))) {
			t.Fatalf("data chunk at %d+%d outside a %d-byte file", h.dataOffset, h.dataBytes, len(data))
		}
		s, err := wavSource(bytes.NewReader(data), nil, int64(len(data)), "fuzz.wav", RawParams{})
		oneLine(t, err)
		if err != nil {
			return
		}
		info := s.Info()
		if err := info.Validate(); err != nil {
			t.Fatalf("opened with invalid info: %v", err)
		}
		n, err := drain(t, s, int(block))
		oneLine(t, err)
		if n > info.Samples || (err == nil && n != info.Samples) {
			t.Fatalf("read %d samples of %d (err %v)", n, info.Samples, err)
		}
	})
}

// fuzzArchive builds a .sigmf archive (a tar, SigMF v1.2.5 Archive) from
// small parts: the recording's meta and data under base, in the tar format
// and entry layout that the bits of shape choose, then sets one byte at
// corruptAt (when below the length) to corruptVal.
//
// Shape bits: 0–1 format (USTAR, PAX, GNU, PAX); 2 data before meta; 3 a
// directory entry first; 4 a second recording's meta; 5 the meta is a
// symbolic link; 6 the data is a directory; 7 no end-of-archive blocks.
func fuzzArchive(meta string, data []byte, base string, shape uint8, corruptAt uint16, corruptVal byte) []byte {
	var b bytes.Buffer
	tw := tar.NewWriter(&b)
	format := [4]tar.Format{tar.FormatUSTAR, tar.FormatPAX, tar.FormatGNU, tar.FormatPAX}[shape&3]
	add := func(name string, flag byte, body []byte) {
		h := &tar.Header{Typeflag: flag, Name: name, Mode: 0o644, Format: format}
		if flag == tar.TypeReg {
			h.Size = int64(len(body))
		}
		if flag == tar.TypeSymlink {
			h.Linkname = "elsewhere"
		}
		if tw.WriteHeader(h) == nil && flag == tar.TypeReg {
			tw.Write(body)
		}
	}
	if shape&8 != 0 {
		add(base+"/", tar.TypeDir, nil)
	}
	metaFlag, dataFlag := byte(tar.TypeReg), byte(tar.TypeReg)
	if shape&32 != 0 {
		metaFlag = tar.TypeSymlink
	}
	if shape&64 != 0 {
		dataFlag = tar.TypeDir
	}
	entries := []func(){
		func() { add(base+".sigmf-meta", metaFlag, []byte(meta)) },
		func() { add(base+".sigmf-data", dataFlag, data) },
	}
	if shape&4 != 0 {
		entries[0], entries[1] = entries[1], entries[0]
	}
	for _, e := range entries {
		e()
	}
	if shape&16 != 0 {
		add(base+"-2.sigmf-meta", tar.TypeReg, []byte(meta))
	}
	if shape&128 == 0 {
		tw.Close()
	} else {
		tw.Flush()
	}
	out := b.Bytes()
	if int(corruptAt) < len(out) {
		out[corruptAt] = corruptVal
	}
	return out
}

// FuzzSigMFArchive: a .sigmf archive (POSIX tar) built from a fuzzed meta,
// data, name, layout and one corrupted byte: no panic, one-line errors,
// bounded work; what opens passes Info.Validate and delivers at most
// Info().Samples samples. The archive is built inside the target so the
// fuzzer's inputs stay small: Go's minimiser removes every sub-range of an
// input (internal/fuzz minimizeBytes, quadratic in its length), and a raw
// tar is at least 1.5 kB of 512-byte blocks, which would keep a worker
// minimising instead of fuzzing.
func FuzzSigMFArchive(f *testing.F) {
	meta := `{"global":{"core:datatype":"cu8","core:version":"1.2.0","core:sample_rate":48000},"captures":[{"core:sample_start":0,"core:frequency":145e6}],"annotations":[]}`
	f.Add(meta, []byte{0, 255, 128, 127}, "rec/rec", uint8(1), uint16(65535), byte(0), uint8(1))
	f.Add(meta, []byte{0, 255}, "r", uint8(4|8), uint16(65535), byte(0), uint8(0))
	f.Add(meta, []byte{0, 255}, "r", uint8(16), uint16(65535), byte(0), uint8(0))
	f.Add(strings.Replace(meta, "cu8", "cf32_le", 1), []byte{0, 0, 0xc0, 0x7f, 0, 0, 0, 0}, "x", uint8(2), uint16(124), byte('7'), uint8(4))
	f.Add(strings.Replace(meta, `"core:sample_rate":48000`, `"core:sample_rate":48000,"core:dataset":"other.bin"`, 1), []byte{1, 2}, "d", uint8(0), uint16(156), byte('5'), uint8(0))
	f.Add(meta, []byte{}, "e", uint8(32|64|128), uint16(0), byte(0), uint8(0))
	f.Fuzz(func(t *testing.T, meta string, data []byte, base string, shape uint8, corruptAt uint16, corruptVal byte, block uint8) {
		if len(meta) > 4096 || len(data) > 4096 || len(base) > 200 {
			return
		}
		arc := fuzzArchive(meta, data, base, shape, corruptAt, corruptVal)
		s, err := archiveSource(bytes.NewReader(arc), nil, "fuzz.sigmf", RawParams{})
		oneLine(t, err)
		if err != nil {
			return
		}
		info := s.Info()
		if err := info.Validate(); err != nil {
			t.Fatalf("opened with invalid info: %v", err)
		}
		n, err := drain(t, s, int(block))
		oneLine(t, err)
		if n > info.Samples {
			t.Fatalf("read %d samples of %d", n, info.Samples)
		}
	})
}

// The entry bound: an archive of many empty entries is refused once past
// maxArchiveEntries, naming the bound.
func TestArchiveEntryBound(t *testing.T) {
	var b bytes.Buffer
	tw := tar.NewWriter(&b)
	for i := 0; i < 2*maxArchiveEntries; i++ {
		tw.WriteHeader(&tar.Header{Typeflag: tar.TypeReg, Name: fmt.Sprintf("junk%d", i), Mode: 0o644})
	}
	tw.Close()
	_, err := archiveSource(bytes.NewReader(b.Bytes()), nil, "many.sigmf", RawParams{})
	if err == nil || !strings.Contains(err.Error(), "more than 256 entries") {
		t.Errorf("512 entries: %v", err)
	}
}

// FuzzRTLTCPStream: any bytes from an rtl_tcp server (osmocom rtl-sdr
// src/rtl_tcp.c: a 12-byte greeting "RTL0", tuner type, gain count, then
// cu8 IQ), delivered in chunks of any size, over an in-memory connection.
// A greeting that is short or lacks "RTL0" is refused in one line; after
// a good one every whole IQ pair sent is delivered, unchanged, in order.
func FuzzRTLTCPStream(f *testing.F) {
	good := []byte("RTL0\x00\x00\x00\x05\x00\x00\x00\x1d")
	f.Add(append(append([]byte{}, good...), 1, 2, 3, 4, 5), uint16(1))
	f.Add(append(append([]byte{}, good...), make([]byte, 41)...), uint16(7))
	f.Add([]byte("RTL0\x00\x00"), uint16(6))
	f.Add([]byte("HTTP/1.1 200 OK\r\n\r\n"), uint16(3))
	f.Add(good, uint16(12))
	f.Fuzz(func(t *testing.T, data []byte, chunk uint16) {
		if len(data) > 1<<16 {
			return
		}
		srv, cli := net.Pipe()
		go io.Copy(io.Discard, srv) // the client's commands
		go func() {
			defer srv.Close()
			for rest := data; len(rest) > 0; {
				k := min(len(rest), int(chunk)%4096+1)
				if _, err := srv.Write(rest[:k]); err != nil {
					return
				}
				rest = rest[k:]
			}
		}()
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		cfg := RTLConfig{SampleRate: 2.4e6, EOFOnClose: true}
		c, err := startRTLTCP(ctx, cli, "fuzz", cfg, 5*time.Second, nil)
		oneLine(t, err)
		goodMagic := len(data) >= 12 && string(data[:4]) == "RTL0"
		if err != nil {
			if goodMagic && len(data) >= 14 {
				t.Fatalf("good greeting and %d IQ bytes refused: %v", len(data)-12, err)
			}
			return
		}
		defer c.Close()
		if !goodMagic {
			t.Fatalf("greeting %q accepted", data[:min(len(data), 12)])
		}
		var got []byte
		buf := make([]byte, int(chunk)%5000+2)
		for {
			n, err := c.ReadCU8(buf)
			if n%2 != 0 {
				t.Fatalf("odd byte count %d", n)
			}
			got = append(got, buf[:n]...)
			if err != nil {
				if !errors.Is(err, io.EOF) {
					t.Fatalf("read: %v", err)
				}
				break
			}
		}
		want := data[12:]
		want = want[:len(want)/2*2]
		if !bytes.Equal(got, want) {
			t.Fatalf("delivered %d bytes, want the %d sent", len(got), len(want))
		}
	})
}
