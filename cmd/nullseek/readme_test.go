package main

import (
	"bufio"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"nullseek/sdr"
)

// readmeCommand is one command line of a README shell block.
type readmeCommand struct {
	line   int      // where it starts in the README (1-based)
	args   []string // after "nullseek" (or "go run ./cmd/nullseek")
	stdout string   // "> FILE": the file stdout goes to
	skip   string   // why it is not run ("" : it is)
	// write, when set, is a "cat > FILE <<'EOF'" here-document: content
	// goes to that file, and args is empty.
	write, content string
}

// readmeHeredoc is the one other shell form the README uses: a file
// written from a here-document.
var readmeHeredoc = regexp.MustCompile(`^cat > (\S+) <<'?([A-Z]+)'?$`)

// readmeSkip marks the shell block after it as one the test does not run,
// with the reason: `<!-- readme-test: skip REASON -->`.
var readmeSkip = regexp.MustCompile(`^<!-- readme-test: skip (.+) -->$`)

// readmeCommands extracts the nullseek command lines of the README's
// fenced shell blocks: lines joined at a trailing backslash, comments
// after " #" dropped, words split as a POSIX shell splits plain words and
// quoted strings, and a trailing "> FILE" taken as stdout's file.
// Lines of other programs (go test, …) are left out.
func readmeCommands(t *testing.T, text string) []readmeCommand {
	t.Helper()
	var cmds []readmeCommand
	in, skip, pending := false, "", ""
	start, held := 0, ""
	var doc *readmeCommand
	sc := bufio.NewScanner(strings.NewReader(text))
	for n := 1; sc.Scan(); n++ {
		line := sc.Text()
		if doc != nil {
			if line == doc.args[0] {
				doc.args = nil
				cmds, doc = append(cmds, *doc), nil
			} else {
				doc.content += line + "\n"
			}
			continue
		}
		switch {
		case !in && readmeSkip.MatchString(line):
			pending = readmeSkip.FindStringSubmatch(line)[1]
			continue
		case !in && (line == "```sh" || line == "```"):
			in, skip, pending = true, pending, ""
			continue
		case !in:
			if strings.TrimSpace(line) != "" {
				pending = "" // a marker belongs to the block right after it
			}
			continue
		case line == "```":
			in = false
			if held != "" {
				t.Fatalf("README line %d: a command ends in a backslash at the end of its block", start)
			}
			continue
		}
		if m := readmeHeredoc.FindStringSubmatch(line); m != nil && held == "" {
			doc = &readmeCommand{line: n, skip: skip, write: m[1], args: []string{m[2]}}
			continue
		}
		if held == "" {
			start = n
		}
		if strings.HasSuffix(line, "\\") {
			held += strings.TrimSuffix(line, "\\") + " "
			continue
		}
		words := shellWords(t, start, held+line)
		held = ""
		switch {
		case len(words) > 0 && words[0] == "nullseek":
			words = words[1:]
		case len(words) > 2 && words[0] == "go" && words[1] == "run" && words[2] == "./cmd/nullseek":
			words = words[3:]
		default:
			continue
		}
		c := readmeCommand{line: start, skip: skip}
		if k := len(words); k >= 2 && words[k-2] == ">" {
			c.stdout, words = words[k-1], words[:k-2]
		}
		c.args = words
		cmds = append(cmds, c)
	}
	return cmds
}

// shellWords splits a command line into words: blanks separate, '…' and
// "…" quote (no expansions are used in the README), and a word starting
// with # begins a comment.
func shellWords(t *testing.T, line int, s string) []string {
	t.Helper()
	var words []string
	var w strings.Builder
	inWord, quote := false, rune(0)
	for _, r := range s {
		switch {
		case quote != 0:
			if r == quote {
				quote = 0
			} else {
				w.WriteRune(r)
			}
		case r == '\'' || r == '"':
			quote, inWord = r, true
		case r == ' ' || r == '\t':
			if inWord {
				words, inWord = append(words, w.String()), false
				w.Reset()
			}
		case r == '#' && !inWord:
			return words
		default:
			w.WriteRune(r)
			inWord = true
		}
	}
	if quote != 0 {
		t.Fatalf("README line %d: unclosed quote in %q", line, s)
	}
	if inWord {
		words = append(words, w.String())
	}
	return words
}

