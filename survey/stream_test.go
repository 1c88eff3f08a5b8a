package survey

import (
	"context"
	"path/filepath"
	"testing"

	"nullseek/ident/idmatch"
	"nullseek/receiver"
	"nullseek/sdr"
)

// TestStreamMatchesRun: Stream hands over, burst by burst, the records Run
// collects before its naming, on the GNU Radio 3.10 burst fixture
// (testdata/bursts/make_bursts.py, committed): same bursts, same edges,
// same Morse reading, and no transmitter named (naming is Run's).
func TestStreamMatchesRun(t *testing.T) {
	path := filepath.Join(testdataDir, "bursts", "steps96k.sigmf-meta")
	open := func() sdr.Source {
		src, err := sdr.Open(path, sdr.RawParams{})
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { src.Close() })
		return src
	}
	res, err := Run(context.Background(), open(), Options{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	var got []Record
	pieces := 0
	sum, err := Stream(context.Background(), open(), Options{}, StreamHandler{
		Record: func(r Record) error { got = append(got, r); return nil },
		Piece:  func(p *receiver.Piece) error { pieces++; return nil },
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Records) == 0 || len(got) != len(res.Records) || sum.Bursts != res.Summary.Bursts {
		t.Fatalf("Stream gave %d records (%d bursts), Run %d (%d)", len(got), sum.Bursts, len(res.Records), res.Summary.Bursts)
	}
	if pieces < len(got) {
		t.Errorf("%d pieces for %d bursts: every burst has at least one", pieces, len(got))
	}
	for i, r := range got {
		w := res.Records[i]
		if r.StartSample != w.StartSample || r.EndSample != w.EndSample || r.Text != w.Text || r.Mode != w.Mode {
			t.Errorf("record %d: Stream %d–%d %q %s, Run %d–%d %q %s", i, r.StartSample, r.EndSample, r.Text, r.Mode, w.StartSample, w.EndSample, w.Text, w.Mode)
		}
		if r.Transmitter != "" || (r.IdentMethod == "fingerprint" && r.Ident != idmatch.Unknown) {
			t.Errorf("record %d: Stream named it %q (%s): naming is Run's", i, r.Transmitter, r.IdentMethod)
		}
	}
}
