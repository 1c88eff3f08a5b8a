package survey

import (
	"bufio"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// testdataDir is the repository's testdata folder, from this package.
var testdataDir = filepath.Join("..", "testdata")

// readTSV reads a tab-separated file with a header row into maps.
func readTSV(t *testing.T, path string) []map[string]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var head []string
	var rows []map[string]string
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		fields := strings.Split(sc.Text(), "\t")
		if head == nil {
			head = fields
			continue
		}
		if len(fields) != len(head) {
			t.Fatalf("%s: row %q has %d fields, header %d", path, sc.Text(), len(fields), len(head))
		}
		m := map[string]string{}
		for i, h := range head {
			m[h] = fields[i]
		}
		rows = append(rows, m)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return rows
}

// cerRunes prepares text for the character error rate: upper case, white
// space removed (a word gap read as a letter gap is not a character
// error; the same convention as ident's fixture tests).
func cerRunes(s string) []rune {
	return []rune(strings.Join(strings.Fields(strings.ToUpper(s)), ""))
}

// editDistance is the Levenshtein distance (insertions, deletions and
// substitutions all cost 1), the usual numerator of a character error rate
// (common practice).
func editDistance(a, b []rune) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			c := prev[j-1]
			if a[i-1] != b[j-1] {
				c++
			}
			c = min(c, prev[j]+1, cur[j-1]+1)
			cur[j] = c
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

func TestEditDistance(t *testing.T) {
	for _, c := range []struct {
		a, b string
		want int
	}{
		{"", "", 0}, {"ABC", "", 3}, {"", "AB", 2}, {"KITTEN", "SITTING", 3}, // textbook example (common practice)
		{"N0CALL/2", "N0CALL/2", 0}, {"N0CALL/2", "N0CAL/2", 1}, {"N0CALL/2", "N0CALLX/2", 1}, {"ÅB", "AB", 1},
	} {
		if got := editDistance([]rune(c.a), []rune(c.b)); got != c.want {
			t.Errorf("editDistance(%q, %q) = %d, want %d", c.a, c.b, got, c.want)
		}
		if got := editDistance([]rune(c.b), []rune(c.a)); got != c.want {
			t.Errorf("editDistance(%q, %q) = %d, want %d", c.b, c.a, got, c.want)
		}
	}
}
