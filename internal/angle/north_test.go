package angle

import (
	"strings"
	"testing"
)

// TestParseNorth: the two words naming a north (true or magnetic north,
// common practice), in any case, and nothing else: no abbreviation, no
// padding; String writes what ParseNorth reads.
func TestParseNorth(t *testing.T) {
	for _, c := range []struct {
		in   string
		want North
		ok   bool
	}{
		{"true", TrueNorth, true}, {"TRUE", TrueNorth, true}, {"Magnetic", MagneticNorth, true},
		{"t", TrueNorth, false}, {"m", TrueNorth, false}, {"mag", TrueNorth, false}, {"grid", TrueNorth, false},
		{"", TrueNorth, false}, {" true", TrueNorth, false}, {"magnetic ", TrueNorth, false},
	} {
		got, err := ParseNorth(c.in)
		if (err == nil) != c.ok || (c.ok && got != c.want) {
			t.Errorf("ParseNorth(%q) = %v, %v; want %v, ok %v", c.in, got, err, c.want, c.ok)
		}
		if err != nil && !strings.Contains(err.Error(), "want true or magnetic") {
			t.Errorf("ParseNorth(%q) error %q does not say what is wanted", c.in, err)
		}
	}
	for _, n := range []North{TrueNorth, MagneticNorth} {
		if back, err := ParseNorth(n.String()); err != nil || back != n {
			t.Errorf("%v does not read back: %v, %v", n, back, err)
		}
	}
}
