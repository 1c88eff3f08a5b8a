//go:build rtlsdr

package sdr

import (
	"context"
	"fmt"
	"math"
	"time"

	"nullseek/internal/rtlsdr"
)

// USBDevices lists the names of the RTL-SDR devices on USB, by index.
func USBDevices() ([]string, error) {
	n := rtlsdr.DeviceCount()
	names := make([]string, n)
	for i := range names {
		names[i] = rtlsdr.DeviceName(i)
	}
	return names, nil
}

// usbSource reads cu8 from an RTL-SDR with rtlsdr_read_sync.
type usbSource struct {
	dev     *rtlsdr.Device
	info    Info
	buf     []byte
	lo, hi  int
	err     error
	started bool
	got     int64      // samples received
	watch   *dropWatch // nil unless a ResilientUSB watches for drops
}

// OpenUSB opens RTL-SDR device index (0-based) with cfg (NoDataTimeout and
// EOFOnClose do not apply). The source is cu8 and implements CU8Reader;
// Info().Samples is -1 and Info().Start is the time the first buffer
// arrived, stamped by the first Read (zero before it).
func OpenUSB(index int, cfg RTLConfig) (Source, error) {
	if err := cfg.check(); err != nil {
		return nil, fmt.Errorf("usb rtl-sdr %d: %w", index, err)
	}
	return openUSB(index, cfg, nil)
}

// OpenResilientUSB opens RTL-SDR device index like OpenUSB and returns a
// source that reopens it on a device error (see ResilientUSB). A failure
// of the first opening is returned at once. Cancelling ctx stops it.
func OpenResilientUSB(ctx context.Context, index int, cfg RTLConfig, opts ResilientOptions) (*ResilientUSB, error) {
	if err := cfg.check(); err != nil {
		return nil, fmt.Errorf("usb rtl-sdr %d: %w", index, err)
	}
	rate, _ := rtlRate(cfg.SampleRate)
	r, err := newResilient(ctx, fmt.Sprintf("usb rtl-sdr %d", index), float64(rate), opts, false,
		func(ctx context.Context, w *dropWatch) (leg, error) {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
			return openUSB(index, cfg, w)
		})
	if err != nil {
		return nil, err
	}
	return &ResilientUSB{resilientSource{r}}, nil
}

// openUSB opens and configures the device; cfg has been checked.
func openUSB(index int, cfg RTLConfig, watch *dropWatch) (*usbSource, error) {
	dev, err := rtlsdr.Open(index)
	if err != nil {
		return nil, err
	}
	s := &usbSource{
		dev:   dev,
		watch: watch,
		buf:   make([]byte, 32<<10), // multiple of 512 as read_sync wants
		info: Info{
			SampleRate: cfg.SampleRate,
			CenterHz:   cfg.CenterHz,
			Format:     "cu8",
			Name:       fmt.Sprintf("usb rtl-sdr %d (%s)", index, rtlsdr.DeviceName(index)),
			Samples:    -1,
			ClipLevel:  1,
		},
	}
	steps := []func() error{
		func() error { r, _ := rtlRate(cfg.SampleRate); return dev.SetSampleRate(r) },
		func() error {
			if cfg.CenterHz > 0 {
				return dev.SetCenterFreq(uint32(math.Round(cfg.CenterHz)))
			}
			return nil
		},
		func() error { return dev.SetGainMode(!cfg.AutoGain) },
		func() error {
			if !cfg.AutoGain {
				return dev.SetGain(int(math.Round(cfg.GainDB * 10)))
			}
			return nil
		},
		func() error {
			if cfg.PPM != 0 {
				return dev.SetPPM(cfg.PPM)
			}
			return nil
		},
		func() error { return dev.SetAGC(cfg.AGC) },
		func() error {
			if cfg.BiasTee {
				return dev.SetBiasTee(true)
			}
			return nil
		},
		func() error {
			if cfg.DirectSampling != 0 {
				return dev.SetDirectSampling(cfg.DirectSampling)
			}
			return nil
		},
		func() error {
			if cfg.OffsetTuning {
				return dev.SetOffsetTuning(true)
			}
			return nil
		},
		dev.ResetBuffer,
	}
	for _, step := range steps {
		if err := step(); err != nil {
			dev.Close()
			return nil, err
		}
	}
	if r := dev.SampleRate(); r > 0 {
		s.info.SampleRate = float64(r)
	}
	for drop := 2 * cfg.SettleSamples; drop > 0; {
		n, err := dev.ReadSync(s.buf[:min(len(s.buf), (drop+511)/512*512)])
		if err != nil {
			dev.Close()
			return nil, err
		}
		drop -= n
	}
	return s, nil
}

func (s *usbSource) Info() Info   { return s.info }
func (s *usbSource) Close() error { return s.dev.Close() }

func (s *usbSource) ReadCU8(dst []byte) (int, error) {
	if s.err != nil {
		return 0, s.err
	}
	if len(dst) < 2 {
		return 0, nil
	}
	for s.hi-s.lo < 2 {
		if s.lo > 0 {
			s.hi = copy(s.buf, s.buf[s.lo:s.hi])
			s.lo = 0
		}
		n, err := s.dev.ReadSync(s.buf[s.hi:])
		if !s.started && n > 0 {
			s.started = true
			s.info.Start = time.Now().UTC()
		}
		s.hi += n
		if n > 0 {
			s.got += int64(n / 2)
			s.watch.note(time.Now(), s.got, int64(n/2))
		}
		if err != nil {
			s.err = err
			return 0, err
		}
	}
	n := copy(dst[:len(dst)/2*2], s.buf[s.lo:s.lo+(s.hi-s.lo)/2*2])
	s.lo += n
	return n, nil
}

func (s *usbSource) Read(dst []complex64) (int, error) {
	var tmp [8192]byte
	p := tmp[:min(len(tmp), 2*len(dst))]
	n, err := s.ReadCU8(p)
	for i := 0; i < n/2; i++ {
		dst[i] = complex(cu8Table[p[2*i]], cu8Table[p[2*i+1]])
	}
	return n / 2, err
}
