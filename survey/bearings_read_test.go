package survey

import (
	"bytes"
	"encoding/json"
	"errors"
	"strings"
	"testing"

	"nullseek/bearing"
)

// ReadTxBearingsJSON reads back the transmitter lines MarshalJSON wrote,
// skipping the burst lines, and refuses what is not bearing --json.
func TestReadTxBearingsJSON(t *testing.T) {
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	alt := 301.5
	lines := []any{
		BurstBearing{Index: 0, Ident: "A", StartS: 1, Err: errors.New("no sweep")},
		TxBearing{Ident: "A", Transmitter: "T1", Combined: bearing.Combined{BearingDeg: 121.5, SigmaDeg: 1, BurstsUsed: 4, AltBearingDeg: &alt}, SigmaDeg: 3.16},
		TxBearing{Ident: "B", Transmitter: "T2", Err: errors.New("no burst fitted")},
	}
	for _, l := range lines {
		if err := enc.Encode(l); err != nil {
			t.Fatal(err)
		}
	}
	got, err := ReadTxBearingsJSON(&b)
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != 2 || got[0].Ident != "A" || got[0].Transmitter != "T1" || got[0].BurstsUsed != 4 ||
		got[0].BearingDeg == nil || *got[0].BearingDeg != 121.5 || *got[0].SigmaDeg != 3.16 ||
		got[1].Ident != "B" || got[1].BearingDeg != nil || got[1].Error != "no burst fitted" {
		t.Fatalf("read back %+v", got)
	}
	for _, c := range []struct{ in, want string }{
		{"", "no bearing lines"},
		{`{"type":"fix"}`, `entry 1: type "fix"`},
		{`{"type":"bearing","ident":"A"} {`, "entry 2"},
		{`{"type":"bearing","bursts_used":"x"}`, "entry 1"},
	} {
		if _, err := ReadTxBearingsJSON(strings.NewReader(c.in)); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: %v, want %q", c.in, err, c.want)
		}
	}
}
