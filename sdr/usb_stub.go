//go:build !rtlsdr

package sdr

import (
	"context"
	"errors"
)

// errNoUSB is the answer of a build without the rtlsdr tag.
var errNoUSB = errors.New("built without USB support: rebuild with -tags rtlsdr (needs librtlsdr-dev)")

// USBDevices lists the RTL-SDR devices on USB. This build has no USB
// support and always returns an error saying how to get it.
func USBDevices() ([]string, error) { return nil, errNoUSB }

// OpenUSB opens an RTL-SDR on USB. This build has no USB support and always
// returns an error saying how to get it.
func OpenUSB(index int, cfg RTLConfig) (Source, error) { return nil, errNoUSB }

// OpenResilientUSB opens an RTL-SDR on USB that reopens on device errors.
// This build has no USB support and always returns an error saying how to
// get it.
func OpenResilientUSB(ctx context.Context, index int, cfg RTLConfig, opts ResilientOptions) (*ResilientUSB, error) {
	return nil, errNoUSB
}
