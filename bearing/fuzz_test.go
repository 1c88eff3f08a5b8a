package bearing

import (
	"fmt"
	"reflect"
	"strings"
	"testing"
)

// FuzzPatternFile fuzzes the pattern file grammar (ParsePattern) through
// small inputs. FuzzParsePattern feeds whole files and seeds an 8.3 kB
// MarshalPattern output (360 gains, one per indented line); Go's
// minimiser removes every sub-range of an input that found new coverage
// (internal/fuzz minimizeBytes, quadratic in the length: about 35 million
// tries for 8.3 kB, each a JSON parse of 360 numbers), so both workers
// spend the run minimising and fuzzing stops after a few hundred
// executions. Here the file is built inside the target from its fields
// and a gain table of one byte per degree (−b/3 dB), with a raw fragment
// spliced in to reach the JSON grammar, so inputs stay a few hundred
// bytes. What parses must validate, re-marshal and parse back equal.
func FuzzPatternFile(f *testing.F) {
	yagi := make([]byte, PatternSteps)
	for k := range yagi {
		d := float64(min(k, PatternSteps-k))
		yagi[k] = byte(min(240.0, d*d/300*3))
	}
	f.Add(patternFormat, 1, "yagi", "peak", 1, 1.0, yagi, uint16(PatternSteps), "", uint8(0))
	f.Add(patternFormat, 1, "loop", "null", 2, 1.0, yagi[:180], uint16(PatternSteps), "", uint8(0))
	f.Add(patternFormat, 1, "x", "peak", 1, 1.0, []byte{0}, uint16(PatternSteps), `,"extra":[1,2]`, uint8(3))
	f.Add(patternFormat, 2, "", "null", 7, 0.5, []byte{}, uint16(0), `}`, uint8(1))
	f.Add("", 0, "", "", 0, 0.0, []byte{}, uint16(0), `{"gain_db":null}`, uint8(7))
	f.Fuzz(func(t *testing.T, format string, version int, name, mode string, symmetry int, step float64, gains []byte, count uint16, raw string, where uint8) {
		if len(raw) > 1024 || len(name) > 256 {
			return
		}
		g := make([]string, int(count)%(2*PatternSteps))
		for k := range g {
			b := byte(0)
			if len(gains) > 0 {
				b = gains[k%len(gains)]
			}
			g[k] = fmt.Sprintf("%g", -float64(b)/3)
		}
		fields := []string{
			fmt.Sprintf(`"format":%q`, format), fmt.Sprintf(`"version":%d`, version),
			fmt.Sprintf(`"name":%q`, name), fmt.Sprintf(`"mode":%q`, mode),
			fmt.Sprintf(`"symmetry":%d`, symmetry), fmt.Sprintf(`"step_deg":%g`, step),
			`"gain_db":[` + strings.Join(g, ",") + `]`,
		}
		i := int(where) % (len(fields) + 2)
		var doc string
		switch {
		case i < len(fields):
			fields[i] += raw
			doc = "{" + strings.Join(fields, ",") + "}"
		case i == len(fields):
			doc = "{" + strings.Join(fields, ",") + "}" + raw
		default:
			doc = raw // the grammar alone
		}
		p, err := ParsePattern([]byte(doc))
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("multi-line error %q", err)
			}
			return
		}
		if err := p.Validate(); err != nil {
			t.Fatalf("parsed pattern does not validate: %v", err)
		}
		b, err := MarshalPattern(p)
		if err != nil {
			t.Fatalf("re-marshal: %v", err)
		}
		q, err := ParsePattern(b)
		if err != nil || !reflect.DeepEqual(p, q) {
			t.Fatalf("round trip: %v\n%+v\n%+v", err, p, q)
		}
	})
}
