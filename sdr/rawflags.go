package sdr

import (
	"fmt"
	"time"

	"nullseek/internal/units"
)

// RawFlags describe a raw recording as the command line gives them, as
// text: --rate and --center in hertz (units.ParseHz: SI prefixes, "Hz"
// allowed), --format a SigMF datatype, --start an RFC 3339 time. A SigMF
// or WAV recording carries its own and needs none (Open). Params is the
// one parser of these flags.
type RawFlags struct {
	Rate, Format, Center, Start string
}

// Params parses the flags; an error names the flag.
func (f RawFlags) Params() (p RawParams, err error) {
	if p.SampleRate, err = units.HzFlag("rate", f.Rate); err != nil {
		return p, err
	}
	if p.CenterHz, err = units.HzFlag("center", f.Center); err != nil {
		return p, err
	}
	p.Format = f.Format
	if f.Start != "" {
		t, err := time.Parse(time.RFC3339Nano, f.Start)
		if err != nil {
			return p, fmt.Errorf("--start %q is not an RFC 3339 time (example 2026-05-01T10:00:00Z)", f.Start)
		}
		p.Start = t.UTC()
	}
	return p, nil
}
