//go:build linux

package main

import (
	"archive/tar"
	"bytes"
	"encoding/binary"
	"fmt"
	"nullseek/internal/testtool"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// Command lines the cases start from. steps96k is the GNU Radio burst
// fixture (testdata/bursts, carrier at +17321.4 Hz); turning is
// testdata/hostile/make_turning.py's recording (carrier at +10 kHz, one
// whole turn of the antenna), whose heading log is
// turning-headings.csv.
var (
	hScan     = []string{"scan", "{fx}/steps96k.sigmf-meta", "--offset", stepsOffset}
	hSlots    = []string{"slots", "{fx}/steps96k.sigmf-meta", "--offset", stepsOffset}
	hBearing  = []string{"bearing", "{fx}/turning.sigmf-meta", "--offset", "10k", "--headings", "{fx}/turning-headings.csv"}
	hCal      = []string{"calibrate", "{fx}/turning.sigmf-meta", "--offset", "10k", "--headings", "{fx}/turning-headings.csv", "--known-bearing", "200"}
	hFix      = []string{"fix", "{in}/b.csv"}
	hLive     = []string{"bearing", "rtl_tcp://{rtl}", "--freq", "433.92M", "--no-ident"}
	hLiveTurn = append(append([]string{}, hLive...), "--duration", "3", "--turn", "0:120")
)

func with(base []string, more ...string) []string {
	return append(append([]string{}, base...), more...)
}

// hostileBearings is a good bearings file: one transmitter seen from
// three stations (invented positions; the lines meet near 45.15 N 6.15 E).
const hostileBearings = `ident,station,lat,lon,bearing_deg,sigma_deg,reference,time
N0CALL/1,A,45.10,6.10,35.3,2,true,2026-05-01T10:00:00Z
N0CALL/1,B,45.10,6.20,324.7,2,true,2026-05-01T10:00:00Z
N0CALL/1,C,45.20,6.15,180.0,2,true,2026-05-01T10:00:00Z
`

const bearingsHeader = "ident,station,lat,lon,bearing_deg,sigma_deg,reference,time\n"

// metaText is the steps96k SigMF metadata with substitutions (old, new
// pairs), each of which must apply.
func metaText(t *testing.T, pairs ...string) string {
	b, err := os.ReadFile(stepsMeta)
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	for i := 0; i+1 < len(pairs); i += 2 {
		if !strings.Contains(s, pairs[i]) {
			t.Fatalf("steps96k.sigmf-meta has no %q", pairs[i])
		}
		s = strings.Replace(s, pairs[i], pairs[i+1], 1)
	}
	return s
}

// tarEntry is one member of a hand-made archive.
type tarEntry struct {
	name, body, link string
	typ              byte
	size             int64 // header size when it lies (0: the body's)
}

// tarOf writes a tar (POSIX ustar/PAX, archive/tar) from entries; cut
// keeps only the first cut bytes (0: all).
func tarOf(t *testing.T, cut int, es ...tarEntry) string {
	var b bytes.Buffer
	tw := tar.NewWriter(&b)
	for _, e := range es {
		h := &tar.Header{Name: e.name, Mode: 0o644, Size: int64(len(e.body)), Typeflag: e.typ, Linkname: e.link, ModTime: time.Unix(1777629600, 0)}
		if h.Typeflag == 0 {
			h.Typeflag = tar.TypeReg
		}
		if h.Typeflag != tar.TypeReg {
			h.Size = 0
		}
		if err := tw.WriteHeader(h); err != nil {
			t.Fatal(err)
		}
		if h.Size > 0 {
			if _, err := tw.Write([]byte(e.body)); err != nil {
				t.Fatal(err)
			}
		}
	}
	if err := tw.Close(); err != nil {
		t.Fatal(err)
	}
	s := b.String()
	if cut > 0 {
		s = s[:cut]
	}
	return s
}

// wavOf is a RIFF/WAVE file (format tag, channels, rate, bits) with a
// data chunk of length dataLen (as written in the header) holding body.
func wavOf(tag, channels uint16, rate uint32, bits uint16, dataLen uint32, body []byte) string {
	var b bytes.Buffer
	le := func(v any) { binary.Write(&b, binary.LittleEndian, v) }
	b.WriteString("RIFF")
	le(uint32(36 + len(body)))
	b.WriteString("WAVEfmt ")
	le(uint32(16))
	le(tag)
	le(channels)
	le(rate)
	align := channels * bits / 8
	le(rate * uint32(align))
	le(align)
	le(bits)
	b.WriteString("data")
	le(dataLen)
	b.Write(body)
	return b.String()
}

// mkfifo, symlink and bigLine are setup helpers.
func mkfifo(t *testing.T, path string) {
	if err := syscall.Mkfifo(path, 0o644); err != nil {
		t.Fatal(err)
	}
}

func symlink(t *testing.T, target, link string) {
	if err := os.Symlink(target, link); err != nil {
		t.Fatal(err)
	}
}

// patternJSON is a pattern file of 360 gains at 1° steps, gain(k) the
// JSON text of the k-th.
func patternJSON(mode string, gain func(k int) string) string {
	g := make([]string, 360)
	for k := range g {
		g[k] = gain(k)
	}
	return `{"format": "nullseek-antenna-pattern", "version": 1, "mode": "` + mode + `", "symmetry": 1, "step_deg": 1, "gain_db": [` + strings.Join(g, ", ") + `]}`
}

func idList(n int, sep string) string {
	ids := make([]string, n)
	for i := range ids {
		ids[i] = fmt.Sprintf("N0CALL/%d", i+1)
	}
	return strings.Join(ids, sep)
}

// hostileCases is the corpus. Each case's comment, where the case is not
// self-explaining, says what it probes; "issue 10" marks the inputs the
// probe that filed issue 10 found fatal, hanging or silently accepted.
func hostileCases(t *testing.T) []hostileCase {
	steps := map[string]string{"r.sigmf-data": "@fx/steps96k.sigmf-data"}
	meta := func(pairs ...string) map[string]string {
		return map[string]string{"r.sigmf-meta": metaText(t, pairs...), "r.sigmf-data": "@fx/steps96k.sigmf-data"}
	}
	rIn := []string{"scan", "{in}/r.sigmf-meta", "--offset", stepsOffset}
	raw := []string{"scan", "{in}/r.cu8", "--format", "cu8", "--offset", "0"}
	rawFile := map[string]string{"r.cu8": strings.Repeat("\x7f\x80", 1<<15)}
	stepsBytes, err := os.ReadFile(stepsData)
	if err != nil {
		t.Fatal(err)
	}
	stepsMetaGood := metaText(t)
	arch := func(cut int, es ...tarEntry) map[string]string {
		return map[string]string{"r.sigmf": tarOf(t, cut, es...)}
	}
	rArch := []string{"scan", "{in}/r.sigmf", "--offset", stepsOffset}
	good := tarEntry{name: "r/r.sigmf-meta", body: stepsMetaGood}
	goodData := tarEntry{name: "r/r.sigmf-data", body: string(stepsBytes)}
	bcsv := func(s string) map[string]string { return map[string]string{"b.csv": s} }
	pattern := func(body string) map[string]string { return map[string]string{"p.json": body} }
	hPat := with(hBearing, "--antenna", "{in}/p.json")
	gridFile := func(body string) map[string]string {
		return map[string]string{"b.csv": hostileBearings, "g.json": body}
	}
	fixGrid := with(hFix, "--grid-file", "{in}/g.json")
	headings := func(body string) map[string]string { return map[string]string{"h.csv": body} }
	hHead := []string{"bearing", "{fx}/turning.sigmf-meta", "--offset", "10k", "--headings", "{in}/h.csv"}
	nmea := func(body string) map[string]string { return map[string]string{"h.nmea": body} }
	hNMEA := []string{"bearing", "{fx}/turning.sigmf-meta", "--offset", "10k", "--nmea", "{in}/h.nmea"}
	// A 10 Hz heading log of the turn as NMEA HDT, each led by its time in
	// seconds from the capture's start.
	var hdt strings.Builder
	for k := 0; k <= 50; k++ {
		hdt.WriteString(nmeaLine(fmt.Sprintf("%.2f", 0.1*float64(k)), fmt.Sprintf("HCHDT,%.1f,T", 9*float64(k))))
	}

	return []hostileCase{
		// ---- scan: SigMF metadata that lies or breaks -----------------
		{name: "scan/meta sample_rate 1e12", files: meta("96000.0", "1e12"), args: rIn, want: "sample_rate"}, // issue 10: out of memory
		{name: "scan/meta sample_rate 1e300", files: meta("96000.0", "1e300"), args: rIn, want: "sample_rate"},
		{name: "scan/meta sample_rate negative", files: meta("96000.0", "-96000"), args: rIn, want: "sample_rate"},
		{name: "scan/meta sample_rate a string", files: meta("96000.0", `"NaN"`), args: rIn, want: "sample_rate"},
		{name: "scan/meta frequency 1e30", files: meta("433920000.0", "1e30"), args: rIn, want: "frequency"},
		{name: "scan/meta datetime garbage", files: meta("2026-05-01T10:00:00.000Z", "yesterday"), args: rIn, want: "datetime"},
		{name: "scan/meta sample_start past the data", files: meta(`"core:sample_start": 0`, `"core:sample_start": 99999999999`), args: rIn, want: "sample_start"},
		{name: "scan/meta global not an object", files: map[string]string{"r.sigmf-meta": `{"global": 5, "captures": [], "annotations": []}`, "r.sigmf-data": "@fx/steps96k.sigmf-data"}, args: rIn, want: "global"},
		{name: "scan/meta nested 100000 deep", files: map[string]string{"r.sigmf-meta": strings.Repeat("[", 100000), "r.sigmf-data": "@fx/steps96k.sigmf-data"}, args: rIn, want: "r.sigmf-meta"},
		{name: "scan/meta dataset escapes its folder", files: meta(`"core:version"`, `"core:dataset": "../../../etc/passwd", "core:version"`), args: rIn, want: "core:dataset"},
		{name: "scan/meta dataset absolute", files: meta(`"core:version"`, `"core:dataset": "/etc/hostname", "core:version"`), args: rIn, want: "core:dataset"},
		{name: "scan/data is a folder", files: map[string]string{"r.sigmf-meta": stepsMetaGood}, setup: func(t *testing.T, d caseDirs) {
			os.Mkdir(filepath.Join(d.in, "r.sigmf-data"), 0o755)
		}, args: rIn, want: "directory"},
		{name: "scan/meta is 20 MB of spaces", files: steps, setup: func(t *testing.T, d caseDirs) {
			writeFile(t, filepath.Join(d.in, "r.sigmf-meta"), bytes.Repeat([]byte(" "), 20<<20))
		}, args: rIn, want: "r.sigmf-meta"},
		{name: "scan/datatype cf32 over cu8 bytes", files: meta(`"cu8"`, `"cf32_le"`), args: rIn, want: "r.sigmf"},

		// ---- scan: SigMF archives (tar) --------------------------------
		{name: "scan/archive member climbs out", files: arch(0, tarEntry{name: "../../r.sigmf-meta", body: stepsMetaGood}, tarEntry{name: "../../r.sigmf-data", body: string(stepsBytes)}), args: rArch, want: "r.sigmf"},
		{name: "scan/archive member absolute", files: arch(0, tarEntry{name: "/tmp/r.sigmf-meta", body: stepsMetaGood}, tarEntry{name: "/tmp/r.sigmf-data", body: string(stepsBytes)}), args: rArch, want: "r.sigmf"},
		{name: "scan/archive data is a symlink", files: arch(0, good, tarEntry{name: "r/r.sigmf-data", typ: tar.TypeSymlink, link: "/etc/passwd"}), args: rArch, want: "r.sigmf"},
		{name: "scan/archive truncated", files: arch(3000, good, goodData), args: rArch, want: "r.sigmf"},
		{name: "scan/archive meta only", files: arch(0, good), args: rArch, want: "r.sigmf"},
		{name: "scan/archive two recordings", files: arch(0, good, goodData, tarEntry{name: "s/s.sigmf-meta", body: stepsMetaGood}, tarEntry{name: "s/s.sigmf-data", body: string(stepsBytes)}), args: rArch, want: "r.sigmf"},
		{name: "scan/archive is not a tar", files: map[string]string{"r.sigmf": strings.Repeat("not a tar file\n", 200)}, args: rArch, want: "r.sigmf"},

		// ---- scan: WAV and raw ----------------------------------------
		{name: "scan/wav one channel", files: map[string]string{"r.wav": wavOf(1, 1, 48000, 16, 9600, make([]byte, 9600))}, args: []string{"scan", "{in}/r.wav", "--offset", "0"}, want: "channel"},
		{name: "scan/wav rate 0", files: map[string]string{"r.wav": wavOf(1, 2, 0, 16, 9600, make([]byte, 9600))}, args: []string{"scan", "{in}/r.wav", "--offset", "0"}, want: "rate"},
		{name: "scan/wav 7-bit samples", files: map[string]string{"r.wav": wavOf(1, 2, 48000, 7, 9600, make([]byte, 9600))}, args: []string{"scan", "{in}/r.wav", "--offset", "0"}, want: "bit"},
		{name: "scan/wav header only", files: map[string]string{"r.wav": wavOf(1, 2, 48000, 16, 0, nil)}, args: []string{"scan", "{in}/r.wav", "--offset", "0"}, want: "r.wav"},
		{name: "scan/raw --rate 1e11", files: rawFile, args: with(raw, "--rate", "1e11"), want: "--rate"},   // issue 10: index out of range in the FFT
		{name: "scan/raw --rate 1e300", files: rawFile, args: with(raw, "--rate", "1e300"), want: "--rate"}, // issue 10: looped for ever
		{name: "scan/raw --rate 1e10", files: rawFile, args: with(raw, "--rate", "1e10"), want: "--rate"},   // issue 10: 1.6 GB, then a vague error
		{name: "scan/raw --rate NaN", files: rawFile, args: with(raw, "--rate", "NaN"), want: "--rate"},
		{name: "scan/raw --rate -1", files: rawFile, args: with(raw, "--rate", "-1"), want: "rate"},
		{name: "scan/raw --center 1e30", files: rawFile, args: with(raw, "--rate", "96k", "--center", "1e30"), want: "--center"},
		{name: "scan/raw --start garbage", files: rawFile, args: with(raw, "--rate", "96k", "--start", "yesterday"), want: "--start"},
		{name: "scan/recording is a folder", args: []string{"scan", "{in}", "--rate", "96k", "--format", "cu8", "--offset", "0"}, want: "{in}"},

		// ---- scan: numeric flags ---------------------------------------
		{name: "scan/--min-burst -5", args: with(hScan, "--min-burst", "-5"), want: "--min-burst"}, // issue 10: accepted
		{name: "scan/--min-burst NaN", args: with(hScan, "--min-burst", "NaN"), want: "--min-burst"},
		{name: "scan/--merge-gap NaN", args: with(hScan, "--merge-gap", "NaN"), want: "--merge-gap"}, // issue 10: one 49 s burst
		{name: "scan/--merge-gap -1", args: with(hScan, "--merge-gap", "-1"), want: "--merge-gap"},
		{name: "scan/--channel-rate 0", args: with(hScan, "--channel-rate", "0"), want: "--channel-rate"},
		{name: "scan/--channel-rate 1e12", args: with(hScan, "--channel-rate", "1e12"), want: "--channel-rate"},
		{name: "scan/--false-alarms -1", args: with(hScan, "--false-alarms", "-1"), want: "--false-alarms"},
		{name: "scan/--false-alarms NaN", args: with(hScan, "--false-alarms", "NaN"), want: "--false-alarms"},
		{name: "scan/--join-wait -1", args: with(hScan, "--join-wait", "-1"), want: "--join-wait"},
		{name: "scan/--min-confidence 7", args: with(hScan, "--min-confidence", "7"), want: "--min-confidence"}, // issue 10: accepted
		{name: "scan/--min-confidence NaN", args: with(hScan, "--min-confidence", "NaN"), want: "--min-confidence"},
		{name: "scan/--offset 1e300", args: []string{"scan", "{fx}/steps96k.sigmf-meta", "--offset", "1e300"}, want: "offset"},
		{name: "scan/--mode sideways", args: with(hScan, "--mode", "sideways"), want: "sideways"},
		{name: "scan/--ids 10000 inline", args: with(hScan, "--ids", idList(10000, ",")), want: "--ids", timeout: 20 * time.Second}, // issue 10: 437 s
		{name: "scan/--ids @file of 10000", files: map[string]string{"ids.txt": idList(10000, "\n")}, args: with(hScan, "--ids", "@{in}/ids.txt"), want: "--ids", timeout: 20 * time.Second},
		{name: "scan/--ids @file one 1 MB line", files: map[string]string{"ids.txt": strings.Repeat("N", 1<<20)}, args: with(hScan, "--ids", "@{in}/ids.txt"), want: "ids.txt"},
		{name: "scan/--ids @missing", args: with(hScan, "--ids", "@{in}/none.txt"), want: "none.txt"},
		{name: "scan/--ids empty items", args: with(hScan, "--ids", "N0CALL/1,,,"), want: "--ids"},
		{name: "scan --list/raw --rate 1e11", files: rawFile, args: []string{"scan", "--list", "{in}/r.cu8", "--format", "cu8", "--rate", "1e11"}, want: "--rate"},

		// ---- slots -------------------------------------------------------
		{name: "slots/--period 0", args: with(hSlots, "--period", "0"), want: "--period"}, // issue 10: accepted
		{name: "slots/--period -45", args: with(hSlots, "--period", "-45"), want: "--period"},
		{name: "slots/--period NaN", args: with(hSlots, "--period", "NaN"), want: "--period"},
		{name: "slots/--period 1e300", args: with(hSlots, "--period", "1e300"), want: "--period"},
		{name: "slots/--next -1", args: with(hSlots, "--next", "-1"), want: "--next"},
		{name: "slots/--next 1e9", args: with(hSlots, "--next", "1000000000"), want: "--next"}, // issue 10: 7.6 GB

		// ---- bearing: numeric flags ------------------------------------
		{name: "bearing/--site-sigma -1", args: with(hBearing, "--site-sigma", "-1"), want: "--site-sigma"}, // issue 10: accepted
		{name: "bearing/--site-sigma NaN", args: with(hBearing, "--site-sigma", "NaN"), want: "--site-sigma"},
		{name: "bearing/--site-sigma 1e9", args: with(hBearing, "--site-sigma", "1e9"), want: "--site-sigma"},
		{name: "bearing/--beamwidth 0", args: with(hBearing, "--beamwidth", "0"), want: "beamwidth"},
		{name: "bearing/--front-back NaN", args: with(hBearing, "--front-back", "NaN"), want: "front-to-back"},
		{name: "bearing/--null-depth 1e6", args: with(hBearing, "--antenna", "loop", "--null-depth", "1e6"), want: "null"},
		{name: "bearing/--mount-offset NaN", args: with(hBearing, "--mount-offset", "NaN"), want: "--mount-offset"},
		{name: "bearing/--lag 1e9", args: with(hBearing, "--lag", "1e9"), want: "--lag"},
		{name: "bearing/--lag NaN", args: with(hBearing, "--lag", "NaN"), want: "--lag"},
		{name: "bearing/--declination NaN", args: with(hBearing, "--heading-ref", "magnetic", "--declination", "NaN"), want: "--declination"},
		{name: "bearing/--heading-ref sideways", args: with(hBearing, "--heading-ref", "sideways"), want: "--heading-ref"},
		{name: "bearing/--turn 0:NaN", args: []string{"bearing", "{fx}/turning.sigmf-meta", "--offset", "10k", "--turn", "0:NaN"}, want: "--turn"},
		{name: "bearing/--turn 0:1e9", args: []string{"bearing", "{fx}/turning.sigmf-meta", "--offset", "10k", "--turn", "0:1e9"}, want: "--turn"},
		{name: "bearing/--estimate-lag on a one-way turn", args: with(hBearing, "--estimate-lag"), want: "--estimate-lag"},

		// ---- bearing: outputs --------------------------------------------
		// issue 10: plots written before --station abc is checked.
		{name: "bearing/--station abc after plots", args: with(hBearing, "--station", "abc", "--plot", "{out}/p.png", "--bearings-csv", "{out}/b.csv"), want: "--station"},
		{name: "bearing/--bearings-csv without --station", args: with(hBearing, "--plot", "{out}/p.png", "--bearings-csv", "{out}/b.csv"), want: "--station"},
		{name: "bearing/--plot p.txt", args: with(hBearing, "--plot", "{out}/p.txt", "--bearings-csv", "{out}/b.csv", "--station", "45.1,6.1"), want: "--plot"},
		{name: "bearing/--plot in a missing folder", args: with(hBearing, "--plot", "{out}/no/p.png", "--bearings-csv", "{out}/b.csv", "--station", "45.1,6.1"), want: "p"},
		{name: "bearing/--bearings-csv is a folder", setup: func(t *testing.T, d caseDirs) { os.Mkdir(filepath.Join(d.out, "b.csv"), 0o755) },
			args: with(hBearing, "--plot", "{out}/p.png", "--bearings-csv", "{out}/b.csv", "--station", "45.1,6.1"), want: "b.csv"},
		{name: "bearing/--bearings-csv is a FIFO", setup: func(t *testing.T, d caseDirs) { mkfifo(t, filepath.Join(d.out, "b.csv")) },
			args: with(hBearing, "--plot", "{out}/p.png", "--bearings-csv", "{out}/b.csv", "--station", "45.1,6.1"), want: "b.csv"},
		{name: "bearing/--bearings-csv links to a FIFO", setup: func(t *testing.T, d caseDirs) {
			mkfifo(t, filepath.Join(d.in, "pipe"))
			symlink(t, filepath.Join(d.in, "pipe"), filepath.Join(d.out, "b.csv"))
		}, args: with(hBearing, "--bearings-csv", "{out}/b.csv", "--station", "45.1,6.1"), want: "b.csv"},
		{name: "bearing/--bearings-csv inside a file", files: map[string]string{"f": "x"},
			args: with(hBearing, "--plot", "{out}/p.png", "--bearings-csv", "{in}/f/b.csv", "--station", "45.1,6.1"), want: "b.csv"},
		{name: "bearing/full disk for the plot", fsize: 4000, args: with(hBearing, "--plot", "{out}/p.png", "--bearings-csv", "{out}/b.csv", "--station", "45.1,6.1"), want: "p-T1.png"},
		// An output through a symbolic link is written through it, as
		// editors do: the link stays and the file it names gets the CSV.
		{name: "bearing/--bearings-csv through a link", ok: true, files: map[string]string{"target.csv": "old\n"},
			setup: func(t *testing.T, d caseDirs) {
				symlink(t, filepath.Join(d.in, "target.csv"), filepath.Join(d.out, "b.csv"))
			},
			args: with(hBearing, "--bearings-csv", "{out}/b.csv", "--station", "45.1,6.1"), stdout: true, keep: []string{"in/target.csv"},
			check: func(d caseDirs, r hostileRun) error {
				if to, err := os.Readlink(filepath.Join(d.out, "b.csv")); err != nil || to != filepath.Join(d.in, "target.csv") {
					return fmt.Errorf("the link was replaced: %v %q", err, to)
				}
				b, _ := os.ReadFile(filepath.Join(d.in, "target.csv"))
				if !strings.HasPrefix(string(b), "ident,") {
					return fmt.Errorf("the link's target holds %.40q, not the bearings CSV", b)
				}
				return nil
			}},

		// ---- bearing: antenna pattern files ----------------------------
		{name: "bearing/pattern not JSON", files: pattern("gain: 0 dB\n"), args: hPat, want: "p.json"},
		{name: "bearing/pattern truncated", files: pattern(`{"format": "nullseek-antenna-pattern", "version": 1, "mode": "peak", "gain_db": [0, -1,`), args: hPat, want: "p.json"},
		{name: "bearing/pattern empty gains", files: pattern(`{"format": "nullseek-antenna-pattern", "version": 1, "mode": "peak", "symmetry": 1, "step_deg": 1, "gain_db": []}`), args: hPat, want: "p.json"},
		{name: "bearing/pattern null gains", files: pattern(patternJSON("peak", func(k int) string { return map[bool]string{true: "null", false: "-3"}[k%90 == 0] })), args: hPat, want: "p.json"},
		{name: "bearing/pattern gains 1e308", files: pattern(patternJSON("peak", func(k int) string { return map[bool]string{true: "1e308", false: "-1e308"}[k%2 == 0] })), args: hPat, want: "p.json"},
		{name: "bearing/pattern flat", files: pattern(patternJSON("peak", func(int) string { return "0" })), args: hPat, want: "p.json"},
		{name: "bearing/pattern 1e6 gains", files: pattern(`{"format": "nullseek-antenna-pattern", "version": 1, "mode": "peak", "symmetry": 1, "step_deg": 1, "gain_db": [` + strings.Repeat("-1,", 1000000) + `0]}`), args: hPat, want: "p.json"},
		{name: "bearing/pattern step 0", files: pattern(`{"format": "nullseek-antenna-pattern", "version": 1, "mode": "peak", "symmetry": 1, "step_deg": 0, "gain_db": [0, -3, -20, -3]}`), args: hPat, want: "p.json"},
		{name: "bearing/pattern mode sideways", files: pattern(patternJSON("sideways", func(k int) string { return fmt.Sprintf("%d", -k/20) })), args: hPat, want: "p.json"},
		{name: "bearing/pattern symmetry 7", files: pattern(strings.Replace(patternJSON("peak", func(k int) string { return fmt.Sprintf("%d", -k/20) }), `"symmetry": 1`, `"symmetry": 7`, 1)), args: hPat, want: "p.json"},
		{name: "bearing/pattern of another program", files: pattern(`{"format": "something-else", "version": 1}`), args: hPat, want: "p.json"},
		{name: "bearing/pattern missing", args: with(hBearing, "--antenna", "{in}/none.json"), want: "none.json"},

		// ---- bearing: heading logs and NMEA files ----------------------
		{name: "bearing/headings header only", files: headings("time,heading_deg\n"), args: hHead, want: "h.csv"},
		{name: "bearing/headings every row twice", files: headings("time,heading_deg\n0,0\n0,0\n1,90\n1,90\n2,180\n2,180\n"), args: hHead, want: "h.csv"},
		{name: "bearing/headings booleans", files: headings("time,heading_deg\ntrue,false\nfalse,true\n"), args: hHead, want: "h.csv"},
		{name: "bearing/headings NaN time", files: headings("time,heading_deg\n0,0\nNaN,90\n2,180\n"), args: hHead, want: "h.csv"},
		{name: "bearing/headings one 20 MB line", setup: func(t *testing.T, d caseDirs) {
			writeFile(t, filepath.Join(d.in, "h.csv"), append([]byte("time,heading_deg\n0,"), bytes.Repeat([]byte("9"), 20<<20)...))
		}, args: hHead, want: "h.csv"},
		{name: "bearing/headings time 1e300", files: headings("time,heading_deg\n0,0\n1e300,90\n"), args: hHead, want: "h.csv"},
		{name: "bearing/nmea all garbage", files: nmea("$GPXXX,1,2*00\nhello\n$HCHDT,abc,T*00\n"), args: hNMEA, want: "h.nmea", not: "PaceHz"}, // issue 10: advice naming no flag
		{name: "bearing/nmea one 20 MB line", setup: func(t *testing.T, d caseDirs) {
			writeFile(t, filepath.Join(d.in, "h.nmea"), append([]byte("$HCHDT,"), bytes.Repeat([]byte("1"), 20<<20)...))
		}, args: hNMEA, want: "h.nmea", not: "0 lines"}, // issue 10: "0 lines: 0 garbage"
		{name: "bearing/nmea bad checksums only", files: nmea(strings.ReplaceAll(hdt.String(), "*", "*0")), args: hNMEA, want: "h.nmea"},
		{name: "bearing/nmea and headings both", files: map[string]string{"h.nmea": hdt.String(), "h.csv": "time,heading_deg\n0,0\n"},
			args: with(hHead, "--nmea", "{in}/h.nmea"), want: "heading"},

		// ---- calibrate ---------------------------------------------------
		{name: "calibrate/no --out", args: hCal, want: "--out"},
		{name: "calibrate/--out is a folder", setup: func(t *testing.T, d caseDirs) { os.Mkdir(filepath.Join(d.out, "p.json"), 0o755) }, args: with(hCal, "--out", "{out}/p.json"), want: "p.json"},
		{name: "calibrate/--out is a FIFO", setup: func(t *testing.T, d caseDirs) { mkfifo(t, filepath.Join(d.out, "p.json")) }, args: with(hCal, "--out", "{out}/p.json"), want: "p.json"},
		{name: "calibrate/--out in a missing folder", args: with(hCal, "--out", "{out}/no/p.json"), want: "p.json"},
		{name: "calibrate/--out on a full disk", fsize: 1000, args: with(hCal, "--out", "{out}/p.json"), want: "p.json"},
		{name: "calibrate/--known-bearing NaN", args: []string{"calibrate", "{fx}/turning.sigmf-meta", "--offset", "10k", "--headings", "{fx}/turning-headings.csv", "--known-bearing", "NaN", "--out", "{out}/p.json"}, want: "--known-bearing"},
		{name: "calibrate/--known-bearing 1e9", args: []string{"calibrate", "{fx}/turning.sigmf-meta", "--offset", "10k", "--headings", "{fx}/turning-headings.csv", "--known-bearing", "1e9", "--out", "{out}/p.json"}, want: "--known-bearing"},
		{name: "calibrate/--tx 91,0", args: []string{"calibrate", "{fx}/turning.sigmf-meta", "--offset", "10k", "--headings", "{fx}/turning-headings.csv", "--tx", "91,0", "--station", "45,6", "--out", "{out}/p.json"}, want: "--tx"},
		{name: "calibrate/--tx at the station", args: []string{"calibrate", "{fx}/turning.sigmf-meta", "--offset", "10k", "--headings", "{fx}/turning-headings.csv", "--tx", "45,6", "--station", "45,6", "--out", "{out}/p.json"}, want: "same place"},
		{name: "calibrate/--ident never heard", args: with(hCal, "--ident", "N0CALL/9", "--out", "{out}/p.json"), want: "N0CALL/9"},

		// ---- fix: bearings files -----------------------------------------
		{name: "fix/header only", files: bcsv(bearingsHeader), args: with(hFix, "--geojson", "{out}/f.geojson"), want: "b.csv"}, // issue 10: exit 0, no output
		{name: "fix/JSON booleans", files: map[string]string{"b.json": `[{"ident": true, "station": false, "lat": true, "lon": 6.1, "bearing_deg": 40, "sigma_deg": 2, "reference": "true"}]`}, args: []string{"fix", "{in}/b.json"}, want: "b.json"},
		{name: "fix/CSV boolean latitude", files: bcsv(bearingsHeader + "N0CALL/1,A,true,6.1,40,2,true,\n"), args: hFix, want: "lat"},
		{name: "fix/sigma 0", files: bcsv(bearingsHeader + "N0CALL/1,A,45.1,6.1,40,0,true,\nN0CALL/1,B,45.1,6.2,320,0,true,\n"), args: hFix, want: "sigma"},
		{name: "fix/sigma -2", files: bcsv(bearingsHeader + "N0CALL/1,A,45.1,6.1,40,-2,true,\nN0CALL/1,B,45.1,6.2,320,2,true,\n"), args: hFix, want: "sigma"},
		{name: "fix/latitude 91", files: bcsv(bearingsHeader + "N0CALL/1,A,91,6.1,40,2,true,\nN0CALL/1,B,45.1,6.2,320,2,true,\n"), args: hFix, want: "lat"},
		{name: "fix/reference sideways", files: bcsv(bearingsHeader + "N0CALL/1,A,45.1,6.1,40,2,sideways,\n"), args: hFix, want: "reference"},
		{name: "fix/time garbage", files: bcsv(bearingsHeader + "N0CALL/1,A,45.1,6.1,40,2,true,yesterday\n"), args: hFix, want: "time"},
		{name: "fix/missing columns", files: bcsv("ident,station,lat\nN0CALL/1,A,45.1\n"), args: hFix, want: "b.csv"},
		{name: "fix/one 20 MB field", setup: func(t *testing.T, d caseDirs) {
			writeFile(t, filepath.Join(d.in, "b.csv"), append([]byte(bearingsHeader+"N0CALL/1,"), bytes.Repeat([]byte("A"), 20<<20)...))
		}, args: hFix, want: "b.csv"},
		{name: "fix/stdin garbage", stdin: "\x00\x01\x02garbage\xff\xfe", args: []string{"fix", "-", "--geojson", "{out}/f.geojson"}, want: "stdin"},
		// issue 10: an empty GeoJSON when no fix is possible.
		{name: "fix/one station: no fix, no files", files: bcsv(bearingsHeader + "N0CALL/1,A,45.1,6.1,40,2,true,\nN0CALL/1,A,45.1,6.1,41,2,true,\n"),
			args: with(hFix, "--geojson", "{out}/f.geojson", "--kml", "{out}/f.kml", "--map", "{out}/m.png"), want: "could not be fixed", stdout: true},

		// ---- fix: flags ----------------------------------------------------
		{name: "fix/--cell-samples 100000", files: bcsv(hostileBearings), args: with(hFix, "--cell-samples", "100000"), want: "--cell-samples"},         // issue 10: out of memory
		{name: "fix/--cell-samples 3037000500", files: bcsv(hostileBearings), args: with(hFix, "--cell-samples", "3037000500"), want: "--cell-samples"}, // issue 10: makeslice overflow
		{name: "fix/--cell-samples -1", files: bcsv(hostileBearings), args: with(hFix, "--cell-samples", "-1"), want: "--cell-samples"},
		{name: "fix/--probability 1", files: bcsv(hostileBearings), args: with(hFix, "--probability", "1"), want: "probability"},
		{name: "fix/--probability NaN", files: bcsv(hostileBearings), args: with(hFix, "--probability", "NaN"), want: "probability"},
		{name: "fix/--poor-crossing 100", files: bcsv(hostileBearings), args: with(hFix, "--poor-crossing", "100"), want: "poor crossing"},
		{name: "fix/--map-size 1e9", files: bcsv(hostileBearings), args: with(hFix, "--map", "{out}/m.png", "--map-size", "1e9"), want: "--map-size"},
		{name: "fix/--auto-cells 1000000", files: bcsv(hostileBearings), args: with(hFix, "--auto-cells", "1000000"), want: "--auto-cells"},
		{name: "fix/--cluster-km NaN", files: bcsv(hostileBearings), args: with(hFix, "--cluster-km", "NaN"), want: "--cluster-km"},
		{name: "fix/--declination 200", files: bcsv(hostileBearings), args: with(hFix, "--declination", "200"), want: "--declination"},
		{name: "fix/--map m.jpg", files: bcsv(hostileBearings), args: with(hFix, "--geojson", "{out}/f.geojson", "--map", "{out}/m.jpg"), want: "--map"},
		{name: "fix/--geojson is a FIFO", files: bcsv(hostileBearings), setup: func(t *testing.T, d caseDirs) { mkfifo(t, filepath.Join(d.out, "f.geojson")) },
			args: with(hFix, "--geojson", "{out}/f.geojson"), want: "f.geojson"},
		// fix writes the outputs it can and names the one it cannot (exit
		// 1): the GeoJSON stays, the KML in a missing folder is reported.
		{name: "fix/KML in a missing folder", files: bcsv(hostileBearings), args: with(hFix, "--geojson", "{out}/f.geojson", "--kml", "{out}/no/f.kml"),
			want: "f.kml", stdout: true, keep: []string{"out/f.geojson"}},
		{name: "fix/map on a full disk", files: bcsv(hostileBearings), fsize: 30000, // the KML is 15 kB, the map 55 kB
			args: with(hFix, "--kml", "{out}/f.kml", "--map", "{out}/m.png"),
			want: "m.png", stdout: true, keep: []string{"out/f.kml"}},

		// ---- fix: event grids ----------------------------------------------
		{name: "fix/--grid garbage", files: bcsv(hostileBearings), args: with(hFix, "--grid", "origin=north"), want: "--grid"},
		{name: "fix/--grid cell=0", files: bcsv(hostileBearings), args: with(hFix, "--grid", "origin=45.1,6.1 cell=0 cols=A-L rows=1-9"), want: "cell"},
		{name: "fix/--grid cols A-ZZZZZZ", files: bcsv(hostileBearings), args: with(hFix, "--grid", "origin=45.1,6.1 cell=250 cols=A-ZZZZZZ rows=1-9"), want: "cells"},
		{name: "fix/--grid rotation NaN", files: bcsv(hostileBearings), args: with(hFix, "--grid", "origin=45.1,6.1 cell=250 rotation=NaN cols=A-L rows=1-9"), want: "rotation"},
		{name: "fix/--grid-file not JSON", files: gridFile("origin: here\n"), args: fixGrid, want: "g.json"},
		{name: "fix/--grid-file cell a string", files: gridFile(`{"origin_lat": 45.1, "origin_lon": 6.1, "cell_m": "NaN", "cols": "A-L", "rows": "1-9"}`), args: fixGrid, want: "g.json"},
		{name: "fix/--grid-file a billion rows", files: gridFile(`{"origin_lat": 45.1, "origin_lon": 6.1, "cell_m": 250, "cols": "A-L", "rows": "1-1000000000"}`), args: fixGrid, want: "g.json"},
		{name: "fix/--grid-file is a folder", files: bcsv(hostileBearings), setup: func(t *testing.T, d caseDirs) { os.Mkdir(filepath.Join(d.in, "g.json"), 0o755) }, args: fixGrid, want: "g.json"},

		// ---- demo ------------------------------------------------------------
		{name: "demo/--out is a file", files: map[string]string{"d": "x"}, args: []string{"demo", "--out", "{in}/d"}, want: "--out"},
		{name: "demo/--out inside a file", files: map[string]string{"d": "x"}, args: []string{"demo", "--out", "{in}/d/demo"}, want: "--out"},
		{name: "demo/an output is a FIFO", setup: func(t *testing.T, d caseDirs) {
			os.Mkdir(filepath.Join(d.out, "demo"), 0o755)
			mkfifo(t, filepath.Join(d.out, "demo", "bearings.csv"))
		}, args: []string{"demo", "--out", "{out}/demo"}, want: "bearings.csv", timeout: 90 * time.Second},
		// issue 10: the demo's folder half filled on a full disk. The
		// limit lets the heading logs (33 kB) through and stops the
		// first polar plot (65–80 kB).
		{name: "demo/full disk", fsize: 40000, args: []string{"demo", "--out", "{out}/demo"}, want: "polar", timeout: 90 * time.Second},
		{name: "demo/full disk with --write-iq", fsize: 1 << 20, args: []string{"demo", "--write-iq", "--out", "{out}/demo"}, want: "station-", timeout: 30 * time.Second},

		// ---- --cpuprofile ----------------------------------------------------
		{name: "cpuprofile/is a FIFO", setup: func(t *testing.T, d caseDirs) { mkfifo(t, filepath.Join(d.out, "cpu.prof")) },
			args: with([]string{"--cpuprofile", "{out}/cpu.prof"}, hScan...), want: "cpu.prof"},
		{name: "cpuprofile/in a missing folder", args: []string{"--cpuprofile", "{out}/no/cpu.prof", "scan", "{fx}/steps96k.sigmf-meta", "--offset", stepsOffset}, want: "cpu.prof"},

		// ---- live: flags checked before connecting ---------------------------
		{name: "live/--duration -1", rtl: "noise", args: with(hLive, "--duration", "-1", "--turn", "0:120"), want: "--duration"},
		{name: "live/--duration NaN", rtl: "noise", args: with(hLive, "--duration", "NaN", "--turn", "0:120"), want: "--duration"},
		{name: "live/--duration 1e9", rtl: "noise", args: with(hLive, "--duration", "1e9", "--turn", "0:120"), want: "--duration"},
		{name: "live/--rate 1e11", rtl: "noise", args: with(hLiveTurn, "--center", "433.9M", "--rate", "1e11"), want: "sample rate"},
		{name: "live/--gain 1000", rtl: "noise", args: with(hLiveTurn, "--gain", "1000"), want: "--gain"},
		{name: "live/--ppm 100000", rtl: "noise", args: with(hLiveTurn, "--ppm", "100000"), want: "--ppm"},
		{name: "live/--poll-hz 0", rtl: "noise", rot: "silent", args: with(hLive, "--rotator", "{rot}", "--sweep", "0:90", "--poll-hz", "0"), want: "--poll-hz"},
		{name: "live/--sweep 0:NaN", rtl: "noise", rot: "silent", args: with(hLive, "--rotator", "{rot}", "--sweep", "0:NaN"), want: "--sweep"},
		{name: "live/--step with a zero step", rtl: "noise", rot: "silent", args: with(hLive, "--rotator", "{rot}", "--step", "0:0:360:1"), want: "--step"},
		{name: "live/--iq-latency NaN", rtl: "noise", args: with(hLiveTurn, "--iq-latency", "NaN"), want: "--iq-latency"},
		{name: "live/--record in a missing folder", rtl: "noise", args: with(hLiveTurn, "--record", "{out}/no/rec"), want: "rec"},
		{name: "live/--record is a FIFO", rtl: "noise", setup: func(t *testing.T, d caseDirs) { mkfifo(t, filepath.Join(d.out, "rec.sigmf-data")) },
			args: with(hLiveTurn, "--record", "{out}/rec"), want: "rec.sigmf-data"},

		// ---- live: rtl_tcp that fails ------------------------------------------
		{name: "live/rtl_tcp refused", rtl: "refused", args: hLiveTurn, want: "rtl_tcp", notes: true},
		{name: "live/rtl_tcp hangs up", rtl: "close", args: hLiveTurn, want: "rtl_tcp", notes: true},
		{name: "live/rtl_tcp speaks HTTP", rtl: "garbage", args: hLiveTurn, want: "rtl_tcp", notes: true},
		{name: "live/rtl_tcp half a greeting", rtl: "short", args: hLiveTurn, want: "greeting", notes: true},
		{name: "live/rtl_tcp silent", rtl: "silent", args: hLiveTurn, want: "rtl_tcp", notes: true, timeout: 20 * time.Second},
		{name: "live/rtl_tcp stalls", rtl: "stall", args: hLiveTurn, want: "rtl_tcp", notes: true, timeout: 20 * time.Second},
		{name: "live/rtl_tcp drops", rtl: "drop", args: hLiveTurn, want: "rtl_tcp", notes: true},
		{name: "live/rtl_tcp drops, --record", rtl: "drop", args: with(hLiveTurn, "--record", "{out}/rec"), want: "rtl_tcp", notes: true,
			keep: []string{"out/rec.sigmf-meta", "out/rec.sigmf-data", "out/rec.csv"}},
		{name: "live/--record on a full disk", rtl: "noise", fsize: 100000, args: with(hLiveTurn, "--record", "{out}/rec"), want: "rec", notes: true},

		// ---- live: rotctld that fails --------------------------------------------
		{name: "live/rotctld refused", rtl: "noise", rot: "refused", args: with(hLive, "--rotator", "{rot}", "--sweep", "0:90"), want: "rot", notes: true},
		{name: "live/rotctld hangs up", rtl: "noise", rot: "close", args: with(hLive, "--rotator", "{rot}", "--sweep", "0:90"), want: "rot", notes: true},
		{name: "live/rotctld speaks garbage", rtl: "noise", rot: "garbage", args: with(hLive, "--rotator", "{rot}", "--sweep", "0:90"), want: "rot", notes: true},
		{name: "live/rotctld silent", rtl: "noise", rot: "silent", args: with(hLive, "--rotator", "{rot}", "--sweep", "0:90"), want: "rot", notes: true, timeout: 20 * time.Second},
		{name: "live/rotctld refuses every command", rtl: "noise", rot: "rprt", args: with(hLive, "--rotator", "{rot}", "--sweep", "0:90"), want: "rot", notes: true},

		// ---- live: NMEA compass feed that fails ----------------------------------
		{name: "live/nmea feed refused", rtl: "noise", nmea: "refused", args: with(hLive, "--duration", "3", "--nmea-feed", "tcp://{nmea}"), want: "compass", notes: true},
		{name: "live/nmea feed hangs up", rtl: "noise", nmea: "close", args: with(hLive, "--duration", "3", "--nmea-feed", "tcp://{nmea}"), want: "compass", notes: true, timeout: 20 * time.Second},
		{name: "live/nmea feed garbage", rtl: "noise", nmea: "garbage", args: with(hLive, "--duration", "3", "--nmea-feed", "tcp://{nmea}"), want: "heading", notes: true, timeout: 20 * time.Second},
		{name: "live/nmea feed binary", rtl: "noise", nmea: "binary", args: with(hLive, "--duration", "3", "--nmea-feed", "tcp://{nmea}"), want: "compass", notes: true, timeout: 20 * time.Second},
		{name: "live/nmea feed silent", rtl: "noise", nmea: "silent", args: with(hLive, "--duration", "3", "--nmea-feed", "tcp://{nmea}"), want: "compass", notes: true, timeout: 20 * time.Second},
	}
}

// nmeaLine is one NMEA 0183 sentence led by a time.
func nmeaLine(ts, body string) string { return ts + " " + testtool.NMEASentence(body) }
