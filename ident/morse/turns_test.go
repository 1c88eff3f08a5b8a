package morse

import (
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"testing"

	"nullseek/ident/internal/identtest"
	"nullseek/internal/testtool"
)

// turnCopies reads make_field.py's copy_s column ("a-b;a-b;…").
func turnCopies(t *testing.T, s string) [][2]float64 {
	var out [][2]float64
	for _, p := range strings.Split(s, ";") {
		ab := strings.Split(p, "-")
		a, err1 := strconv.ParseFloat(ab[0], 64)
		b, err2 := strconv.ParseFloat(ab[1], 64)
		if len(ab) != 2 || err1 != nil || err2 != nil {
			t.Fatalf("copy_s %q", s)
		}
		out = append(out, [2]float64{a, b})
	}
	return out
}

// copyText is the text of the characters whose key-down lies inside span
// (±0.2 s).
func copyText(d Decoded, span [2]float64) string {
	var b strings.Builder
	for _, c := range d.Chars {
		if c.StartS >= span[0]-0.2 && c.EndS <= span[1]+0.2 {
			b.WriteString(c.Text)
		}
	}
	return b.String()
}

// TestLongTurnsDecode: one-minute turns of a hunt beacon (ID, a long
// steady tone, the ID, … — common practice for direction-finding
// beacons) made by GNU Radio 3.10 from ebook2cw 0.8.4 keying
// (testdata/ident/make_field.py turns; FM, noise at 6–30 dB CNR in
// 12.5 kHz, demodulated by GNU Radio), with the copies at one speed, and
// with the speed changing from copy to copy. The long tone is no dash:
// every copy of the ID decodes exactly at CNR ≥ 10 dB, the long tones are
// reported as such, and each stretch's speed is ebook2cw's within 3 %.
// multimon-ng 1.2.0 decodes the same audio for comparison.
func TestLongTurnsDecode(t *testing.T) {
	py := testtool.GNURadio(t, "ebook2cw", "sox")
	mm := testtool.Need(t, "multimon-ng")
	sox := testtool.Need(t, "sox")
	t.Parallel()
	sets := []struct {
		name string
		args []string
	}{
		{"steady", []string{"turns", "--seed", "1", "--cnrs", "6,10,20,30", "--ids", "N0CALL/1,N0CALL/3", "--wpm", "22", "--tone-s", "22", "--copies", "3"}},
		{"speed change", []string{"turns", "--seed", "2", "--cnrs", "10,25", "--ids", "N0CALL/5,E5", "--wpm", "26", "--speed-change", "--tone-s", "40", "--copies", "2"}},
	}
	type row struct{ copies, exact, chars, ours, peer int }
	rows := map[string]*row{}
	var keys []string
	for _, set := range sets {
		dir := identtest.RunField(t, py, set.args...)
		for _, r := range testtool.TSVRows(t, filepath.Join(dir, "turns.tsv")) {
			cnr := identtest.Atof(t, r["cnr_db"])
			key := fmt.Sprintf("%-12s %4.0f", set.name, cnr)
			if rows[key] == nil {
				rows[key] = &row{}
				keys = append(keys, key)
			}
			rw := rows[key]
			path := filepath.Join(dir, r["file"])
			a, rate := identtest.MustReadWAV(t, path)
			d, err := DecodeTone(a, rate, DecodeOptions{})
			if err != nil {
				t.Errorf("%s: %v", r["file"], err)
				continue
			}
			id := r["id"]
			spans := turnCopies(t, r["copy_s"])
			ref := strings.TrimSpace(strings.Repeat(id+" ", len(spans)))
			rw.chars += len(testtool.CERText(ref))
			rw.ours += testtool.CERErrors(d.Text, ref)
			rw.peer += testtool.CERErrors(identtest.Multimon(t, sox, mm, path), ref)
			for _, sp := range spans {
				rw.copies++
				if got := copyText(d, sp); got == id {
					rw.exact++
				} else if cnr >= 10 {
					t.Errorf("%s (CNR %g dB): copy at %.1f–%.1f s read %q, sent %q (text %q)", r["file"], cnr, sp[0], sp[1], got, id, d.Text)
				}
			}
			if cnr < 10 {
				continue
			}
			if n := len(d.LongTones()); n != len(spans)-1 {
				t.Errorf("%s: %d long tones found, %d sent", r["file"], n, len(spans)-1)
			}
			var wpms []float64
			for _, w := range strings.Split(r["wpms"], ",") {
				wpms = append(wpms, identtest.Atof(t, w))
			}
			for _, st := range d.Stretches {
				// The stretch's copy: the one whose span it overlaps; copies
				// alternate between the listed speeds.
				for k, sp := range spans {
					if st.StartS < sp[1] && st.EndS > sp[0] {
						want := wpms[k%len(wpms)]
						if math.Abs(st.WPM-want) > 0.03*want {
							t.Errorf("%s: stretch %.1f–%.1f s at %.1f WPM, ebook2cw -w %g", r["file"], st.StartS, st.EndS, st.WPM, want)
						}
					}
				}
			}
		}
	}
	sort.Strings(keys)
	var b strings.Builder
	fmt.Fprintf(&b, "\n%-12s %4s %7s %9s %13s\n", "turns", "CNR", "copies", "ours CER", "multimon CER")
	for _, k := range keys {
		r := rows[k]
		fmt.Fprintf(&b, "%s %3d/%-3d %8.1f%% %12.1f%%\n", k, r.exact, r.copies, 100*float64(r.ours)/float64(r.chars), 100*float64(r.peer)/float64(r.chars))
	}
	t.Log(b.String())
}
