package survey

import (
	"fmt"
	"path/filepath"
	"strings"

	"nullseek/bearing"
	"nullseek/heading"
	"nullseek/internal/atomicfile"
	"nullseek/polarplot"
)

// ReferenceNote says which north the bearings are from and which direction
// of the antenna the heading named (the pattern's convention), with the
// mount offset used: the line printed with every bearing result.
func ReferenceNote(p bearing.Pattern, ref heading.Ref, mountOffsetDeg float64) string {
	north := "true north"
	if ref == heading.Magnetic {
		north = "magnetic north"
	}
	s := fmt.Sprintf("bearings from %s; the heading is %s", north, p.HeadingRef)
	if mountOffsetDeg != 0 {
		s += fmt.Sprintf(", the heading source's reading %+.2f° (mount offset)", mountOffsetDeg)
	}
	return s
}

// CheckPlotPath checks a --plot prefix before the work starts.
func CheckPlotPath(prefix string) error {
	ext := strings.ToLower(filepath.Ext(prefix))
	if ext != ".png" && ext != ".svg" {
		return fmt.Errorf("--plot %q: end it in .png or .svg", prefix)
	}
	return nil
}

// fileSafe makes an identifier usable in a file name.
func fileSafe(s string) string {
	return strings.Map(func(r rune) rune {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '-', r == '.':
			return r
		}
		return '_'
	}, s)
}

// PolarPlotPath is the file StagePolarPlots draws transmitter ident's plot
// to, for the plot name prefix (PREFIX.png → PREFIX-IDENT.png).
func PolarPlotPath(prefix, ident string) string {
	ext := filepath.Ext(prefix)
	return strings.TrimSuffix(prefix, ext) + "-" + fileSafe(ident) + ext
}

// StagePolarPlots draws one polar plot per transmitter with a bearing,
// PREFIX-IDENT.EXT, from its combined result (TxBearing.PlotData: every
// used burst's readings, the combined bearing and sigma, the table's choice
// of null), with note under the title; with perBurst also one per fitted
// burst, PREFIX-IDENT-burst-N.EXT. The plots are staged in set and appear
// when the caller commits it with the run's other outputs.
func StagePolarPlots(set *atomicfile.Set, prefix string, bbs []BurstBearing, txs []TxBearing, p bearing.Pattern, note string, perBurst bool) error {
	if err := CheckPlotPath(prefix); err != nil {
		return err
	}
	ext := filepath.Ext(prefix)
	base := strings.TrimSuffix(prefix, ext)
	for _, t := range txs {
		if t.Err != nil || len(t.Bursts) == 0 {
			continue
		}
		pts, est, err := t.PlotData(bbs)
		if err != nil {
			return err
		}
		label := fmt.Sprintf("%s, %d burst(s)", t.Ident, t.Combined.BurstsUsed)
		if err := polarplot.Stage(set, PolarPlotPath(prefix, t.Ident), pts, est, p, label, polarplot.Options{Note: note}); err != nil {
			return err
		}
		if !perBurst {
			continue
		}
		for _, i := range t.Bursts {
			b := bbs[i]
			label := fmt.Sprintf("%s burst %d", t.Ident, b.Index)
			if err := polarplot.Stage(set, fmt.Sprintf("%s-%s-burst-%d%s", base, fileSafe(t.Ident), b.Index, ext), b.Points, b.Est, p, label, polarplot.Options{Note: note}); err != nil {
				return err
			}
		}
	}
	return nil
}
