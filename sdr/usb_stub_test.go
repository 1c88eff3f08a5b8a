//go:build !rtlsdr

package sdr

import (
	"context"
	"strings"
	"testing"
)

func TestUSBStubSaysHowToBuild(t *testing.T) {
	_, err := OpenUSB(0, RTLConfig{SampleRate: 2.4e6})
	if err == nil || !strings.Contains(err.Error(), "-tags rtlsdr") {
		t.Fatalf("OpenUSB without the tag: err = %v, want a message naming -tags rtlsdr", err)
	}
}

func TestResilientUSBStubSaysHowToBuild(t *testing.T) {
	_, err := OpenResilientUSB(context.Background(), 0, RTLConfig{SampleRate: 2.4e6}, ResilientOptions{})
	if err == nil || !strings.Contains(err.Error(), "-tags rtlsdr") {
		t.Fatalf("OpenResilientUSB without the tag: err = %v, want a message naming -tags rtlsdr", err)
	}
}
