// Package nmea frames NMEA 0183 sentences: the length and character
// limits, the *hh checksum and the split into address and fields. It knows
// no sentence type; package heading reads HDT/HDM/HDG through it and
// package position GGA/RMC, so the framing rules have one owner.
//
// Source: NMEA 0183 (NMEA 0183 Standard for Interfacing Marine Electronic
// Devices, sentence structure: '$', an address of a 2-character talker and
// a 3-character formatter, comma-separated fields, an optional "*hh"
// checksum, CR LF, at most 82 characters), relied on as published in
// gpsd's www/NMEA.adoc (gpsd 3.22, "NMEA 0183 sentence structure"). The
// clause numbers of the paid standard are not quoted here.
package nmea

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
)

// MaxLen is the longest sentence in bytes including '$' and CR LF
// (NMEA 0183 sentence structure).
const MaxLen = 82

// Errors a caller may want to tell apart (test with errors.Is).
var (
	// ErrChecksum: the *hh checksum does not match the sentence.
	ErrChecksum = errors.New("NMEA checksum mismatch")
	// ErrNoChecksum: the sentence has no *hh checksum.
	ErrNoChecksum = errors.New("NMEA sentence has no checksum")
)

// Checksum returns the NMEA 0183 checksum of body, the characters between
// '$' and '*': the 8-bit XOR of all of them (NMEA 0183 checksum field).
func Checksum(body string) byte {
	var c byte
	for i := 0; i < len(body); i++ {
		c ^= body[i]
	}
	return c
}

// Sentence is one framed sentence.
type Sentence struct {
	// Talker is the two-character talker ID ("GP", "GN", "HC", ...).
	Talker string
	// Type is the three-character sentence formatter ("GGA", "HDT", ...).
	Type string
	// Fields are the comma-separated data fields after the address; field
	// 1 of the standard's numbering is Fields[0].
	Fields []string
}

// Split checks the framing of one sentence and splits it. Trailing CR/LF
// and spaces are ignored.
//
// Rules: the sentence must start with '$', be at most MaxLen bytes counting
// a CR LF ending, contain only printable ASCII, and carry a *hh checksum
// that matches (hex digits of either case); without one it is rejected with
// ErrNoChecksum unless requireChecksum is false. The address must be 5
// upper-case letters or digits (talker + formatter); proprietary "$P..."
// sentences of other lengths are refused as not parsable here.
func Split(line string, requireChecksum bool) (Sentence, error) {
	var r Sentence
	s := strings.TrimRight(line, "\r\n ")
	if len(s)+2 > MaxLen {
		return r, fmt.Errorf("NMEA sentence is %d bytes with CR LF, longer than %d", len(s)+2, MaxLen)
	}
	if !strings.HasPrefix(s, "$") {
		return r, errors.New("NMEA sentence does not start with '$'")
	}
	for i := 0; i < len(s); i++ {
		if s[i] < 0x20 || s[i] > 0x7e {
			return r, fmt.Errorf("NMEA sentence has a non-printable byte 0x%02x at %d", s[i], i)
		}
	}
	body := s[1:]
	if star := strings.IndexByte(body, '*'); star >= 0 {
		sum := body[star+1:]
		body = body[:star]
		if len(sum) != 2 {
			return r, fmt.Errorf("NMEA checksum %q is not 2 hex digits", sum)
		}
		want, err := strconv.ParseUint(sum, 16, 8)
		if err != nil {
			return r, fmt.Errorf("NMEA checksum %q is not 2 hex digits", sum)
		}
		if got := Checksum(body); byte(want) != got {
			return r, fmt.Errorf("%w: sentence says %02X, computed %02X", ErrChecksum, want, got)
		}
	} else if requireChecksum {
		return r, ErrNoChecksum
	}
	fields := strings.Split(body, ",")
	addr := fields[0]
	if len(addr) != 5 || !isAlnumUpper(addr) {
		return r, fmt.Errorf("NMEA address %q is not a 2-character talker and 3-character type", addr)
	}
	r.Talker, r.Type, r.Fields = addr[:2], addr[2:], fields[1:]
	return r, nil
}

func isAlnumUpper(s string) bool {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= 'A' && c <= 'Z' || c >= '0' && c <= '9') {
			return false
		}
	}
	return true
}

// IsDecimal accepts digits with at most one '.', and nothing else (no
// sign, exponent, "NaN" or "Inf"): the form of NMEA 0183's numeric fields
// ("x.x", variable-length numeric).
func IsDecimal(s string) bool {
	dot, digits := false, 0
	for i := 0; i < len(s); i++ {
		switch c := s[i]; {
		case c >= '0' && c <= '9':
			digits++
		case c == '.' && !dot:
			dot = true
		default:
			return false
		}
	}
	return digits > 0
}
