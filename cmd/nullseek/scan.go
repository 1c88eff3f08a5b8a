package main

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"time"

	"github.com/spf13/cobra"

	"nullseek/ident"
	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
	"nullseek/ident/morse"
	"nullseek/survey"
)

// identFlags select how identifiers are read.
type identFlags struct {
	mode    string
	ids     string
	noIdent bool
	minConf float64
}

func (f *identFlags) add(cmd *cobra.Command) {
	cmd.Flags().StringVar(&f.mode, "mode", "auto", "how the identifier is keyed: auto, fm (tone on FM), am (tone on AM, A2A) or cw (keyed carrier)")
	cmd.Flags().StringVar(&f.ids, "ids", "", "expected identifiers, comma-separated, or @FILE with one per line")
	cmd.Flags().BoolVar(&f.noIdent, "no-ident", false, "skip Morse decoding; report levels and timing only")
	cmd.Flags().Float64Var(&f.minConf, "min-confidence", idmatch.DefaultMinConfidence, "least confidence (0–1) at which a burst is given a listed identifier; below it: unknown")
}

func (f *identFlags) options() (morse.Mode, []string, error) {
	mode, err := morse.ParseMode(f.mode)
	if err != nil {
		return mode, nil, err
	}
	if f.ids == "" {
		return mode, nil, nil
	}
	var ids []string
	if f.ids[0] == '@' {
		fh, err := os.Open(f.ids[1:])
		if err != nil {
			return mode, nil, fmt.Errorf("--ids: %w", err)
		}
		defer fh.Close()
		ids, err = idmatch.ReadList(fh)
		if err != nil {
			return mode, nil, fmt.Errorf("--ids %s: %w", f.ids[1:], err)
		}
	} else if ids, err = idmatch.ParseList(f.ids); err != nil {
		return mode, nil, fmt.Errorf("--ids: %w", err)
	}
	return mode, ids, nil
}

// surveyRecording opens path, finds the channel when none was given, and
// runs the survey, with a progress bar on a terminal.
func surveyRecording(ctx context.Context, path string, in *inputFlags, idf *identFlags, note func(string)) (*survey.Result, error) {
	return surveyRecordingPlan(ctx, path, in, idf, nil, note)
}

// surveyRecordingPlan is surveyRecording that also fits bearings during the
// scan when plan is not nil (survey.Options.Bearing).
func surveyRecordingPlan(ctx context.Context, path string, in *inputFlags, idf *identFlags, plan *survey.BearingPlan, note func(string)) (*survey.Result, error) {
	cfg, haveChannel, err := in.config()
	if err != nil {
		return nil, err
	}
	mode, ids, err := idf.options()
	if err != nil {
		return nil, err
	}
	if !haveChannel {
		off, msg, err := strongestCarrier(path, in)
		if err != nil {
			return nil, err
		}
		note(msg)
		cfg.OffsetHz = off
	}
	src, err := in.open(path)
	if err != nil {
		return nil, err
	}
	defer src.Close()
	prog, done := progress(src.Info(), "scanning")
	res, err := survey.Run(ctx, src, survey.Options{Receiver: cfg, Ident: ident.Options{Mode: mode, IDs: ids, MinConfidence: idf.minConf}, NoIdent: idf.noIdent, Bearing: plan}, prog)
	done()
	return res, err
}

func init() {
	var in inputFlags
	var idf identFlags
	var asJSON, list bool
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
		RunE: func(cmd *cobra.Command, args []string) error {
			if list {
				return listCarriers(args[0], &in, asJSON)
			}
			t0 := time.Now()
			res, err := surveyRecording(cmd.Context(), args[0], &in, &idf, func(s string) {
				fmt.Fprintln(os.Stderr, s)
			})
			if err != nil {
				return err
			}
			if asJSON {
				enc := json.NewEncoder(os.Stdout)
				for _, r := range res.Records {
					if err := enc.Encode(r); err != nil {
						return err
					}
				}
				txs, flags := res.Clusters.Clusters, res.Clusters.Flags
				if txs == nil {
					txs = []fingerprint.Transmitter{}
				}
				if flags == nil {
					flags = []fingerprint.Flag{}
				}
				heard, notHeard := res.Heard, res.NotHeard
				if heard == nil {
					heard = []string{}
				}
				if notHeard == nil {
					notHeard = []string{}
				}
				return enc.Encode(map[string]any{"type": "summary", "summary": res.Summary, "transmitters": txs, "flags": flags,
					"heard": heard, "not_heard": notHeard})
			}
			if err := res.WriteTable(os.Stdout); err != nil {
				return err
			}
			fmt.Println(res.SummaryLine(time.Since(t0)))
			return nil
		},
	}
	in.add(cmd)
	idf.add(cmd)
	cmd.Flags().BoolVar(&asJSON, "json", false, "one JSON object per line instead of a table")
	cmd.Flags().BoolVar(&list, "list", false, "only list the carriers seen in the recording")
	rootCmd.AddCommand(cmd)
}
