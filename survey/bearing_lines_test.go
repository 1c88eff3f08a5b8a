package survey

import (
	"bytes"
	"io"
	"testing"
	"time"

	"nullseek/bearing"
	"nullseek/geo"
)

// TestBearingLineMatchesRecord: a "bearing" line of bearing --json and the
// bearings CSV row of the same transmitter read back as the same record,
// on numbers that sit on a rounding edge (x.xx5 in degrees, a position's
// 7th decimal 5, a time 0.5 ms past a millisecond), so that fix gets the
// same bearing from either file.
func TestBearingLineMatchesRecord(t *testing.T) {
	alt, decl, height := 131.525, -2.125, 41.25
	start := time.Date(2025, 1, 1, 0, 0, 2, 999500000, time.UTC)
	txs := []TxBearing{
		{Ident: "N0CALL/1", Transmitter: "T1", Combined: bearing.Combined{BearingDeg: 311.525, SigmaDeg: 1, AltBearingDeg: &alt, BurstsUsed: 2},
			SigmaDeg: 3.0149999, SiteSigmaDeg: 3, Time: start},
		{Ident: "N0CALL/2", Transmitter: "T2", Combined: bearing.Combined{BearingDeg: 0.005, SigmaDeg: 0.0041235, BurstsUsed: 1},
			SigmaDeg: 0.0041235, Time: start.Add(-time.Hour)},
	}
	site := Site{Station: "north-hill", Lat: 52.1234565, Lon: -5.8672005, HasPosition: true, AltM: &height, DeclinationDeg: &decl}
	var lines, csv bytes.Buffer
	if err := WriteBearingsJSON(&lines, nil, txs, site); err != nil {
		t.Fatal(err)
	}
	if err := geo.WriteBearingsCSV(&csv, Records(site, txs)); err != nil {
		t.Fatal(err)
	}
	read := func(b *bytes.Buffer) []geo.BearingRecord {
		br, err := geo.NewBearingReader(bytes.NewReader(b.Bytes()))
		if err != nil {
			t.Fatal(err)
		}
		var out []geo.BearingRecord
		for {
			r, err := br.Next()
			if err == io.EOF {
				return out
			}
			if err != nil {
				t.Fatalf("%v\n%s", err, b.String())
			}
			r.Row = 0
			out = append(out, r)
		}
	}
	fromJSON, fromCSV := read(&lines), read(&csv)
	if len(fromJSON) != 2 || len(fromCSV) != 2 {
		t.Fatalf("read %d from the lines, %d from the CSV\n%s\n%s", len(fromJSON), len(fromCSV), lines.String(), csv.String())
	}
	for i := range fromJSON {
		j, c := fromJSON[i], fromCSV[i]
		if j.LOP != c.LOP || j.Magnetic != c.Magnetic || j.DeclinationDeg != c.DeclinationDeg || j.HasDeclination != c.HasDeclination ||
			j.AltM != c.AltM || j.HasAltM != c.HasAltM || j.AltBearingDeg != c.AltBearingDeg || j.HasAltBearing != c.HasAltBearing {
			t.Errorf("transmitter %d: the line reads as\n%+v\nthe CSV row as\n%+v\n%s\n%s", i, j, c, lines.String(), csv.String())
		}
		if !j.Time.Equal(txs[i].Time.Round(time.Millisecond)) || j.SigmaDeg <= 0 {
			t.Errorf("transmitter %d: time %v (want %v to the ms), sigma %v", i, j.Time, txs[i].Time, j.SigmaDeg)
		}
	}
}
