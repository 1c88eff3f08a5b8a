package morse

import (
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"sort"

	"nullseek/dsp"
)

// ErrNoTone is wrapped by errors when audio holds no tone between
// MinToneHz and MaxToneHz that stands clearly above the noise.
var ErrNoTone = errors.New("no Morse tone found")

const (
	// MinToneHz and MaxToneHz bound the pitch search of FindTone.
	MinToneHz = 300.0
	MaxToneHz = 2000.0
	// toneMinSNRDB is the least peak-to-local-noise ratio (dB, 3 bins of a
	// long averaged spectrum) that FindTone accepts as a tone.
	toneMinSNRDB = 5.0
)

// toneSpectrum is the one-sided power spectrum of real audio from dsp's
// Welch averager (Hann window, 50 % overlap, linear power averaging; see
// dsp.SpectrumAverager), kept as linear power per bin from 0 Hz to half
// the sample rate.
type toneSpectrum struct {
	n     int
	avg   *dsp.SpectrumAverager
	buf   []complex64
	db    []float64
	psd   []float64
	binHz float64
	nAvgd int
}

// newToneSpectrum sizes the FFT so a bin is at most ~6 Hz wide (but no
// longer than the audio).
func newToneSpectrum(rateHz float64, nAudio int) *toneSpectrum {
	n := 256
	for float64(n) < rateHz/6 && n*2 <= nAudio {
		n *= 2
	}
	avg, err := dsp.NewSpectrumAverager(n)
	if err != nil { // n ≥ 256 by construction
		panic(err)
	}
	return &toneSpectrum{n: n, avg: avg, buf: make([]complex64, n), psd: make([]float64, n/2+1),
		binHz: rateHz / float64(n)}
}

// average computes the averaged spectrum of audio into s.psd (the real
// audio enters the complex averager with zero imaginary part, so bin k and
// −k carry the same power; the positive half is kept).
func (s *toneSpectrum) average(audio []float32) {
	s.avg.Reset()
	for len(audio) > 0 {
		m := min(len(audio), len(s.buf))
		for i, v := range audio[:m] {
			s.buf[i] = complex(v, 0)
		}
		s.avg.Add(s.buf[:m])
		audio = audio[m:]
	}
	s.nAvgd = s.avg.Frames()
	s.db = s.avg.Result(s.db)
	half := s.n / 2
	for k := range s.psd {
		s.psd[k] = 0
		if s.nAvgd > 0 {
			s.psd[k] = math.Pow(10, s.db[(half+k)%s.n]/10)
		}
	}
}

// peak finds the strongest bin in [loHz, hiHz], interpolates its
// frequency (parabola through the log powers of the peak and its
// neighbours; Hann window) and compares the peak with the median of the
// bins within ±250 Hz, leaving out ±4 bins around the peak.
func (s *toneSpectrum) peak(loHz, hiHz float64) (freqHz, snrDB float64) {
	lo := int(math.Ceil(loHz / s.binHz))
	hi := int(math.Floor(hiHz / s.binHz))
	if lo < 1 {
		lo = 1
	}
	if hi > len(s.psd)-2 {
		hi = len(s.psd) - 2
	}
	if hi < lo || s.nAvgd == 0 {
		return 0, math.Inf(-1)
	}
	k := lo
	for i := lo; i <= hi; i++ {
		if s.psd[i] > s.psd[k] {
			k = i
		}
	}
	a, b, c := math.Log(s.psd[k-1]+1e-300), math.Log(s.psd[k]+1e-300), math.Log(s.psd[k+1]+1e-300)
	d := 0.0
	if den := a - 2*b + c; den < 0 {
		d = 0.5 * (a - c) / den
	}
	if d > 0.5 {
		d = 0.5
	} else if d < -0.5 {
		d = -0.5
	}
	freqHz = (float64(k) + d) * s.binHz
	w := int(250 / s.binHz)
	var near []float64
	for i := k - w; i <= k+w; i++ {
		if i < 1 || i >= len(s.psd) || (i >= k-4 && i <= k+4) {
			continue
		}
		near = append(near, s.psd[i])
	}
	if len(near) == 0 {
		return freqHz, math.Inf(-1)
	}
	sort.Float64s(near)
	noise := near[len(near)/2]
	sig := s.psd[k-1] + s.psd[k] + s.psd[k+1]
	return freqHz, 10 * math.Log10(sig/(3*noise+1e-300))
}

