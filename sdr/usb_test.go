//go:build rtlsdr

package sdr

import "testing"

// With librtlsdr linked but no hardware: listing works, opening a missing
// device fails with an error rather than a crash.
func TestUSBNoDevice(t *testing.T) {
	names, err := USBDevices()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := OpenUSB(len(names), RTLConfig{SampleRate: 2.4e6}); err == nil {
		t.Fatalf("OpenUSB(%d) with %d devices succeeded", len(names), len(names))
	}
}
