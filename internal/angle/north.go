package angle

import (
	"fmt"
	"strings"
)

// North names the north an angle (a heading or a bearing) is measured
// from. heading.Ref is this type; the bearings files of package geo use
// it for their reference column, so that one grammar (ParseNorth) reads
// the word wherever it is written.
type North int

const (
	// TrueNorth: degrees clockwise from geographic (true) north. The zero
	// value: bearings are true unless a name says otherwise.
	TrueNorth North = iota
	// MagneticNorth: degrees clockwise from magnetic north; true =
	// magnetic + declination (east positive).
	MagneticNorth
)

// String returns "true" or "magnetic", the words ParseNorth reads.
func (n North) String() string {
	switch n {
	case TrueNorth:
		return "true"
	case MagneticNorth:
		return "magnetic"
	}
	return fmt.Sprintf("North(%d)", int(n))
}

// ParseNorth reads a north as people write it in flags, station files and
// bearings files: "true" or "magnetic", in any case, and nothing else (no
// abbreviations: a typo must not pick a north). It is the one parser of
// the word; callers add the flag, key or column to the error.
func ParseNorth(s string) (North, error) {
	switch {
	case strings.EqualFold(s, "true"):
		return TrueNorth, nil
	case strings.EqualFold(s, "magnetic"):
		return MagneticNorth, nil
	}
	return TrueNorth, fmt.Errorf("%q: want true or magnetic", s)
}
