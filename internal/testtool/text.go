package testtool

import (
	"bufio"
	"os"
	"strings"
	"testing"
)

// TSVRows reads a tab-separated fixture manifest whose first line names
// the columns, one map per row. A row with a different number of fields
// than the header fails the test (a broken manifest must not pass as rows
// with missing columns).
func TSVRows(t testing.TB, path string) []map[string]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatalf("fixture manifest: %v", err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	var head []string
	var rows []map[string]string
	for sc.Scan() {
		cols := strings.Split(sc.Text(), "\t")
		if head == nil {
			head = cols
			continue
		}
		if len(cols) != len(head) {
			t.Fatalf("%s: row %q has %d fields, the header %d", path, sc.Text(), len(cols), len(head))
		}
		r := make(map[string]string, len(head))
		for i, h := range head {
			r[h] = cols[i]
		}
		rows = append(rows, r)
	}
	if err := sc.Err(); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return rows
}

// CERText prepares text for the character error rate: upper case, white
// space removed (a word gap read as a letter gap is not counted as a
// character error; every decoder is compared the same way).
func CERText(s string) []rune {
	return []rune(strings.Join(strings.Fields(strings.ToUpper(s)), ""))
}

// EditDistance is the Levenshtein distance between rune slices
// (insertions, deletions and substitutions all cost 1), the usual
// numerator of a character error rate (common practice).
func EditDistance(a, b []rune) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			s := prev[j-1]
			if a[i-1] != b[j-1] {
				s++
			}
			cur[j] = min(s, prev[j]+1, cur[j-1]+1)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

// CERErrors is the edit distance between two texts after CERText, capped
// at the reference length (a decoder that adds garbage loses at most every
// character).
func CERErrors(got, ref string) int {
	r := CERText(ref)
	return min(len(r), EditDistance(CERText(got), r))
}

// NMEASentence frames body as an NMEA 0183 sentence: '$', body, '*', the
// XOR of the body's bytes as two upper-case hex digits, CR LF (NMEA 0183
// sentence framing and checksum, as gpsd 3.22 drivers/driver_nmea0183.c
// checks it). Tests frame their feeds with this rather than with the
// parser's own checksum, so a wrong checksum in the code cannot agree
// with itself.
func NMEASentence(body string) string {
	var c byte
	for i := 0; i < len(body); i++ {
		c ^= body[i]
	}
	const hex = "0123456789ABCDEF"
	return "$" + body + "*" + string([]byte{hex[c>>4], hex[c&15]}) + "\r\n"
}
