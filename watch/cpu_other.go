//go:build !unix

package watch

import "time"

// processCPU is unknown off Unix; the status line leaves CPU out.
func processCPU() (time.Duration, bool) { return 0, false }