// FindTone looks for the strongest pitch between 300 and 2000 Hz in audio
// sampled at rate Hz, using a Welch-averaged spectrum (Hann window, bins of
// ≤ 6 Hz) and parabolic interpolation of the peak (about 1 Hz on a steady
// tone). snrDB compares the peak (3 bins) with the median noise of the
// nearby bins scaled to 3 bins; a keyed tone counts its key-up time as
// absent, so snrDB is lower than the key-down SNR. It returns an error
// wrapping ErrNoTone when the audio is shorter than 0.1 s or no peak
// stands 5 + 10/√(segments averaged) dB above the noise.
func FindTone(audio []float32, rate float64) (toneHz, snrDB float64, err error) {
	if !(rate >= 2*MinToneHz) || math.IsInf(rate, 0) {
		return 0, 0, fmt.Errorf("find tone: sample rate %g Hz too low", rate)
	}
	if float64(len(audio)) < 0.1*rate || len(audio) < 256 {
		return 0, 0, fmt.Errorf("find tone: %d samples (%.3f s) is too short: %w", len(audio), float64(len(audio))/rate, ErrNoTone)
	}
	s := newToneSpectrum(rate, len(audio))
	s.average(audio)
	f, snr := s.peak(MinToneHz, math.Min(MaxToneHz, 0.45*rate))
	// The noise of an averaged spectrum shrinks as 1/√(segments): demand
	// more of a short recording (15 dB for one segment, 6 dB for 100).
	need := toneMinSNRDB + 10/math.Sqrt(float64(s.nAvgd))
	if math.IsNaN(snr) || snr < need {
		return f, snr, fmt.Errorf("find tone: best peak %.0f Hz only %.1f dB above noise (need %.1f): %w", f, snr, need, ErrNoTone)
	}
	return f, snr, nil
}

// toneTrack follows a wandering pitch: it re-estimates the peak in blocks
// of blockS seconds (50 % overlap) within ±searchHz of the overall tone,
// keeps blocks whose peak is clear (else holds the last good value),
// median-smooths over 3 blocks and returns the frequency at each block
// centre.
func toneTrack(audio []float32, rate, toneHz, searchHz, blockS float64) (centresS, freqsHz []float64) {
	n := int(blockS * rate)
	if n < 256 || len(audio) < 2*n {
		return []float64{0}, []float64{toneHz}
	}
	s := newToneSpectrum(rate, n/2)
	var fs, pw, snrs []float64
	for off := 0; off+n <= len(audio); off += n / 2 {
		s.average(audio[off : off+n])
		f, snr := s.peak(toneHz-searchHz, toneHz+searchHz)
		k := int(math.Round(f / s.binHz))
		p := 0.0
		if k >= 1 && k+1 < len(s.psd) {
			p = s.psd[k-1] + s.psd[k] + s.psd[k+1]
		}
		fs, pw, snrs = append(fs, f), append(pw, p), append(snrs, snr)
		centresS = append(centresS, (float64(off)+float64(n)/2)/rate)
	}
	// A block counts when its peak is clear and carries a fair share of the
	// tone (key-up blocks only show noise).
	sorted := append([]float64(nil), pw...)
	sort.Float64s(sorted)
	ref := sorted[len(sorted)*4/5]
	last := toneHz
	raw := make([]float64, len(fs))
	for i := range fs {
		if snrs[i] >= 10 && pw[i] >= 0.2*ref {
			last = fs[i]
		}
		raw[i] = last
	}
	freqsHz = make([]float64, len(raw))
	for i := range raw {
		a, b, c := raw[max(i-1, 0)], raw[i], raw[min(i+1, len(raw)-1)]
		freqsHz[i] = a + b + c - math.Max(a, math.Max(b, c)) - math.Min(a, math.Min(b, c))
	}
	return centresS, freqsHz
}

