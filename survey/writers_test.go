package survey

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"strings"
	"testing"

	"nullseek/bearing"
	"nullseek/heading"
)

// TestBearingWritersNoNaN drives every bearing writer with degenerate fits
// — NaN and ±Inf in every number a fit can produce — and checks the rule
// that no NaN or Inf reaches an output (JSON is RFC 8259, which has no
// NaN; encoding/json refuses it): the JSON lines are valid, carry null and
// a warning that names the fields, and the table prints "-" and says why.
func TestBearingWritersNoNaN(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	alt := nan
	bad := bearing.Estimate{BearingDeg: nan, SigmaDeg: inf, AltBearingDeg: &alt, NullDepthDB: nan, ResidualDB: -inf,
		CoverageDeg: nan, FisherSigmaDeg: inf, ModelSigmaDeg: nan, BootstrapSigmaDeg: nan, FadingDB: inf, Points: 3}
	bbs := []BurstBearing{
		{Index: 1, Ident: "N0CALL/1", StartS: nan, Est: bad},
		{Index: 2, Ident: "N0CALL/1", StartS: 2, Err: errors.New("fit bearing: too few usable level readings")},
	}
	txs := []TxBearing{
		{Ident: "N0CALL/1", Combined: bearing.Combined{BearingDeg: nan, SigmaDeg: inf, AltBearingDeg: &alt, PValue: nan,
			Excluded: []bearing.Exclusion{{BearingDeg: nan, Reason: "x"}}}, SigmaDeg: nan, SiteSigmaDeg: inf, NullDepthDB: nan, CoverageDeg: inf},
		{Ident: "N0CALL/2", Err: errors.New("no burst of N0CALL/2 gave a bearing")},
	}
	var lines [][]byte
	for _, b := range bbs {
		j, err := json.Marshal(b)
		if err != nil {
			t.Fatalf("burst %d: %v", b.Index, err)
		}
		lines = append(lines, j)
	}
	for _, x := range txs {
		j, err := json.Marshal(x)
		if err != nil {
			t.Fatalf("%s: %v", x.Ident, err)
		}
		lines = append(lines, j)
	}
	cal := &Calibration{Ident: "N0CALL/1"}
	cal.KnownBearingDeg, cal.NorthOffsetDeg, cal.SigmaDeg = nan, inf, nan
	cal.Alignment = bad
	cal.Shape = bearing.PatternShape{WidthDeg: nan, NullDepthDB: inf}
	j, err := json.Marshal(cal.Line(nan, 0, "given", "p.json"))
	if err != nil {
		t.Fatalf("calibration line: %v", err)
	}
	lines = append(lines, j)
	for i, l := range lines {
		if !json.Valid(l) || bytes.Contains(l, []byte("NaN")) || bytes.Contains(l, []byte("Inf")) {
			t.Errorf("line %d is not clean JSON: %s", i, l)
		}
	}
	for _, i := range []int{0, 2, 4} {
		if !bytes.Contains(lines[i], []byte("not a number, written as null")) || !bytes.Contains(lines[i], []byte(`"sigma_deg":null`)) && i != 4 {
			t.Errorf("line %d: no null and warning for the degenerate values: %s", i, lines[i])
		}
	}
	var tab bytes.Buffer
	if err := WriteBearingTable(&tab, bbs, txs, ReferenceNote(mustPattern(bearing.SmallLoop(25)), heading.True, 0)); err != nil {
		t.Fatal(err)
	}
	out := tab.String()
	if strings.Contains(out, "NaN") || strings.Contains(out, "Inf") || !strings.Contains(out, "not a number") {
		t.Errorf("table shows a non-number or does not say so:\n%s", out)
	}
	// Bearings itself refuses a non-finite combination rather than pass it on.
	if _, _, err := (TxBearing{Ident: "x", Err: errors.New("e")}).PlotData(nil); err == nil {
		t.Error("a transmitter without a bearing gave plot data")
	}
}
