package sdr

import (
	"bytes"
	"nullseek/internal/testtool"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// .sigmf archives made by outside tools (Python's tarfile in PAX format,
// GNU tar --format=posix) open and stream the same samples as the pair;
// the data is read in place (members in either order).
func TestArchiveFromOutsideTools(t *testing.T) {
	dir := t.TempDir()
	base := filepath.Join(dir, "rec")
	w, err := CreateSigMF(base, Info{SampleRate: 1e6, CenterHz: 1e8}, "ci16_le")
	if err != nil {
		t.Fatal(err)
	}
	src := make([]complex64, 3000)
	for i := range src {
		src[i] = complex(float32(i%100)/128, -float32(i%50)/256)
	}
	w.Write(src)
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	want := readAllPath(t, base+".sigmf-meta")

	t.Run("python tarfile pax, data first", func(t *testing.T) {
		py := testtool.Need(t, testtool.DebianPython)
		arc := filepath.Join(dir, "py.sigmf")
		// Python 3 tarfile, PAX_FORMAT = POSIX.1-2001 (SigMF v1.2.5 archive format).
		run(t, py, "-c", `import sys, tarfile
with tarfile.open(sys.argv[1], "w", format=tarfile.PAX_FORMAT) as t:
    t.add(sys.argv[2] + ".sigmf-data", arcname="py/rec.sigmf-data")
    t.add(sys.argv[2] + ".sigmf-meta", arcname="py/rec.sigmf-meta")`, arc, base)
		if got := readAllPath(t, arc); !equalIQ(got, want) {
			t.Errorf("archive samples differ from the pair (%d vs %d)", len(got), len(want))
		}
	})
	t.Run("GNU tar posix", func(t *testing.T) {
		tarBin := testtool.Need(t, "tar", "--version")
		arc := filepath.Join(dir, "gnu.sigmf")
		run(t, tarBin, "--format=posix", "-C", dir, "-cf", arc, "rec.sigmf-meta", "rec.sigmf-data")
		if got := readAllPath(t, arc); !equalIQ(got, want) {
			t.Errorf("archive samples differ from the pair")
		}
	})
	t.Run("our archive read by GNU tar", func(t *testing.T) {
		tarBin := testtool.Need(t, "tar", "--version")
		arc := filepath.Join(dir, "ours.sigmf")
		if err := WriteSigMFArchive(arc, base); err != nil {
			t.Fatal(err)
		}
		list := string(run(t, tarBin, "-tvf", arc))
		for _, n := range []string{"ours/rec.sigmf-meta", "ours/rec.sigmf-data"} {
			if !strings.Contains(list, n) {
				t.Errorf("tar -t lacks %s:\n%s", n, list)
			}
		}
		out := filepath.Join(dir, "x")
		os.Mkdir(out, 0o755)
		run(t, tarBin, "-C", out, "-xf", arc)
		a, _ := os.ReadFile(filepath.Join(out, "ours", "rec.sigmf-data"))
		b, _ := os.ReadFile(base + ".sigmf-data")
		if !bytes.Equal(a, b) {
			t.Error("GNU tar extracted different data")
		}
		if got := readAllPath(t, arc); !equalIQ(got, want) {
			t.Errorf("our archive samples differ")
		}
	})
	t.Run("two recordings refused", func(t *testing.T) {
		tarBin := testtool.Need(t, "tar", "--version")
		mb, _ := os.ReadFile(base + ".sigmf-meta")
		writeFile(t, filepath.Join(dir, "rec2.sigmf-meta"), mb)
		arc := filepath.Join(dir, "two.sigmf")
		run(t, tarBin, "--format=posix", "-C", dir, "-cf", arc, "rec.sigmf-meta", "rec.sigmf-data", "rec2.sigmf-meta")
		if _, err := Open(arc, RawParams{}); err == nil || !strings.Contains(err.Error(), "2 recordings") {
			t.Errorf("err = %v", err)
		}
	})
}

func readAllPath(t *testing.T, p string) []complex64 {
	t.Helper()
	s, err := Open(p, RawParams{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	return readAll(t, s, 1000)
}

func equalIQ(a, b []complex64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// WAV IQ written by sox (SoX 14.4, outside reference) in 8-bit unsigned,
// 16-bit signed and 32-bit float: the rate comes from the header and the
// samples equal sox's own decoding (`sox x.wav -t f32`, or the raw bytes for
// 8-bit, which nullseek reads with the cu8 convention).
func TestWAVFromSox(t *testing.T) {
	sox := testtool.Need(t, "sox", "--version")
	dir := t.TempDir()
	for _, c := range []struct{ name, bits, enc, format string }{
		{"u8", "8", "unsigned-integer", "cu8"},
		{"s16", "16", "signed-integer", "ci16_le"},
		{"f32", "32", "floating-point", "cf32_le"},
	} {
		t.Run(c.name, func(t *testing.T) {
			wav := filepath.Join(dir, c.name+".wav")
			run(t, sox, "-n", "-r", "48000", "-c", "2", "-b", c.bits, "-e", c.enc, wav, "synth", "0.1", "sine", "1000", "sine", "1500", "vol", "0.9")
			s, err := Open(wav, RawParams{})
			if err != nil {
				t.Fatal(err)
			}
			defer s.Close()
			if s.Info().SampleRate != 48000 || s.Info().Format != c.format || s.Info().Samples != 4800 {
				t.Errorf("info %+v", s.Info())
			}
			got := readAll(t, s, 1000)
			var want []complex64
			if c.name == "u8" {
				raw := filepath.Join(dir, "u8.raw")
				run(t, sox, wav, "-t", "u8", raw)
				b, _ := os.ReadFile(raw)
				for i := 0; i+1 < len(b); i += 2 {
					want = append(want, complex(CU8Value(b[i]), CU8Value(b[i+1])))
				}
			} else {
				ref := filepath.Join(dir, c.name+".f32")
				run(t, sox, wav, "-t", "f32", ref)
				want = readCF32(t, ref)
			}
			if !equalIQ(got, want) {
				t.Fatalf("WAV decode differs from sox (%d vs %d samples; first %v vs %v)", len(got), len(want), got[:2], want[:2])
			}
		})
	}
	t.Run("mono refused", func(t *testing.T) {
		wav := filepath.Join(dir, "mono.wav")
		run(t, sox, "-n", "-r", "8000", "-c", "1", "-b", "16", wav, "synth", "0.01", "sine", "1000")
		if _, err := Open(wav, RawParams{}); err == nil || !strings.Contains(err.Error(), "1 channel") {
			t.Errorf("err = %v", err)
		}
	})
	t.Run("rate conflict", func(t *testing.T) {
		if _, err := Open(filepath.Join(dir, "s16.wav"), RawParams{SampleRate: 96000}); err == nil || !strings.Contains(err.Error(), "conflicts") {
			t.Errorf("err = %v", err)
		}
	})
}
