//go:build unix

package watch

import (
	"syscall"
	"time"
)

// processCPU is the process's user and system CPU time so far
// (getrusage(2), RUSAGE_SELF; POSIX.1-2017).
func processCPU() (time.Duration, bool) {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0, false
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano()), true
}
