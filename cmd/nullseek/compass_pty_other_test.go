//go:build !linux

package main

import (
	"errors"
	"os"
	"testing"
	"time"
)

// startPTYCompass needs Linux pseudo-terminals.
func startPTYCompass(t *testing.T, period time.Duration, baud int, line func(now time.Time) string) (string, error) {
	return "", errors.New("pseudo-terminal compass is only set up on Linux")
}

// openPTY needs Linux pseudo-terminals.
func openPTY() (master, slave *os.File, err error) {
	return nil, nil, errors.New("pseudo-terminals are only set up on Linux")
}
