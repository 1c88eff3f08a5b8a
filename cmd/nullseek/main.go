// Command nullseek finds, identifies and locates narrowband transmitters
// from IQ recordings or a live RTL-SDR-class receiver.
package main

import (
	"fmt"
	"log/slog"
	"os"

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

func main() {
	slog.SetDefault(slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelWarn})))
	if err := rootCmd.Execute(); err != nil {
		fmt.Fprintf(os.Stderr, "nullseek: %v\n", err)
		os.Exit(1)
	}
}