// toneEnvelope mixes audio down with an oscillator that follows the tone
// track (linear interpolation between block centres), integrates over
// boxS seconds (a boxcar, i.e. a sinc filter about 1/boxS wide) and
// returns |.|² at envRate Hz: the key-down power envelope.
func toneEnvelope(audio []float32, rate float64, centresS, freqsHz []float64, boxS, envRate float64) []float32 {
	// Prefix sums of the mixed-down signal.
	ps := make([]complex128, len(audio)+1)
	phase := 0.0
	j := 0
	var acc complex128
	for i, x := range audio {
		t := float64(i) / rate
		for j+1 < len(centresS) && centresS[j+1] <= t {
			j++
		}
		f := freqsHz[j]
		if j+1 < len(centresS) && t > centresS[j] {
			w := (t - centresS[j]) / (centresS[j+1] - centresS[j])
			f = freqsHz[j]*(1-w) + freqsHz[j+1]*w
		}
		phase += 2 * math.Pi * f / rate
		if phase > math.Pi {
			phase -= 2 * math.Pi
		}
		acc += complex(float64(x), 0) * cmplx.Rect(1, -phase)
		ps[i+1] = acc
	}
	L := int(math.Max(2, boxS*rate))
	step := rate / envRate
	nEnv := int(float64(len(audio)) / step)
	env := make([]float32, nEnv)
	for k := range env {
		c := int((float64(k) + 0.5) * step)
		a, b := c-L/2, c-L/2+L
		if a < 0 {
			a = 0
		}
		if b > len(audio) {
			b = len(audio)
		}
		if b <= a {
			continue
		}
		v := (ps[b] - ps[a]) / complex(float64(L), 0)
		env[k] = float32(real(v)*real(v) + imag(v)*imag(v))
	}
	return env
}

const (
	// EnvelopeRateHz is the rate of ToneEnvelope's output (samples a second).
	EnvelopeRateHz = 100.0
	// envelopeBoxS is the boxcar ToneEnvelope integrates the mixed-down
	// tone over (s): a pre-detection bandwidth of ~33 Hz, matched to a dot
	// at 40 WPM and not too wide for slower ones.
	envelopeBoxS = 0.03
)

// ToneEnvelope returns the key-down power envelope of a keyed tone for the
// template matcher (idmatch), whether or not its Morse can be
// read: linear power (arbitrary scale) at EnvelopeRateHz samples a
// second, time 0 at the first audio sample. The pitch is opts.ToneHz when
// set, else the strongest spectral peak between MinToneHz and MaxToneHz
// even when FindTone finds it too weak to trust (the template decides
// whether there is keying); it is tracked as in DecodeTone unless
// opts.FixedTone. The tone is mixed to 0 Hz and integrated over 30 ms.
// Errors: a sample rate below 2·MinToneHz, or audio too short (< 0.1 s)
// to find a pitch in.
func ToneEnvelope(audio []float32, rate float64, opts DecodeOptions) (env []float32, envRateHz, toneHz float64, err error) {
	opts = opts.withDefaults()
	if !(rate >= 2*MinToneHz) || math.IsInf(rate, 0) {
		return nil, 0, 0, fmt.Errorf("tone envelope: sample rate %g Hz too low", rate)
	}
	clean := sanitize(audio)
	toneHz = opts.ToneHz
	if !(toneHz > 0) {
		f, _, ferr := FindTone(clean, rate)
		if ferr != nil && !(errors.Is(ferr, ErrNoTone) && f > 0) {
			return nil, 0, 0, fmt.Errorf("tone envelope: %w", ferr)
		}
		toneHz = f
	}
	centres, freqs := []float64{0}, []float64{toneHz}
	if !opts.FixedTone {
		centres, freqs = toneTrack(clean, rate, toneHz, opts.TrackHz, 0.4)
	}
	return toneEnvelope(clean, rate, centres, freqs, envelopeBoxS, EnvelopeRateHz), EnvelopeRateHz, toneHz, nil
}

