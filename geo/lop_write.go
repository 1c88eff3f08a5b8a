package geo

import (
	"encoding/binary"
	"encoding/csv"
	"fmt"
	"hash/fnv"
	"io"
	"math"
	"strconv"
)

// BearingsCSVHeader is the header WriteBearingsCSV writes: the columns that
// ReadBearingsCSV reads.
var BearingsCSVHeader = []string{"ident", "station", "lat", "lon", "bearing_deg", "sigma_deg", "reference", "time", "declination_deg", "ambiguous", "alt_bearing_deg", "alt_m"}

// BearingTimeLayout is the form of a bearing's time in the bearings files
// (RFC 3339, UTC, to the millisecond), the same in the CSV and in the
// lines of `bearing --json`.
const BearingTimeLayout = "2006-01-02T15:04:05.000Z07:00"

// Rounding of the bearings files, the same in the CSV and in the lines
// of `bearing --json`, so that both give the same fix: positions to
// 1e-6° (about 0.1 m), angles to 0.01°, heights to 0.1 m.
const (
	PositionDecimals = 6
	AngleDecimals    = 2
	HeightDecimals   = 1
)

// SigmaText is how the bearings files write a sigma in degrees: to
// 0.01° from 1° up, and to three significant figures below, so that a
// small sigma never reads as 0 (which fix would refuse).
func SigmaText(v float64) string {
	if math.Abs(v) >= 1 {
		return strconv.FormatFloat(v, 'f', AngleDecimals, 64)
	}
	return strconv.FormatFloat(v, 'g', 3, 64)
}

// RoundSigma rounds a sigma as SigmaText writes it.
func RoundSigma(v float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	r, _ := strconv.ParseFloat(SigmaText(v), 64)
	return r
}

// RoundTo rounds v to the given number of decimals exactly as the CSV
// writes it (the float nearest the decimal text), so that a JSON number
// and a CSV cell of the same value read back as the same float. Non-finite
// values pass through.
func RoundTo(v float64, decimals int) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	r, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'f', decimals, 64), 64)
	return r
}

// WriteBearingsCSV writes records in the CSV form ReadBearingsCSV reads:
// lat/lon to 1e-6° (about 0.1 m), bearing to 0.01°, sigma as SigmaText,
// reference
// "true" or "magnetic", time in RFC 3339 UTC to the millisecond (empty
// when unknown), declination_deg only when the record carries its own,
// ambiguous true/false, alt_bearing_deg and alt_m only when known.
// Non-finite numbers are refused (an error naming the record), so the
// file always reads back. It is the one writer of the bearings CSV.
func WriteBearingsCSV(w io.Writer, recs []BearingRecord) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(BearingsCSVHeader); err != nil {
		return err
	}
	f := func(x float64, prec int) string { return strconv.FormatFloat(x, 'f', prec, 64) }
	for i, r := range recs {
		for _, v := range []float64{r.Lat, r.Lon, r.BearingDeg, r.SigmaDeg, r.DeclinationDeg, r.AltBearingDeg, r.AltM} {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("bearings CSV: record %d (%s at %s) has a non-finite number", i+1, r.Ident, r.Station)
			}
		}
		ref := "true"
		if r.Magnetic {
			ref = "magnetic"
		}
		when, decl, alt, altM := "", "", "", ""
		if !r.Time.IsZero() {
			when = r.Time.UTC().Format(BearingTimeLayout)
		}
		if r.HasDeclination {
			decl = f(r.DeclinationDeg, AngleDecimals)
		}
		if r.HasAltBearing {
			alt = f(r.AltBearingDeg, AngleDecimals)
		}
		if r.HasAltM {
			altM = f(r.AltM, HeightDecimals)
		}
		if err := cw.Write([]string{r.Ident, r.Station, f(r.Lat, PositionDecimals), f(r.Lon, PositionDecimals),
			f(r.BearingDeg, AngleDecimals), SigmaText(r.SigmaDeg), ref, when, decl, strconv.FormatBool(r.Ambiguous), alt, altM}); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// Duplicates spots records that repeat an earlier one exactly (every field
// that reaches the fix the same: ident, station, position, bearing, sigma,
// reference, time, declination, ambiguity, alternate, height; the row
// number aside). It keeps
// a 128-bit hash per distinct record, so it costs about 50 bytes a record.
type Duplicates struct {
	seen map[[2]uint64]int
	// Count is the number of repeats seen; First and FirstOf name the first
	// repeat and the row it repeats.
	Count          int
	First, FirstOf int
}

// Seen reports whether rec repeats an earlier record, and that record's
// row.
func (d *Duplicates) Seen(rec BearingRecord) (dup bool, firstRow int) {
	if d.seen == nil {
		d.seen = map[[2]uint64]int{}
	}
	h := fnv.New128a()
	var b [8]byte
	put := func(x float64) {
		binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
		h.Write(b[:])
	}
	h.Write([]byte(rec.Ident))
	h.Write([]byte{0})
	h.Write([]byte(rec.Station))
	h.Write([]byte{0})
	for _, x := range []float64{rec.Lat, rec.Lon, rec.BearingDeg, rec.SigmaDeg, rec.DeclinationDeg, rec.AltBearingDeg, rec.AltM} {
		put(x)
	}
	binary.LittleEndian.PutUint64(b[:], uint64(rec.Time.UnixNano()))
	h.Write(b[:])
	flags := byte(0)
	for i, f := range []bool{rec.Magnetic, rec.HasDeclination, rec.Ambiguous, rec.Time.IsZero(), rec.HasAltBearing, rec.HasAltM} {
		if f {
			flags |= 1 << i
		}
	}
	h.Write([]byte{flags})
	sum := h.Sum(nil)
	key := [2]uint64{binary.LittleEndian.Uint64(sum[:8]), binary.LittleEndian.Uint64(sum[8:])}
	if row, ok := d.seen[key]; ok {
		d.Count++
		if d.Count == 1 {
			d.First, d.FirstOf = rec.Row, row
		}
		return true, row
	}
	d.seen[key] = rec.Row
	return false, 0
}
