//go:build rtlsdr

package rtlsdr

import "testing"

// Without hardware this checks that the binding links and librtlsdr answers:
// the device count is non-negative, an out-of-range index has no name and
// cannot be opened.
func TestDeviceCount(t *testing.T) {
	n := DeviceCount()
	if n < 0 {
		t.Fatalf("DeviceCount = %d", n)
	}
	t.Logf("%d RTL-SDR device(s)", n)
	if name := DeviceName(n); name != "" {
		t.Errorf("DeviceName(%d) = %q for a missing device, want \"\"", n, name)
	}
	if _, err := Open(n); err == nil {
		t.Errorf("Open(%d) of a missing device succeeded", n)
	}
}
