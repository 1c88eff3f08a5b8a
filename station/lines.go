package station

import (
	"fmt"
	"strings"

	"github.com/pelletier/go-toml/v2/unstable"
)

// keyLines maps every key of a TOML document to the line it is written
// on: "name", "receiver.gain_db", "channel[2].freq"; tables map too
// ("receiver", "channel[2]"). It reads the document with go-toml's
// expression parser (package unstable, pinned with the module version),
// which the decoder itself uses, so the lines are the decoder's. The
// document has already been decoded without error; on a parse error the
// map holds what came before it.
func keyLines(doc []byte) map[string]int {
	lines := map[string]int{}
	var p unstable.Parser
	p.Reset(doc)
	prefix := ""
	count := map[string]int{}
	for p.NextExpression() {
		e := p.Expression()
		switch e.Kind {
		case unstable.Table, unstable.ArrayTable:
			name, line := keyOf(&p, e.Key())
			if e.Kind == unstable.ArrayTable {
				count[name]++
				name = fmt.Sprintf("%s[%d]", name, count[name])
			}
			prefix = name
			if line > 0 {
				lines[prefix] = line
			}
		case unstable.KeyValue:
			name, line := keyOf(&p, e.Key())
			if prefix != "" {
				name = prefix + "." + name
			}
			if line > 0 {
				lines[name] = line
			}
		}
	}
	return lines
}

// keyOf joins a dotted key and returns the line of its first part (0 when
// the parser gave no position).
func keyOf(p *unstable.Parser, it unstable.Iterator) (string, int) {
	var parts []string
	line := 0
	for it.Next() {
		n := it.Node()
		parts = append(parts, string(n.Data))
		if line == 0 {
			line = lineOf(p, n)
		}
	}
	return strings.Join(parts, "."), line
}

// lineOf finds a node's line from its raw range, or from its data when
// that lies in the document; 0 otherwise.
func lineOf(p *unstable.Parser, n *unstable.Node) (line int) {
	defer func() {
		if recover() != nil { // Range panics on data that is not the document's
			line = 0
		}
	}()
	if n.Raw.Length > 0 {
		return p.Shape(n.Raw).Start.Line
	}
	return p.Shape(p.Range(n.Data)).Start.Line
}
