package bearing

import (
	"fmt"
	"math"
	"strings"
)

// AntennaSpec chooses an antenna pattern by name and shape, as the
// commands' --antenna, --beamwidth, --front-back, --null-depth and
// --body-depth flags do. Start from DefaultAntenna: a shape number of 0 is
// out of range (only an empty Kind means DefaultAntenna's).
type AntennaSpec struct {
	// Kind is one of the AntennaKinds names, or the path of a pattern file
	// written by calibrate (ending in .json).
	Kind string
	// BeamwidthDeg and FrontBackDB shape a Yagi (see Yagi).
	BeamwidthDeg, FrontBackDB float64
	// NullDepthDB shapes a small loop (see SmallLoop).
	NullDepthDB float64
	// BodyDepthDB shapes the body shield (see BodyShield).
	BodyDepthDB float64
}

// DefaultAntenna holds the antenna defaults (the flags read theirs from it):
// a small 2 m Yagi, 60° beam and 18 dB front-to-back; a loop's null of
// 25 dB and a body's drop of 12 dB (common practice, from memory:
// 15–20 dB F/B for a small Yagi, 20–30 dB for a shielded loop's null,
// 10 dB or more for body shielding at 2 m).
var DefaultAntenna = AntennaSpec{Kind: "yagi", BeamwidthDeg: 60, FrontBackDB: 18, NullDepthDB: 25, BodyDepthDB: 12}

// AntennaKinds are the built-in patterns with the heading each takes.
var AntennaKinds = []struct{ Name, Heading string }{
	{"yagi", RefBoresight},
	{"loop", RefLoopAxis + " (the same as loop-axis)"},
	{"loop-axis", RefLoopAxis},
	{"loop-plane", RefLoopPlane},
	{"body", RefFacing},
}

// AntennaHelp describes the --antenna choices and the heading each
// expects, for a command's help.
func AntennaHelp() string {
	var b strings.Builder
	b.WriteString("antenna pattern, and which direction of the antenna the heading names:")
	for _, k := range AntennaKinds {
		fmt.Fprintf(&b, " %s = %s;", k.Name, k.Heading)
	}
	b.WriteString(" or a pattern file from calibrate (.json: it carries its heading and mount offset)")
	return b.String()
}

func (a AntennaSpec) withDefaults() AntennaSpec {
	if a.Kind == "" {
		a.Kind = DefaultAntenna.Kind
	}
	return a
}

// IsFile reports whether Kind names a pattern file.
func (a AntennaSpec) IsFile() bool { return strings.HasSuffix(strings.ToLower(a.Kind), ".json") }

// Validate checks the kind and every shape number against the ranges the
// pattern constructors accept (a NaN fails every range), naming the flag.
func (a AntennaSpec) Validate() error {
	a = a.withDefaults()
	known := a.IsFile()
	for _, k := range AntennaKinds {
		if strings.EqualFold(a.Kind, k.Name) {
			known = true
		}
	}
	if !known {
		var names []string
		for _, k := range AntennaKinds {
			names = append(names, k.Name)
		}
		return fmt.Errorf("--antenna %q: want %s, or a pattern .json file from calibrate", a.Kind, strings.Join(names, ", "))
	}
	checks := []struct {
		flag   string
		what   string
		v      float64
		lo, hi float64
		unit   string
		loOpen bool
	}{
		{"--beamwidth", "the Yagi's -3 dB beamwidth", a.BeamwidthDeg, 5, 180, "°", false},
		{"--front-back", "the Yagi's front-to-back ratio", a.FrontBackDB, 1, 60, " dB", false},
		{"--null-depth", "the loop's null depth", a.NullDepthDB, 0, -MinGainDB, " dB", true},
		{"--body-depth", "the body-shield drop", a.BodyDepthDB, 0, 40, " dB", true},
	}
	for _, c := range checks {
		ok := c.v <= c.hi && (c.v > c.lo || (!c.loOpen && c.v == c.lo))
		if !ok || math.IsNaN(c.v) {
			lb := "["
			if c.loOpen {
				lb = "("
			}
			return fmt.Errorf("%s %v: %s must be in %s%g, %g]%s", c.flag, c.v, c.what, lb, c.lo, c.hi, c.unit)
		}
	}
	return nil
}

// Pattern builds (or, for a file, loads) the pattern.
func (a AntennaSpec) Pattern() (Pattern, error) {
	if err := a.Validate(); err != nil {
		return Pattern{}, err
	}
	a = a.withDefaults()
	switch strings.ToLower(a.Kind) {
	case "loop", "loop-axis":
		return SmallLoop(a.NullDepthDB)
	case "loop-plane":
		return LoopPlane(a.NullDepthDB)
	case "yagi":
		return Yagi(a.BeamwidthDeg, a.FrontBackDB)
	case "body":
		return BodyShield(a.BodyDepthDB)
	}
	return LoadPattern(a.Kind)
}
