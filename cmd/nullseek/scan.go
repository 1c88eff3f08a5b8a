package main

import (
	"fmt"
	"time"

	"github.com/spf13/cobra"

	"nullseek/logbook"
	"nullseek/receiver"
	"nullseek/sdr"
)

type scanOptions struct {
	in           inputFlags
	idf          identFlags
	sf           logbook.Flags
	asJSON, list bool
}

func newScanCmd() *cobra.Command {
	var o scanOptions
	cmd := &cobra.Command{
		Use:   "scan RECORDING",
		Short: "Find every burst on a channel of an IQ recording, measure it and read its identifier",
		Long: `scan reads an IQ recording (SigMF .sigmf-meta/.sigmf-data or .sigmf archive,
2-channel WAV, or raw IQ with --rate and --format), tunes to one channel and
reports each transmission burst: start and end, carrier offset, level, noise
floor, SNR, clipping, the decoded Morse text, the identifier and the
transmitter it belongs to. Without --freq or --offset it lists the carriers
it sees and scans the strongest.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error { return runScan(cmd, args[0], &o) },
	}
	o.in.add(cmd)
	o.idf.add(cmd)
	cmd.Flags().BoolVar(&o.asJSON, "json", false, "one JSON object per line instead of a table")
	cmd.Flags().BoolVar(&o.list, "list", false, "only list the carriers seen in the recording")
	stationFile(cmd, &o.sf)
	return cmd
}

func runScan(cmd *cobra.Command, path string, o *scanOptions) error {
	if o.list {
		return listCarriers(cmd, path, o)
	}
	t0 := time.Now()
	in, err := o.in.input(cmd, path, &o.idf)
	if err != nil {
		return err
	}
	res, err := in.Run(cmd.Context(), nil)
	if err != nil {
		return err
	}
	if err := o.sf.Save(cmd.ErrOrStderr(), logbook.Recording{Path: path, Result: res}); err != nil {
		return err
	}
	out := cmd.OutOrStdout()
	if !o.asJSON {
		if err := res.WriteTable(out); err != nil {
			return err
		}
		_, err := fmt.Fprintln(out, res.SummaryLine(time.Since(t0)))
		return err
	}
	return res.WriteJSON(out)
}

// listCarriers prints the carriers seen in a recording.
func listCarriers(cmd *cobra.Command, path string, o *scanOptions) error {
	raw, err := o.in.Raw()
	if err != nil {
		return err
	}
	src, err := sdr.Open(path, raw)
	if err != nil {
		return err
	}
	defer src.Close()
	cs, err := receiver.FindCarriers(src, receiver.CarrierSearch{})
	if err != nil {
		return err
	}
	if o.asJSON {
		return receiver.WriteCarriersJSON(cmd.OutOrStdout(), cs, src.Info())
	}
	return receiver.WriteCarriers(cmd.OutOrStdout(), cs, src.Info())
}