// TestREADMEExamplesRun: every nullseek command line in README.md runs as
// written, in the order written, in a fresh directory where the demo ran
// first (`nullseek demo --write-iq`, the README's own first step): exit
// status 0 and something printed (or written to its "> FILE"). Blocks
// marked `<!-- readme-test: skip REASON -->` (a live receiver, a server
// that runs until stopped) are listed with their reason and not run.
// What they print with --json (and what scan, slots and fix print when
// --json is added) keeps the README's conventions (checkJSONConventions). The recordings the demo keeps are at a rate an
// RTL2832 accepts (librtlsdr rtlsdr_set_sample_rate: 225001–300000 or
// 900001–3200000 S/s, from its source), so replay can serve them.
func TestREADMEExamplesRun(t *testing.T) {
	text, err := os.ReadFile(filepath.Join("..", "..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	cmds := readmeCommands(t, string(text))
	dir := t.TempDir()
	setup := []string{"demo", "--write-iq", "--db", "demo.db"}
	r := cliRun(t, dir, setup...)
	if r.code != 0 {
		t.Fatalf("demo --write-iq: exit %d\n%s", r.code, r.stderr)
	}
	var meta struct {
		Global struct {
			Rate float64 `json:"core:sample_rate"`
		} `json:"global"`
	}
	data, err := os.ReadFile(filepath.Join(dir, "nullseek-demo", "station-north-hill.sigmf-meta"))
	if err != nil || json.Unmarshal(data, &meta) != nil {
		t.Fatalf("the demo kept no readable recording: %v", err)
	}
	if rate := meta.Global.Rate; !(rate >= sdr.RTLMinRateLow && rate <= sdr.RTLMaxRateLow || rate >= sdr.RTLMinRateHigh && rate <= sdr.RTLMaxRateHigh) {
		t.Errorf("the demo keeps recordings at %v S/s, a rate rtl_tcp refuses", rate)
	}
	ran, skipped, jsonChecked := 0, 0, 0
	for _, c := range cmds {
		name := fmt.Sprintf("README line %d: nullseek %s", c.line, strings.Join(c.args, " "))
		switch {
		case c.write != "" && c.skip == "":
			writeFile(t, filepath.Join(dir, c.write), []byte(c.content))
			continue
		case c.skip != "":
			t.Logf("%s: not run: %s", name, c.skip)
			skipped++
			continue
		case len(c.args) > 0 && c.args[0] == "demo" && subset(c.args, setup):
			t.Logf("%s: ran first, as %v", name, setup)
			ran++
			continue
		}
		r := cliRun(t, dir, c.args...)
		out := r.stdout
		if c.stdout != "" {
			writeFile(t, filepath.Join(dir, c.stdout), []byte(r.stdout))
		}
		if r.code != 0 {
			t.Errorf("%s: exit %d\n%s", name, r.code, r.stderr)
			continue
		}
		if strings.TrimSpace(out) == "" {
			t.Errorf("%s: printed nothing", name)
		}
		if contains(c.args, "--json") {
			checkJSONConventions(t, name, out)
		} else if c.args[0] == "scan" || c.args[0] == "slots" || c.args[0] == "fix" {
			// the same with --json, for the conventions
			rj := cliRun(t, dir, append(c.args, "--json")...)
			if rj.code != 0 {
				t.Errorf("%s --json: exit %d\n%s", name, rj.code, rj.stderr)
			}
			checkJSONConventions(t, name+" --json", rj.stdout)
			jsonChecked++
		}
		ran++
	}
	t.Logf("%d README commands run, %d not run (marked)", ran, skipped)
	// The README's session: the demo, scan, slots, three bearings, fix,
	// report, calibrate; and at least the live block marked.
	if ran < 9 || skipped < 1 || jsonChecked < 3 {
		t.Errorf("found %d commands to run (%d also with --json) and %d marked: the README's blocks were not read", ran, jsonChecked, skipped)
	}
}

func contains(s []string, w string) bool {
	for _, x := range s {
		if x == w {
			return true
		}
	}
	return false
}

// subset: every word of a is in b.
func subset(a, b []string) bool {
	for _, x := range a {
		if !contains(b, x) {
			return false
		}
	}
	return true
}

// numberKey is a key whose value is a number (its name ends in a unit).
var numberKey = regexp.MustCompile(`_(deg|db|dbfs|s|m|m2|hz|ppm)$|^(lat|lon|probability|p_value|chi2|variance_factor|ident_confidence|ident_share|clipped|wpm)$`)

// checkJSONConventions checks the conventions the README's "JSON lines"
// section states, on every line a command printed with --json: one
// object a line with a string "type"; no NaN or Inf (RFC 8259 has none:
// such a line would not parse); null only for a number (a value that is
// not finite, named in the line's warnings), never for a list or a
// string; a size names semi-axes or full axes.
func checkJSONConventions(t *testing.T, name, out string) {
	t.Helper()
	lines := strings.Split(strings.TrimSpace(out), "\n")
	for i, l := range lines {
		var m map[string]any
		if err := json.Unmarshal([]byte(l), &m); err != nil {
			t.Errorf("%s: line %d is not a JSON object: %v\n%s", name, i+1, err, l)
			continue
		}
		if ty, ok := m["type"].(string); !ok || ty == "" {
			t.Errorf("%s: line %d has no \"type\": %.200s", name, i+1, l)
		}
		walkJSON(m, "", func(path, key string, v any) {
			if v == nil && !numberKey.MatchString(key) {
				t.Errorf("%s: line %d: %s is null but is not a number", name, i+1, path)
			}
			if strings.Contains(key, "major") || strings.Contains(key, "minor") || strings.Contains(key, "axis") {
				if !strings.Contains(key, "semi_") && !strings.Contains(key, "full_") {
					t.Errorf("%s: line %d: %s does not say semi- or full axis", name, i+1, path)
				}
			}
		})
	}
}

// walkJSON calls f for every key of every object in v.
func walkJSON(v any, path string, f func(path, key string, v any)) {
	switch x := v.(type) {
	case map[string]any:
		for k, e := range x {
			f(path+"."+k, k, e)
			walkJSON(e, path+"."+k, f)
		}
	case []any:
		for i, e := range x {
			walkJSON(e, fmt.Sprintf("%s[%d]", path, i), f)
		}
	}
}
