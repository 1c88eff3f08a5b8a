// Package cpuprofile runs a piece of work under a CPU profile
// (runtime/pprof) whose file appears only when the work succeeds, staged
// like every other output of the command line (atomicfile.Set): a failed
// run leaves no profile behind.
package cpuprofile

import (
	"fmt"
	"runtime/pprof"

	"nullseek/internal/atomicfile"
)

// Around runs work, profiled into the file at path when path is not "".
// Errors of the profile name the flag --cpuprofile.
func Around(path string, work func() error) error {
	if path == "" {
		return work()
	}
	var set atomicfile.Set
	f, err := set.Create(path)
	if err != nil {
		return fmt.Errorf("--cpuprofile: %w", err)
	}
	if err := pprof.StartCPUProfile(f); err != nil {
		set.Abort()
		return fmt.Errorf("--cpuprofile: %w", err)
	}
	err = work()
	pprof.StopCPUProfile()
	if err != nil {
		set.Abort()
		return err
	}
	return set.Commit()
}
