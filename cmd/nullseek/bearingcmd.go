package main

import (
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"nullseek/bearing"
	"nullseek/polarplot"
	"nullseek/survey"
)

func init() {
	var in inputFlags
	var idf identFlags
	var hf headingFlags
	var asJSON bool
	var plot, lopCSV string
	cmd := &cobra.Command{
		Use:   "bearing RECORDING",
		Short: "Fit signal level against antenna heading into a bearing per burst and per transmitter",
		Long: `bearing scans a recording like scan does, joins each burst's level track
with the antenna's heading (a log, NMEA sentences or a steady turn) and fits
the antenna pattern to it: the bearing (true), its 1-sigma, the alternate
bearing when the pattern is ambiguous (a loop's two nulls), the null depth
and the sweep coverage, per burst and combined per transmitter. It refuses
rather than invents a bearing when the sweep cannot support one.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			notes := func(s string) { fmt.Fprintln(os.Stderr, s) }
			pat, err := hf.pattern()
			if err != nil {
				return err
			}
			res, err := surveyRecording(cmd.Context(), args[0], &in, &idf, notes)
			if err != nil {
				return err
			}
			tr, err := hf.track(res.Info, notes)
			if err != nil {
				return err
			}
			if len(res.Records) == 0 {
				return fmt.Errorf("%s: no bursts found, so no bearing", args[0])
			}
			fo := bearing.FitOptions{}
			if hf.estimateLag {
				lag, sig, err := survey.EstimateLag(res, tr, pat, fo)
				if err != nil {
					return err
				}
				notes(fmt.Sprintf("level lags heading by %.3f ± %.3f s: removed", lag, sig))
				tr = tr.WithLag(-lag)
			}
			bbs, txs := survey.Bearings(res, tr, pat, fo, hf.siteSigma)
			if plot != "" {
				if err := writeBearingPlots(plot, bbs, txs, pat); err != nil {
					return err
				}
			}
			if lopCSV != "" {
				if err := writeLOPs(lopCSV, &hf, res.Info.Start, txs); err != nil {
					return err
				}
			}
			if asJSON {
				enc := json.NewEncoder(os.Stdout)
				for _, b := range bbs {
					if err := enc.Encode(b); err != nil {
						return err
					}
				}
				for _, t := range txs {
					if err := enc.Encode(t); err != nil {
						return err
					}
				}
				return nil
			}
			return writeBearingTable(os.Stdout, bbs, txs)
		},
	}
	in.add(cmd)
	idf.add(cmd)
	hf.add(cmd)
	_ = cmd.Flags().Set("merge-gap", "1.5") // a turning antenna's nulls must not split a burst
	cmd.Flags().BoolVar(&asJSON, "json", false, "one JSON object per burst and per transmitter")
	cmd.Flags().StringVar(&plot, "plot", "", "write a polar plot per transmitter: PREFIX.png or PREFIX.svg becomes PREFIX-IDENT.png")
	cmd.Flags().StringVar(&lopCSV, "bearings-csv", "", "write the transmitters' bearings as a CSV that `nullseek fix` reads (needs --station)")
	addLive(cmd, &in, &idf, &hf) // live receiver and rotator sweep: live.go
	rootCmd.AddCommand(cmd)
}

func writeBearingTable(w io.Writer, bbs []survey.BurstBearing, txs []survey.TxBearing) error {
	tw := &errW{w: w}
	fmt.Fprintf(tw, "%-5s %-12s %-4s %9s %7s %9s %8s %8s  %s\n", "burst", "ident", "tx", "bearing", "±1σ", "alt", "null dB", "cover", "notes")
	for _, b := range bbs {
		if b.Err != nil {
			fmt.Fprintf(tw, "%-5d %-12s %-4s %9s  %s\n", b.Index, b.Ident, b.Transmitter, "-", b.Err)
			continue
		}
		e := b.Est
		alt := "-"
		if e.AltBearingDeg != nil {
			alt = fmt.Sprintf("%.1f°", *e.AltBearingDeg)
		}
		fmt.Fprintf(tw, "%-5d %-12s %-4s %8.1f° %6.2f° %9s %8.1f %7.0f°  %s\n", b.Index, b.Ident, b.Transmitter,
			e.BearingDeg, e.SigmaDeg, alt, e.NullDepthDB, e.CoverageDeg, strings.Join(e.Warnings, "; "))
	}
	fmt.Fprintln(tw)
	fmt.Fprintf(tw, "%-12s %-4s %9s %7s %9s %7s  %s\n", "ident", "tx", "bearing", "±1σ", "alt", "bursts", "notes")
	for _, t := range txs {
		if t.Err != nil {
			fmt.Fprintf(tw, "%-12s %-4s %9s  %s\n", t.Ident, t.Transmitter, "-", t.Err)
			continue
		}
		c := t.Combined
		alt := "-"
		if c.AltBearingDeg != nil {
			alt = fmt.Sprintf("%.1f°", *c.AltBearingDeg)
		}
		var notes []string
		notes = append(notes, c.Warnings...)
		for _, x := range c.Excluded {
			notes = append(notes, fmt.Sprintf("left out %.1f°: %s", x.BearingDeg, x.Reason))
		}
		fmt.Fprintf(tw, "%-12s %-4s %8.1f° %6.1f° %9s %7d  %s\n", t.Ident, t.Transmitter, c.BearingDeg, t.SigmaDeg, alt, c.BurstsUsed, strings.Join(notes, "; "))
	}
	fmt.Fprintf(tw, "(±1σ of a transmitter includes a %.1f° site error; bearings are from true north)\n", firstSite(txs))
	return tw.err
}

func firstSite(txs []survey.TxBearing) float64 {
	for _, t := range txs {
		if t.Err == nil {
			return t.SiteSigmaDeg
		}
	}
	return 0
}

// writeBearingPlots draws one polar plot per transmitter, from its first
// used burst.
func writeBearingPlots(prefix string, bbs []survey.BurstBearing, txs []survey.TxBearing, pat bearing.Pattern) error {
	ext := strings.ToLower(filepath.Ext(prefix))
	if ext != ".png" && ext != ".svg" {
		return fmt.Errorf("--plot %q: end it in .png or .svg", prefix)
	}
	base := strings.TrimSuffix(prefix, filepath.Ext(prefix))
	for _, t := range txs {
		if t.Err != nil || len(t.Bursts) == 0 {
			continue
		}
		b := bbs[t.Bursts[0]]
		title := fmt.Sprintf("%s burst %d: %.1f° ± %.1f°", t.Ident, b.Index, b.Est.BearingDeg, b.Est.SigmaDeg)
		if err := polarplot.Write(base+"-"+fileSafe(t.Ident)+ext, b.Points, b.Est, pat, title); err != nil {
			return err
		}
	}
	return nil
}

// writeLOPs writes the transmitters' bearings in the CSV form `fix` reads.
func writeLOPs(path string, hf *headingFlags, start time.Time, txs []survey.TxBearing) error {
	lat, lon, ok, err := hf.stationPos()
	if err != nil {
		return err
	}
	if !ok {
		return fmt.Errorf("--bearings-csv needs the station's position: --station LAT,LON")
	}
	var b strings.Builder
	b.WriteString("ident,station,lat,lon,bearing_deg,sigma_deg,reference,time,ambiguous\n")
	st := fmt.Sprintf("%.5f %.5f", lat, lon)
	when := ""
	if !start.IsZero() {
		when = start.UTC().Format(time.RFC3339)
	}
	for _, t := range txs {
		if t.Err != nil {
			continue
		}
		fmt.Fprintf(&b, "%s,%s,%.6f,%.6f,%.2f,%.2f,true,%s,%v\n", t.Ident, st, lat, lon, t.Combined.BearingDeg, t.SigmaDeg, when, t.Combined.AltBearingDeg != nil)
	}
	return writeFileAtomic(path, []byte(b.String()))
}

type errW struct {
	w   io.Writer
	err error
}

func (e *errW) Write(p []byte) (int, error) {
	if e.err != nil {
		return 0, e.err
	}
	n, err := e.w.Write(p)
	e.err = err
	return n, err
}
