package main

import (
	"encoding/json"
	"fmt"
	"os"

	"nullseek/receiver"
)

// strongestCarrier finds the carriers of a recording and picks the
// strongest, saying so in the returned note.
func strongestCarrier(path string, in *inputFlags) (float64, string, error) {
	src, err := in.open(path)
	if err != nil {
		return 0, "", err
	}
	defer src.Close()
	cs, err := receiver.FindCarriers(src, receiver.CarrierSearch{})
	if err != nil {
		return 0, "", err
	}
	if len(cs) == 0 {
		return 0, "", fmt.Errorf("%s: no carrier stands 10 dB above the noise; give the channel with --freq or --offset", path)
	}
	info := src.Info()
	c := cs[0]
	where := fmt.Sprintf("offset %+.0f Hz", c.OffsetHz)
	if info.CenterHz != 0 {
		where += fmt.Sprintf(" (%.4f MHz)", (info.CenterHz+c.OffsetHz)/1e6)
	}
	return c.OffsetHz, fmt.Sprintf("no --freq or --offset: %d carrier(s) seen; scanning the strongest at %s, %.0f dB over the floor", len(cs), where, c.SNRDB), nil
}

// listCarriers prints the carriers seen in a recording.
func listCarriers(path string, in *inputFlags, asJSON bool) error {
	src, err := in.open(path)
	if err != nil {
		return err
	}
	defer src.Close()
	cs, err := receiver.FindCarriers(src, receiver.CarrierSearch{})
	if err != nil {
		return err
	}
	info := src.Info()
	if asJSON {
		enc := json.NewEncoder(os.Stdout)
		for _, c := range cs {
			m := map[string]any{"type": "carrier", "offset_hz": c.OffsetHz, "level_dbfs": c.LevelDB, "snr_db": c.SNRDB}
			if info.CenterHz != 0 {
				m["freq_hz"] = info.CenterHz + c.OffsetHz
			}
			if err := enc.Encode(m); err != nil {
				return err
			}
		}
		return nil
	}
	fmt.Printf("%-4s %12s %14s %10s %8s\n", "#", "offset Hz", "freq MHz", "dBFS/bin", "SNR dB")
	for i, c := range cs {
		f := "-"
		if info.CenterHz != 0 {
			f = fmt.Sprintf("%.6f", (info.CenterHz+c.OffsetHz)/1e6)
		}
		fmt.Printf("%-4d %12.0f %14s %10.1f %8.1f\n", i+1, c.OffsetHz, f, c.LevelDB, c.SNRDB)
	}
	fmt.Printf("%d carriers in %s (averaged spectrum)\n", len(cs), info.Name)
	return nil
}
