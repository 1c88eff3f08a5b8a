package heading

import (
	"context"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"runtime"
	"strings"
	"testing"
	"time"

	"nullseek/internal/testtool"
)

// makeBadLog writes, with Debian's Python (its own NMEA 0183 checksum: the
// XOR of the characters between '$' and '*'), an 1,800-line compass log
// stamped in seconds at 10 Hz, turning 1° per line, with one line of each
// bad kind in it: a garbage line starting with '$' (17), a corrupted
// checksum (903), a bare sentence without a stamp (1200), a 20 MB line
// (1500), a 90-byte sentence, over NMEA 0183's 82 bytes (1600), and a
// stamp that goes back (1700).
func makeBadLog(t *testing.T) string {
	t.Helper()
	py := testtool.Python(t, "functools")
	p := filepath.Join(t.TempDir(), "bad.nmea")
	script := `
import functools, sys
def cs(body): return "%02X" % functools.reduce(lambda a, c: a ^ ord(c), body, 0)
def sen(body): return "$%s*%s" % (body, cs(body))
assert sen("GPHDT,274.07,T") == "$GPHDT,274.07,T*03"  # NMEA 0183 example
out = open(sys.argv[1], "w")
for n in range(1, 1801):
    t = (n - 1) / 10.0
    s = sen("HCHDT,%.1f,T" % ((n - 1) % 360))
    if n == 17:
        s = sen("HCHDT,12x.5,T")
    elif n == 903:
        s = s[:-2] + ("00" if s[-2:] != "00" else "11")
    elif n == 1200:
        out.write(s + "\r\n"); continue
    elif n == 1500:
        out.write("x" * 20000000 + "\r\n"); continue
    elif n == 1600:
        s = sen("HCHDT,%.1f,T," % ((n - 1) % 360) + "0" * 70)
        assert len(s) + 2 > 82
    elif n == 1700:
        t = 1.0
    out.write("%.1f %s\r\n" % (t, s))
`
	out, err := exec.Command(py, "-c", script, p).CombinedOutput()
	if err != nil {
		t.Fatalf("python: %v\n%s", err, out)
	}
	return p
}

// One bad line of each kind does not reject an 1,800-line file: each is
// skipped, counted by kind with its line number, and the 20 MB line costs
// bounded memory and is reported as too long.
func TestReadNMEASkipsBadLines(t *testing.T) {
	p := makeBadLog(t)
	f, err := os.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	tr, st, err := ReadNMEA(f, NMEAFileOptions{Ref: True, Name: "bad.nmea", Logger: discardLogger})
	runtime.ReadMemStats(&after)
	if err != nil {
		t.Fatal(err)
	}
	if got := after.TotalAlloc - before.TotalAlloc; got > 8<<20 {
		t.Errorf("reading allocated %d MB: the 20 MB line was held", got>>20)
	}
	if st.Lines != 1800 || st.Accepted != 1794 || len(tr.Samples) != 1794 {
		t.Errorf("lines %d, accepted %d, samples %d; want 1800, 1794, 1794 (%s)", st.Lines, st.Accepted, len(tr.Samples), st)
	}
	want := map[NMEAProblem][]int{
		ProblemGarbage: {17}, ProblemChecksum: {903}, ProblemUntimed: {1200},
		ProblemTooLong: {1500, 1600}, ProblemStale: {1700},
	}
	for p := NMEAProblem(0); p < nProblems; p++ {
		if got := st.Where(p); !reflect.DeepEqual(got, want[p]) || st.Count(p) != len(want[p]) {
			t.Errorf("%s: count %d at lines %v, want lines %v", p, st.Count(p), got, want[p])
		}
	}
	s := st.String()
	for _, frag := range []string{"1800 lines: 1794 accepted", "1 garbage (line 17)", "2 too long (lines 1500, 1600)", "1 bad checksum (line 903)", "1 untimed (line 1200)", "1 out of time order (line 1700)", "first problem: line 17:"} {
		if !strings.Contains(s, frag) {
			t.Errorf("summary %q lacks %q", s, frag)
		}
	}
	// Line 16 read 15° at 1.5 s; line 18 17° at 1.7 s (NMEA stamps as
	// written); 1.6 s, whose line was garbage, interpolates to 16°.
	if h, ok := tr.At(1.6); !ok || !near(h, 16, 1e-9) {
		t.Errorf("At(1.6) = %v, %v; want 16°", h, ok)
	}
}