// DetectMode decides how a burst's Morse is carried. A power track
// (linear power at powerRate readings a second) keyed with Morse timing
// (see morseKeyed) gives ModeCW, even when the audio also carries a keyed
// tone: a carrier keyed by the marks of an MCW identifier is read best
// from the power track, whose key-up holds only the channel noise, not
// the FM discriminator's. Otherwise a clear tone in the FM discriminator
// audio gives ModeFM and a clear tone in the AM envelope audio ModeAM (the
// clearer wins when both have one). Nil or empty inputs are skipped. When
// nothing fits it returns ModeAuto, meaning "undecided".
func DetectMode(fmAudio, amAudio []float32, rate float64, power []float32, powerRate float64) Mode {
	if morseKeyed(power, powerRate) {
		return ModeCW
	}
	best, bestSNR := ModeAuto, math.Inf(-1)
	if len(fmAudio) > 0 {
		if _, snr, err := FindTone(fmAudio, rate); err == nil && snr > bestSNR {
			best, bestSNR = ModeFM, snr
		}
	}
	if len(amAudio) > 0 {
		if _, snr, err := FindTone(amAudio, rate); err == nil && snr > bestSNR {
			best, bestSNR = ModeAM, snr
		}
	}
	return best
}

// morseKeyed reports whether a linear power track switches between two
// levels at least 6 dB apart with Morse timing: after the same two-level
// slicing and deglitching as DecodeEnvelope, at least 8 key-down marks
// not far longer than a dash (long steady tones are left aside), of which
// four in five are within ±40 % of one or three units of a single speed
// in 5–40 WPM. A carrier that fades or is turned through an antenna's
// nulls changes level over seconds, not in dots and dashes, and does not
// pass.
func morseKeyed(power []float32, rate float64) bool {
	if !(rate >= 50) || math.IsInf(rate, 0) || float64(len(power)) < rate {
		return false
	}
	env := sanitize(power)
	for i, v := range env {
		env[i] = max(v, 0)
	}
	lv := levelsOf(env, rate)
	var deep, all int
	for i := range lv.hi {
		all++
		if lv.hi[i] >= 2*lv.lo[i] && lv.hi[i] > 0 { // amplitude ×2 = power ×4, 6 dB
			deep++
		}
	}
	if deep < all*9/10 {
		return false
	}
	rs := deglitch(lv.slice(), int(math.Max(1, 0.3*DotSeconds(40)*rate)))
	var marks, spaces []float64
	for _, r := range rs {
		if r.on {
			marks = append(marks, float64(r.len())/rate)
		} else {
			spaces = append(spaces, float64(r.len())/rate)
		}
	}
	if len(marks) < 8 {
		return false
	}
	u, _ := estimateUnit(marks, spaces, 5, 40)
	n, fit := 0, 0
	for _, d := range marks {
		if d > 6*u { // a long tone, not an element
			continue
		}
		n++
		if math.Min(math.Abs(math.Log(d/u)), math.Abs(math.Log(d/(3*u)))) < math.Log(1.4) {
			fit++
		}
	}
	return n >= 8 && 5*fit >= 4*n
}

// percentile32 returns the q-quantile (0–1) of x (nearest rank).
func percentile32(x []float32, q float64) float32 {
	if len(x) == 0 {
		return 0
	}
	c := make([]float32, len(x))
	copy(c, x)
	sort.Slice(c, func(i, j int) bool { return c[i] < c[j] })
	i := int(q * float64(len(c)-1))
	return c[i]
}
