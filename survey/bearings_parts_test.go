package survey

import (
	"testing"

	"nullseek/bearing"
	"nullseek/ident/idmatch"
)

// TestBearingsUnattributedPart: a part of a split burst that fits no
// transmitter keeps its burst line but makes no transmitter of its own
// (issue: cut and colliding transmissions never become transmitters),
// while a whole burst that fits none (a carrier filling the recording)
// still gets its transmitter line.
func TestBearingsUnattributedPart(t *testing.T) {
	est := bearing.Estimate{BearingDeg: 200, SigmaDeg: 0.5, CoverageDeg: 360}
	rec := func(index, part, parts int, tx string) Record {
		r := Record{Ident: idmatch.Unknown, Transmitter: tx, Part: part, Parts: parts, Fit: &BurstFit{Est: est}}
		r.Index = index
		return r
	}
	res := &Result{Records: []Record{rec(1, 0, 0, "T1"), rec(2, 1, 2, "T1"), rec(2, 2, 2, "")}}
	bbs, txs := Bearings(res, nil, bearing.Pattern{}, bearing.FitOptions{}, 0)
	if len(bbs) != 3 {
		t.Fatalf("%d burst lines, want 3", len(bbs))
	}
	if len(txs) != 1 || txs[0].Ident != "T1" || txs[0].Combined.BurstsUsed != 2 {
		t.Fatalf("transmitters %+v, want T1 alone from 2 bursts", txs)
	}
	res = &Result{Records: []Record{rec(1, 0, 0, "")}}
	if _, txs := Bearings(res, nil, bearing.Pattern{}, bearing.FitOptions{}, 0); len(txs) != 1 || txs[0].Ident != idmatch.Unknown {
		t.Fatalf("a whole unattributed burst: transmitters %+v, want one", txs)
	}
}
