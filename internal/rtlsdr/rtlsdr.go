//go:build rtlsdr

package rtlsdr

/*
#cgo pkg-config: librtlsdr
#include <stdlib.h>
#include <rtl-sdr.h>
*/
import "C"

import (
	"fmt"
	"unsafe"
)

// DeviceCount returns the number of RTL-SDR devices on USB.
func DeviceCount() int { return int(C.rtlsdr_get_device_count()) }

// DeviceName returns the product name librtlsdr knows for device index, or
// "" for an invalid index.
func DeviceName(index int) string {
	if index < 0 {
		return ""
	}
	return C.GoString(C.rtlsdr_get_device_name(C.uint32_t(index)))
}

// Device is an open RTL-SDR. Its methods are not safe for concurrent use.
type Device struct {
	dev *C.rtlsdr_dev_t
	idx int
}

func check(what string, idx int, r C.int) error {
	if r < 0 {
		return fmt.Errorf("rtlsdr device %d: %s failed (librtlsdr error %d)", idx, what, int(r))
	}
	return nil
}

// Open opens device index (0-based).
func Open(index int) (*Device, error) {
	if n := DeviceCount(); index < 0 || index >= n {
		return nil, fmt.Errorf("rtlsdr: no device %d (%d found)", index, n)
	}
	var dev *C.rtlsdr_dev_t
	if err := check("open", index, C.rtlsdr_open(&dev, C.uint32_t(index))); err != nil {
		return nil, err
	}
	return &Device{dev: dev, idx: index}, nil
}

// Close releases the device.
func (d *Device) Close() error {
	if d.dev == nil {
		return nil
	}
	r := C.rtlsdr_close(d.dev)
	d.dev = nil
	return check("close", d.idx, r)
}

// SetCenterFreq tunes to hz.
func (d *Device) SetCenterFreq(hz uint32) error {
	return check("set_center_freq", d.idx, C.rtlsdr_set_center_freq(d.dev, C.uint32_t(hz)))
}

// SetSampleRate sets the sample rate in Hz.
func (d *Device) SetSampleRate(hz uint32) error {
	return check("set_sample_rate", d.idx, C.rtlsdr_set_sample_rate(d.dev, C.uint32_t(hz)))
}

// SampleRate returns the actual sample rate in Hz.
func (d *Device) SampleRate() uint32 { return uint32(C.rtlsdr_get_sample_rate(d.dev)) }

// SetGainMode selects manual (true) or automatic (false) tuner gain.
func (d *Device) SetGainMode(manual bool) error {
	m := C.int(0)
	if manual {
		m = 1
	}
	return check("set_tuner_gain_mode", d.idx, C.rtlsdr_set_tuner_gain_mode(d.dev, m))
}

// SetGain sets the manual tuner gain in tenths of a dB.
func (d *Device) SetGain(tenthsDB int) error {
	return check("set_tuner_gain", d.idx, C.rtlsdr_set_tuner_gain(d.dev, C.int(tenthsDB)))
}

// Gains returns the tuner's gain table in tenths of a dB.
func (d *Device) Gains() []int {
	n := C.rtlsdr_get_tuner_gains(d.dev, nil)
	if n <= 0 {
		return nil
	}
	buf := make([]C.int, int(n))
	C.rtlsdr_get_tuner_gains(d.dev, &buf[0])
	out := make([]int, len(buf))
	for i, g := range buf {
		out[i] = int(g)
	}
	return out
}

// SetPPM sets the frequency correction in parts per million.
func (d *Device) SetPPM(ppm int) error {
	return check("set_freq_correction", d.idx, C.rtlsdr_set_freq_correction(d.dev, C.int(ppm)))
}

// SetAGC turns the RTL2832 digital AGC on or off.
func (d *Device) SetAGC(on bool) error {
	return check("set_agc_mode", d.idx, C.rtlsdr_set_agc_mode(d.dev, cbool(on)))
}

// SetBiasTee turns antenna power on or off.
func (d *Device) SetBiasTee(on bool) error {
	return check("set_bias_tee", d.idx, C.rtlsdr_set_bias_tee(d.dev, cbool(on)))
}

// SetDirectSampling selects 0 off, 1 I branch, 2 Q branch.
func (d *Device) SetDirectSampling(mode int) error {
	return check("set_direct_sampling", d.idx, C.rtlsdr_set_direct_sampling(d.dev, C.int(mode)))
}

// SetOffsetTuning turns offset tuning on or off.
func (d *Device) SetOffsetTuning(on bool) error {
	return check("set_offset_tuning", d.idx, C.rtlsdr_set_offset_tuning(d.dev, cbool(on)))
}

// ResetBuffer flushes the device's buffer; required before reading.
func (d *Device) ResetBuffer() error {
	return check("reset_buffer", d.idx, C.rtlsdr_reset_buffer(d.dev))
}

// ReadSync reads up to len(buf) cu8 bytes (len(buf) should be a multiple of
// 512) and returns how many arrived.
func (d *Device) ReadSync(buf []byte) (int, error) {
	if len(buf) == 0 {
		return 0, nil
	}
	var n C.int
	r := C.rtlsdr_read_sync(d.dev, unsafe.Pointer(&buf[0]), C.int(len(buf)), &n)
	if err := check("read_sync", d.idx, r); err != nil {
		return int(n), err
	}
	return int(n), nil
}

func cbool(b bool) C.int {
	if b {
		return 1
	}
	return 0
}
