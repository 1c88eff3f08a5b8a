package capture

import (
	"fmt"
	"strings"

	"github.com/spf13/pflag"
)

// NewFlagSet is the live capture's flag group, shared by every command
// that takes a receiver in place of a recording (bearing, calibrate): the
// numbers go into o (give it Defaults(), whose values are the flags'
// defaults), the grammars into f for Options.Parse. Add it to the
// command's flags.
func NewFlagSet(o *Options, f *Flags) *pflag.FlagSet {
	fl := pflag.NewFlagSet("live", pflag.ContinueOnError)
	fl.StringVar(&o.Rotator, "rotator", "", "live: rotctld HOST:PORT that turns the antenna during the capture (needs --sweep or --step)")
	fl.StringVar(&f.Sweep, "sweep", "", "live: continuous rotator sweep FROM:TO, rotator azimuths in degrees")
	fl.StringVar(&f.Step, "step", "", "live: stepped rotator sweep FROM:STEP:TO:DWELL (degrees, dwell in seconds)")
	fl.Float64Var(&o.DurationS, "duration", o.DurationS, "live: stop the capture after this many seconds (required without --rotator)")
	fl.Float64Var(&o.MarginS, "margin", o.MarginS, "live: keep recording this many seconds after the sweep ends")
	fl.StringVar(&o.Record, "record", "", "live: keep the capture as FILE.sigmf-meta/.sigmf-data and its heading log FILE.csv, to re-run offline; an existing directory keeps it there as SigMF pairs, a new one every 10 minutes, with core:geolocation from --station")
	fl.StringVar(&f.Gain, "gain", o.Gain.String(), "live: tuner gain in dB, or auto")
	fl.IntVar(&o.PPM, "ppm", o.PPM, "live: receiver frequency correction, parts per million")
	fl.StringVar(&f.Latency, "iq-latency", "", "live: `seconds` the samples take to arrive, taken off the capture start so headings and levels line up (default: measured from the stream, from the earliest arrival less the samples received)")
	fl.Float64Var(&o.PollHz, "poll-hz", o.PollHz, "live: rotator position polls per second")
	fl.StringVar(&f.Compass, "nmea-feed", "", "live: NMEA 0183 compass (HDT, HDG, HDM) giving the headings during the capture: tcp://HOST:PORT, udp://[HOST]:PORT or serial:/dev/ttyXXX[@BAUD] (default 4800 baud); needs --duration")
	return fl
}

// OfflineCheck refuses the live flags of fl that were given for a
// recording.
func OfflineCheck(fl *pflag.FlagSet) error {
	var given []string
	fl.VisitAll(func(f *pflag.Flag) {
		if f.Changed {
			given = append(given, "--"+f.Name)
		}
	})
	if len(given) > 0 {
		return fmt.Errorf("%s: only for a live receiver (rtl_tcp://HOST:PORT), not a recording", strings.Join(given, ", "))
	}
	return nil
}
