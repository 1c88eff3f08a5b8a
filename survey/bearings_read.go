package survey

import (
	"encoding/json"
	"fmt"
	"io"
)

// TxBearingSummary is what ReadTxBearingsJSON gives back of one
// transmitter's "bearing" line of `nullseek bearing --json`.
type TxBearingSummary struct {
	Ident, Transmitter string
	// BearingDeg and SigmaDeg are nil when the line carries no bearing
	// (Error says why).
	BearingDeg, SigmaDeg *float64
	BurstsUsed           int
	Error                string
}

// ReadTxBearingsJSON reads the output of `nullseek bearing --json` (one
// JSON object a line, as TxBearing.MarshalJSON and BurstBearing.MarshalJSON
// write them) and returns its "bearing" lines in order; the
// "burst_bearing" lines are skipped. Any other object is an error naming
// its line.
func ReadTxBearingsJSON(r io.Reader) ([]TxBearingSummary, error) {
	dec := json.NewDecoder(r)
	var out []TxBearingSummary
	for n := 1; ; n++ {
		var raw json.RawMessage
		if err := dec.Decode(&raw); err == io.EOF {
			break
		} else if err != nil {
			return nil, fmt.Errorf("entry %d: %w", n, err)
		}
		var l txBearingLine
		if err := json.Unmarshal(raw, &l); err != nil {
			return nil, fmt.Errorf("entry %d: %w", n, err)
		}
		switch l.Type {
		case "burst_bearing":
			continue
		case "bearing":
			out = append(out, TxBearingSummary{Ident: l.Ident, Transmitter: l.Transmitter, BearingDeg: l.BearingDeg,
				SigmaDeg: l.SigmaDeg, BurstsUsed: l.BurstsUsed, Error: l.Error})
		default:
			return nil, fmt.Errorf("entry %d: type %q is neither bearing nor burst_bearing (not the output of bearing --json?)", n, l.Type)
		}
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("no bearing lines")
	}
	return out, nil
}
