//go:build !rtlsdr

package sdr

import (
	"strings"
	"testing"
)

func TestUSBStubSaysHowToBuild(t *testing.T) {
	_, err := OpenUSB(0, RTLConfig{SampleRate: 2.4e6})
	if err == nil || !strings.Contains(err.Error(), "-tags rtlsdr") {
		t.Fatalf("OpenUSB without the tag: err = %v, want a message naming -tags rtlsdr", err)
	}
}
