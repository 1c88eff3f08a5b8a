//go:build linux

package main

import (
	"nullseek/internal/testtool"
	"os"
	"strconv"
	"syscall"
	"testing"
	"time"
)

// startPTYCompass is a compass on a serial line: a pseudo-terminal pair
// (Linux devpts(4), opened through /dev/ptmx) whose master end gets
// line(now) every period until the test ends. It returns the slave's
// --nmea-feed address at baud (a pty ignores the rate).
func startPTYCompass(t *testing.T, period time.Duration, baud int, line func(now time.Time) string) (string, error) {
	t.Helper()
	m, slave, err := testtool.OpenPTY()
	if err != nil {
		return "", err
	}
	done := make(chan struct{})
	stopped := make(chan struct{})
	go func() {
		defer close(stopped)
		tick := time.NewTicker(period)
		defer tick.Stop()
		for {
			select {
			case <-done:
				return
			case <-tick.C:
				if _, err := m.WriteString(line(time.Now())); err != nil {
					return
				}
			}
		}
	}()
	t.Cleanup(func() { close(done); <-stopped; m.Close() })
	return "serial:" + slave + "@" + strconv.Itoa(baud), nil
}

// openPTY opens a pseudo-terminal pair (testtool.OpenPTY): the master end
// and the slave end as a file a child process can write to.
func openPTY() (master, slave *os.File, err error) {
	m, p, err := testtool.OpenPTY()
	if err != nil {
		return nil, nil, err
	}
	s, err := os.OpenFile(p, os.O_RDWR|syscall.O_NOCTTY, 0)
	if err != nil {
		m.Close()
		return nil, nil, err
	}
	return m, s, nil
}
