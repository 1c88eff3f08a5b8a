package main

import (
	"bytes"
	"fmt"

	"github.com/spf13/cobra"

	"nullseek/internal/atomicfile"
	"nullseek/logbook"
	"nullseek/survey"
)

type bearingOptions struct {
	in           inputFlags
	idf          identFlags
	hf           headingFlags
	sf           logbook.Flags
	lf           liveFlags
	asJSON       bool
	plot, lopCSV string
	plotBursts   bool
}

func newBearingCmd() *cobra.Command {
	var o bearingOptions
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
		RunE: o.lf.run(func(cmd *cobra.Command, rec recording) error { return runBearing(cmd, rec, &o) }),
	}
	o.in.add(cmd)
	o.idf.add(cmd)
	o.hf.add(cmd)
	o.in.turning()
	cmd.Flags().BoolVar(&o.asJSON, "json", false, "one JSON object per burst and per transmitter")
	cmd.Flags().StringVar(&o.plot, "plot", "", "write a polar plot per transmitter, from its combined bearing: PREFIX.png or PREFIX.svg becomes PREFIX-IDENT.png")
	cmd.Flags().BoolVar(&o.plotBursts, "plot-bursts", false, "with --plot, also one polar plot per burst (PREFIX-IDENT-burst-N.png)")
	cmd.Flags().StringVar(&o.lopCSV, "bearings-csv", "", "write the transmitters' bearings as a CSV FILE that nullseek fix reads (needs --station)")
	o.lf.add(cmd, &o.in, &o.idf, &o.hf) // live receiver, rotator or compass: live.go
	stationFile(cmd, &o.sf)
	return cmd
}

func runBearing(cmd *cobra.Command, rec recording, o *bearingOptions) error {
	hs, err := o.hf.source(rec.track)
	if err != nil {
		return err
	}
	pat, err := hs.Pattern()
	if err != nil {
		return err
	}
	// Every output is checked before the recording is read, and all are
	// staged and committed together once the results are in: a failure
	// leaves no plot without its CSV, nor half a table.
	if o.plot != "" {
		if err := survey.CheckPlotPath(o.plot); err != nil {
			return err
		}
	}
	if o.lopCSV != "" {
		if !hs.HasStation {
			return fmt.Errorf("--bearings-csv needs the station's position: --station LAT,LON")
		}
		if err := atomicfile.Check(o.lopCSV); err != nil {
			return fmt.Errorf("--bearings-csv: %w", err)
		}
	}
	in, err := o.in.input(cmd, rec.path, &o.idf)
	if err != nil {
		return err
	}
	res, tr, pat, err := hs.Survey(cmd.Context(), in, true)
	if err != nil {
		return err
	}
	if len(res.Records) == 0 {
		return fmt.Errorf("%s: no bursts found, so no bearing", rec.path)
	}
	bbs, txs := survey.Bearings(res, tr, pat, hs.Bearing.Fit, hs.Bearing.SiteSigmaDeg)
	if err := survey.NoBearing(rec.path, bbs, txs); err != nil {
		return err
	}
	mount, _ := hs.Bearing.MountOffset(pat) // checked by hs.Pattern
	ref := survey.ReferenceNote(pat, tr.Ref, mount)
	if f := o.sf.File; f != nil {
		hs.StationName, hs.StationAltM = f.Name, f.Position.AltM
	}
	var outs atomicfile.Set
	defer outs.Abort()
	if o.plot != "" {
		if err := survey.StagePolarPlots(&outs, o.plot, bbs, txs, pat, ref, o.plotBursts); err != nil {
			return err
		}
	}
	if o.lopCSV != "" {
		if err := survey.StageLOPs(&outs, o.lopCSV, hs.Site(), txs); err != nil {
			return err
		}
	}
	var text bytes.Buffer
	if o.asJSON {
		err = survey.WriteBearingsJSON(&text, bbs, txs, hs.Site())
	} else {
		err = survey.WriteBearingTable(&text, bbs, txs, ref)
	}
	if err != nil {
		return err
	}
	if err := o.sf.Save(cmd.ErrOrStderr(), logbook.Recording{Path: rec.path, Result: res, Bearings: bbs, Track: tr,
		Station: o.sf.Station(hs.HasStation, hs.StationLat, hs.StationLon, hs.Bearing.Antenna.Kind, mount)}); err != nil {
		return err
	}
	if err := outs.Commit(); err != nil {
		return err
	}
	_, err = text.WriteTo(cmd.OutOrStdout())
	return err
}
