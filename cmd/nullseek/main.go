// Command nullseek finds, identifies and locates narrowband transmitters
// from IQ recordings or a live RTL-SDR-class receiver.
package main

import (
	"fmt"
	"log/slog"
	"os"
	"runtime/pprof"

	"github.com/spf13/cobra"

	"nullseek/internal/atomicfile"
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

// profileOut stages the --cpuprofile file: it appears only when the run
// succeeds (atomicfile.Set), like every other output.
var profileOut struct {
	set     atomicfile.Set
	started bool
}

func init() {
	rootCmd.AddCommand(newReplayCmd())
	rootCmd.PersistentFlags().StringVar(&cpuProfile, "cpuprofile", "", "write a CPU profile to this file (for developers)")
	_ = rootCmd.PersistentFlags().MarkHidden("cpuprofile")
	rootCmd.PersistentPreRunE = func(*cobra.Command, []string) error {
		if cpuProfile == "" {
			return nil
		}
		f, err := profileOut.set.Create(cpuProfile)
		if err != nil {
			return fmt.Errorf("--cpuprofile: %w", err)
		}
		if err := pprof.StartCPUProfile(f); err != nil {
			profileOut.set.Abort()
			return fmt.Errorf("--cpuprofile: %w", err)
		}
		profileOut.started = true
		return nil
	}
}

// finishProfile stops the CPU profile and keeps its file when the run
// succeeded, or removes it.
func finishProfile(ok bool) error {
	if !profileOut.started {
		return nil
	}
	pprof.StopCPUProfile()
	if !ok {
		profileOut.set.Abort()
		return nil
	}
	return profileOut.set.Commit()
}

func main() {
	slog.SetDefault(slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelWarn})))
	err := rootCmd.Execute()
	if perr := finishProfile(err == nil); err == nil {
		err = perr
	}
	if err != nil {
		fmt.Fprintf(os.Stderr, "nullseek: %v\n", err)
		os.Exit(exitCode(err))
	}
}
