// Command nullseek finds, identifies and locates narrowband transmitters
// from IQ recordings or a live RTL-SDR-class receiver.
//
// The command tree is built afresh by newRootCmd for every run, and every
// command writes through its cobra streams, so tests run the command
// line in-process (runCLI); main only binds it to the process.
package main

import (
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"runtime"
	"runtime/debug"

	"github.com/spf13/cobra"

	"nullseek/internal/cpuprofile"
	"nullseek/internal/warnlog"
)

func main() { os.Exit(mainStatus(os.Args[1:])) }

// mainStatus runs the command line on the process's streams, with
// library warnings (log/slog) in the command's style, and returns the
// exit status.
func mainStatus(args []string) int {
	slog.SetDefault(warnlog.New(os.Stderr, "nullseek"))
	if err := execute(args, os.Stdin, os.Stdout, os.Stderr); err != nil {
		return exitCode(err)
	}
	return 0
}

// execute runs the command line args with the given streams; a failure
// ends as one "nullseek: ..." line on stderr.
func execute(args []string, stdin io.Reader, stdout, stderr io.Writer) error {
	root := newRootCmd()
	root.SetArgs(args)
	root.SetIn(stdin)
	root.SetOut(stdout)
	root.SetErr(stderr)
	err := root.Execute()
	if err != nil {
		fmt.Fprintf(stderr, "nullseek: %v\n", err)
	}
	return err
}

// newRootCmd builds the command tree.
func newRootCmd() *cobra.Command {
	var profile string
	root := &cobra.Command{
		Use:           "nullseek",
		Short:         "Find, identify and locate narrowband transmitters with a low-cost SDR",
		Version:       version(),
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.SetVersionTemplate("{{.Version}}\n")
	root.PersistentFlags().StringVar(&profile, "cpuprofile", "", "write a CPU profile to this file (for developers)")
	_ = root.PersistentFlags().MarkHidden("cpuprofile")
	root.AddCommand(newScanCmd(), newSlotsCmd(), newBearingCmd(), newCalibrateCmd(), newFixCmd(), newDemoCmd(), newReplayCmd(), newWatchCmd(), newReportCmd(), newQueryCmd())
	for _, c := range root.Commands() {
		body := c.RunE
		c.RunE = func(c *cobra.Command, args []string) error {
			return cpuprofile.Around(profile, func() error { return body(c, args) })
		}
	}
	return root
}

// version is the module's version from the build information (a
// release's tag, or the VCS pseudo-version of a build in a checkout;
// "devel" when there is none) and the Go version it was built with.
func version() string {
	v := "devel"
	if bi, ok := debug.ReadBuildInfo(); ok && bi.Main.Version != "" && bi.Main.Version != "(devel)" {
		v = bi.Main.Version
	}
	return fmt.Sprintf("nullseek %s (%s)", v, runtime.Version())
}

// exitCode is the process's exit status for err: the error's own
// (capture.Interrupted: 128 + the signal) or 1.
func exitCode(err error) int {
	var ec interface{ ExitCode() int }
	if errors.As(err, &ec) {
		return ec.ExitCode()
	}
	return 1
}
