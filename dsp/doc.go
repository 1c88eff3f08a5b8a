// Package dsp is nullseek's signal-processing toolbox: pure math on slices.
//
// It holds FIR design (Kaiser window, scipy.signal semantics), the front-end
// channelizer (frequency translation plus multi-stage polyphase decimation,
// with an entry for raw RTL-SDR bytes, ProcessCU8), the FM
// discriminator and AM envelope, clip counting and dBFS, the channel noise
// estimator (BandNoise: the density beside the occupied bins), the
// Welch-averaged spectrum (SpectrumAverager) and carrier search, with FFTs
// from gonum.org/v1/gonum/dsp/fourier. Every exported function has a
// caller outside the package's tests.
//
// Conventions used throughout:
//   - Complex baseband samples are complex64 with full scale defined as a
//     complex sinusoid of amplitude 1 (|x| = 1, mean |x|² = 1, 0 dBFS).
//   - Frequencies are in Hz with an explicit sample rate, or in radians per
//     sample where a name says so (w, omega).
//   - Streaming stages are plan objects: built once, they own their scratch
//     buffers and process block after block without allocating. Their
//     Process methods take a dst slice (which may be nil) and return
//     append(dst[:0], results...), so passing a dst with enough capacity makes
//     the call allocation-free.
//
// The package does no I/O and knows nothing about time of day, files or
// transmitters.
package dsp
