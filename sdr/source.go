// Package sdr is where IQ comes from and goes to: SigMF and raw file readers
// and writers, WAV IQ, the rtl_tcp client, and USB receivers behind a build
// tag. It never decodes or interprets signals.
package sdr

import (
	"math"
	"time"
)

// Info describes an IQ stream.
type Info struct {
	// SampleRate is the complex sample rate in Hz (> 0).
	SampleRate float64
	// CenterHz is the RF frequency of the stream's DC bin in Hz; 0 when unknown.
	CenterHz float64
	// Start is the UTC time of sample 0; the zero Time when unknown.
	Start time.Time
	// Format is the sample format of the underlying data as a SigMF datatype
	// string ("cu8", "ci8", "ci16_le", "cf32_le", ...).
	Format string
	// Name names the source for messages (a path, an address).
	Name string
	// Samples is the number of complex samples when known, -1 for live or
	// unknown-length streams.
	Samples int64
	// ClipLevel is the magnitude of an I or Q component, after conversion to
	// complex64, at or above which the converter was at the rail of its
	// integer format (cu8: 1.0, ci8: 127/128, ci16: 32767/32768). For float
	// formats it is 1.0 (full scale by convention).
	ClipLevel float32
}

// End is the UTC time just after the last sample (Start plus
// Samples/SampleRate); the zero Time when the start or the length is
// unknown.
func (i Info) End() time.Time {
	if i.Start.IsZero() || i.Samples < 0 || !(i.SampleRate > 0) {
		return time.Time{}
	}
	return i.Start.Add(time.Duration(math.Round(float64(i.Samples) / i.SampleRate * float64(time.Second))))
}

// Source delivers complex baseband samples normalised so that integer full
// scale maps to about ±1. Read fills dst from the start and returns the
// number of samples written; at the end of the stream it returns 0, io.EOF
// (it may return n > 0 with a nil error first). Sample indices count from 0
// at the first sample ever read: the sample count is the clock.
type Source interface {
	Info() Info
	Read(dst []complex64) (int, error)
	Close() error
}