// A file is refused only when nothing usable is left, and the advice
// names a flag that exists (--nmea-rate, --start) or what to change.
func TestReadNMEARefusalAdvice(t *testing.T) {
	hdt := "$GPHDT,274.07,T*03" // NMEA 0183 example sentence
	cases := []struct {
		name, in string
		opts     NMEAFileOptions
		has      []string
	}{
		{"bare only, no rate", strings.Repeat(hdt+"\n", 3), NMEAFileOptions{Ref: True}, []string{"3 bare sentences carry no time", "--nmea-rate HZ", "3 untimed (lines 1, 2, 3)"}},
		{"RFC 3339 without a start", "2025-06-01T10:00:01Z " + hdt + "\n", NMEAFileOptions{Ref: True}, []string{"--start", "1 untimed (line 1)"}},
		{"no checksums", "$GPHDT,10.5,T\n", NMEAFileOptions{Ref: True, PaceHz: 1}, []string{"1 without checksum (line 1)", "requires the *hh checksum"}},
		{"a 20 MB line only", strings.Repeat("$", 20<<20) + "\n", NMEAFileOptions{Ref: True, PaceHz: 1}, []string{"1 lines: 0 accepted, 1 too long (line 1)", "longer than 4096 bytes"}},
		{"a 20 MB line without newline", strings.Repeat("1", 20<<20), NMEAFileOptions{Ref: True}, []string{"1 too long (line 1)"}},
		{"rate out of range", hdt + "\n", NMEAFileOptions{Ref: True, PaceHz: 1e9}, []string{"--nmea-rate", "(0, 100] Hz"}},
	}
	for _, c := range cases {
		c.opts.Logger = discardLogger
		_, _, err := ReadNMEA(strings.NewReader(c.in), c.opts)
		if err == nil {
			t.Errorf("%s: accepted", c.name)
			continue
		}
		if strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: multi-line error", c.name)
		}
		for _, h := range c.has {
			if !strings.Contains(err.Error(), h) {
				t.Errorf("%s: error %q lacks %q", c.name, err, h)
			}
		}
	}
	// With the rate the same bare file is read.
	tr, _, err := ReadNMEA(strings.NewReader(strings.Repeat(hdt+"\n", 3)), NMEAFileOptions{Ref: True, PaceHz: 2, Logger: discardLogger})
	if err != nil || len(tr.Samples) != 3 || tr.Samples[2].T != 1 {
		t.Errorf("paced bare file: %v, %v", tr, err)
	}
}

// The live stream reads lines in bounded memory too: a flood without a
// newline, longer than the idle timeout, is reported once as too long
// (not as silence), and the sentences after it are read.
func TestNMEAStreamLongLine(t *testing.T) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	go func() {
		c, err := l.Accept()
		if err != nil {
			return
		}
		defer c.Close()
		chunk := []byte(strings.Repeat("x", 64<<10))
		for end := time.Now().Add(time.Second); time.Now().Before(end); {
			if _, err := c.Write(chunk); err != nil {
				return
			}
			time.Sleep(10 * time.Millisecond)
		}
		c.Write([]byte("\r\n$GPHDT,274.07,T*03\r\n")) // NMEA 0183 example sentence
	}()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	s, err := DialNMEA(ctx, "tcp://"+l.Addr().String())
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	s.Logger = discardLogger
	s.IdleTimeout = 300 * time.Millisecond
	tr, err := s.Record(ctx, time.Now(), True)
	if err != nil {
		t.Fatal(err)
	}
	st := s.Stats()
	if len(tr.Samples) != 1 || tr.Samples[0].Deg != 274.07 || st.TooLong != 1 || st.Lines != 2 {
		t.Errorf("samples %v, stats %s; want the one HDT after one too-long line", tr.Samples, st)
	}
	if got := splitDatagram([]byte("$GPHDT,274.07,T*03\r\n" + strings.Repeat("y", 5000) + "\n\n")); len(got) != 2 || got[0].tooLong || !got[1].tooLong || len(got[1].text) != MaxLineBytes {
		t.Errorf("datagram lines %d: %+v", len(got), got)
	}
}
