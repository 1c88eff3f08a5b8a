package store

import (
	"fmt"
	"math"
)

// DefaultReadingsPerS is the rate level readings are thinned to before
// they are stored.
//
// The thinning rule: what a bearing needs is the level as a function of
// the antenna heading, at a resolution finer than the fit's heading bins
// (1° by default in package bearing) and the width of a loop's null. At
// 40 readings a second the antenna turns less than one degree between
// stored readings up to 40 °/s — a brisk hand turn; a rotator (a few °/s)
// gets a reading every tenth of a degree or so. The receiver reads 200 a
// second, five times more than the fit can use. A stored reading takes
// about 37 bytes of file (BenchmarkInsertReadings), so a channel busy all
// day would take about 640 MB unthinned and 130 MB thinned.
const DefaultReadingsPerS = 40.0

// ThinWindow is ThinLevels's window W in capture samples:
// round(sampleRateHz/perS), at least 1 (perS ≤ 0 means
// DefaultReadingsPerS).
func ThinWindow(sampleRateHz, perS float64) int64 {
	if perS <= 0 {
		perS = DefaultReadingsPerS
	}
	return max(1, int64(math.Round(sampleRateHz/perS)))
}

// WholeWindows bounds the ThinLevels windows that lie wholly inside
// [start, end] (capture samples): thinned readings with from ≤ Sample ≤
// through are those of the windows that averaged nothing from outside it.
// from > through when no window fits.
func WholeWindows(start, end int64, sampleRateHz, perS float64) (from, through int64) {
	w := ThinWindow(sampleRateHz, perS)
	return (start + w - 1) / w * w, (end+1)/w*w - 1
}

// ThinLevels reduces readings to at most perS a second, as a slower power
// meter would have read them: readings are grouped into windows of
// W = round(sampleRateHz/perS) capture samples aligned on sample 0 (window
// k holds the readings with k·W ≤ Sample < (k+1)·W), and each window gives
// one reading whose level is the mean of the members' linear power
// (10·log10 of the mean of 10^(L/10)), whose Sample and TimeS are the
// members' means (Sample rounded to the nearest integer), and whose
// Clipped is the members' sum — so a window with any clipped raw sample
// stays clipped and the fit leaves it out. A window holding one reading
// passes it on unchanged.
//
// The windows depend only on the capture's sample clock, so thinning the
// same readings again gives the same rows (the store's natural key is
// burst and sample), and thinning a thinned track changes nothing.
// Readings must be in increasing Sample order. When W ≤ 1 (perS at or
// above the sample rate) the input is returned as it is.
// perS ≤ 0 means DefaultReadingsPerS. The result does not alias in except
// in the unchanged case.
func ThinLevels(in []LevelReading, sampleRateHz, perS float64) ([]LevelReading, error) {
	if perS <= 0 {
		perS = DefaultReadingsPerS
	}
	if !(sampleRateHz > 0) || !finite(sampleRateHz, perS) {
		return nil, fmt.Errorf("%w: thin levels: sample rate %v Hz or rate %v/s is not usable", ErrBadRow, sampleRateHz, perS)
	}
	for i, r := range in {
		if !finite(r.TimeS, r.LevelDBFS) || r.Clipped < 0 || r.Sample < 0 {
			return nil, fmt.Errorf("%w: level reading %d (sample %d): NaN, infinite or negative value", ErrBadRow, i, r.Sample)
		}
		if i > 0 && r.Sample <= in[i-1].Sample {
			return nil, fmt.Errorf("%w: level reading %d (sample %d) is not after sample %d", ErrBadRow, i, r.Sample, in[i-1].Sample)
		}
	}
	w := ThinWindow(sampleRateHz, perS)
	if w <= 1 || len(in) == 0 {
		return in, nil
	}
	// A window needs at most as many output rows as input rows.
	out := make([]LevelReading, 0, min(len(in), int(float64(in[len(in)-1].Sample-in[0].Sample)/float64(w))+2))
	for i := 0; i < len(in); {
		k := in[i].Sample / w
		var sumP, sumT float64
		var sumS, n int64
		clipped := 0
		j := i
		for ; j < len(in) && in[j].Sample/w == k; j++ {
			sumP += math.Pow(10, in[j].LevelDBFS/10)
			sumT += in[j].TimeS
			sumS += in[j].Sample
			clipped += in[j].Clipped
			n++
		}
		if n == 1 {
			out = append(out, in[i]) // exactly as read: re-thinning is a no-op
			i = j
			continue
		}
		out = append(out, LevelReading{
			Sample:    (sumS + n/2) / n,
			TimeS:     sumT / float64(n),
			LevelDBFS: 10 * math.Log10(sumP/float64(n)),
			Clipped:   clipped,
		})
		i = j
	}
	return out, nil
}
