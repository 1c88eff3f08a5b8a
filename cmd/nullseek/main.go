// Command nullseek finds, identifies and locates narrowband transmitters
// from IQ recordings or a live RTL-SDR-class receiver.
package main

import (
	"fmt"
	"log/slog"
	"os"
	"runtime/pprof"

	"github.com/spf13/cobra"
)

// rootCmd is the top of the command tree; each subcommand registers itself
// from its own file with an init function, so commands stay independent.
var rootCmd = &cobra.Command{
	Use:           "nullseek",
	Short:         "Find, identify and locate narrowband transmitters with a low-cost SDR",
	SilenceUsage:  true,
	SilenceErrors: true,
}

var cpuProfile string

func init() {
	rootCmd.PersistentFlags().StringVar(&cpuProfile, "cpuprofile", "", "write a CPU profile to this file (for developers)")
	_ = rootCmd.PersistentFlags().MarkHidden("cpuprofile")
	rootCmd.PersistentPreRunE = func(*cobra.Command, []string) error {
		if cpuProfile == "" {
			return nil
		}
		f, err := os.Create(cpuProfile)
		if err != nil {
			return err
		}
		return pprof.StartCPUProfile(f)
	}
	rootCmd.PersistentPostRun = func(*cobra.Command, []string) {
		if cpuProfile != "" {
			pprof.StopCPUProfile()
		}
	}
}

func main() {
	slog.SetDefault(slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelWarn})))
	if err := rootCmd.Execute(); err != nil {
		fmt.Fprintf(os.Stderr, "nullseek: %v\n", err)
		os.Exit(exitCode(err))
	}
}
