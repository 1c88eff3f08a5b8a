package sim

import (
	"fmt"
	"io"
	"math"
	"math/rand"
	"nullseek/ident/morse"

	"nullseek/bearing"
	"nullseek/internal/angle"
	"nullseek/sdr"
)

// Source renders what one station hears, as an sdr.Source of cu8 samples
// (quantised as an RTL-SDR would), sample by sample with flat memory.
type Source struct {
	sc    Scenario
	st    Station
	info  sdr.Info
	rng   *rand.Rand
	n     int64 // next sample index
	total int64
	bs    []beaconState
	sigma float64 // noise standard deviation per component
	buf   []byte
}

type beaconState struct {
	b        Beacon
	slots    [][2]float64
	keys     [][2]float64 // key-down intervals relative to a slot start
	si, ki   int          // current slot and key interval
	phase    float64      // carrier phase, radians
	tonePh   float64      // tone phase, radians
	freqHz   float64      // carrier offset from the capture centre
	bearing  float64      // true bearing from the station
	levelDB  float64      // level at the station before the antenna
	ampCache float64
	ampAt    int64
	ripK     [3]float64 // multipath ripple: phases of three spatial harmonics
}

// ripple is the site's multipath ripple at antenna heading h, in units of
// the station's RippleDB: a fixed sum of a few spatial harmonics, the same
// on every turn (it is the site, not noise).
func (bs *beaconState) ripple(hDeg float64) float64 {
	h := hDeg * math.Pi / 180
	return (math.Sin(2*h+bs.ripK[0]) + 0.6*math.Sin(3*h+bs.ripK[1]) + 0.4*math.Sin(5*h+bs.ripK[2])) / 2
}

// rampS is the rise and fall time of the keyed tone or carrier.
const rampS = 0.004

// NewSource prepares the recording station st would make of scenario sc.
func NewSource(sc Scenario, st Station) (*Source, error) {
	if !(sc.SampleRate > 0) || !(sc.DurationS > 0) {
		return nil, fmt.Errorf("scenario %s: sample rate and duration must be positive", sc.Name)
	}
	if err := st.Antenna.Validate(); err != nil {
		return nil, err
	}
	s := &Source{sc: sc, st: st, rng: rand.New(rand.NewSource(sc.Seed + int64(len(st.Name))*7919))}
	s.total = int64(sc.DurationS * sc.SampleRate)
	s.sigma = math.Sqrt(math.Pow(10, sc.NoiseDBFS/10) / 2)
	s.info = sdr.Info{
		SampleRate: sc.SampleRate, CenterHz: sc.CenterHz, Start: sc.Start,
		Format: "cu8", Name: "simulated " + st.Name, Samples: s.total, ClipLevel: 1,
	}
	for _, b := range sc.Beacons {
		keys, err := b.keying(b.OnS)
		if err != nil {
			return nil, err
		}
		d := math.Max(DistanceM(st, b), 50)
		s.bs = append(s.bs, beaconState{
			b: b, slots: b.Slots(sc.DurationS), keys: keys,
			freqHz:  sc.ChannelHz - sc.CenterHz + b.CarrierHz,
			bearing: TrueBearing(st, b),
			levelDB: b.LevelDB - 20*math.Log10(d/1000),
			ampAt:   -1,
			ripK:    [3]float64{s.rng.Float64() * 2 * math.Pi, s.rng.Float64() * 2 * math.Pi, s.rng.Float64() * 2 * math.Pi},
		})
	}
	return s, nil
}

// Info describes the rendered stream.
func (s *Source) Info() sdr.Info { return s.info }

// Close releases nothing; it exists for sdr.Source.
func (s *Source) Close() error { return nil }

// Read renders complex samples (the cu8 values, converted back).
func (s *Source) Read(dst []complex64) (int, error) {
	if cap(s.buf) < 2*len(dst) {
		s.buf = make([]byte, 2*len(dst))
	}
	n, err := s.ReadCU8(s.buf[:2*len(dst)])
	for i := 0; i < n/2; i++ {
		dst[i] = complex(sdr.CU8Value(s.buf[2*i]), sdr.CU8Value(s.buf[2*i+1]))
	}
	return n / 2, err
}

// ReadCU8 renders raw RTL-SDR bytes.
func (s *Source) ReadCU8(dst []byte) (int, error) {
	if s.n >= s.total {
		return 0, io.EOF
	}
	rate := s.sc.SampleRate
	k := 0
	for ; k+1 < len(dst) && s.n < s.total; k += 2 {
		t := float64(s.n) / rate
		re := s.rng.NormFloat64() * s.sigma
		im := s.rng.NormFloat64() * s.sigma
		for i := range s.bs {
			v, on := s.bs[i].sample(t, s, rate)
			if on {
				re += real(v)
				im += imag(v)
			}
		}
		dst[k] = quant(re)
		dst[k+1] = quant(im)
		s.n++
	}
	return k, nil
}

func quant(v float64) byte {
	x := math.Round(v*127.5 + 127.5)
	if x < 0 {
		return 0
	}
	if x > 255 {
		return 255
	}
	return byte(x)
}

// ramp is the keying envelope at time t inside interval [a, b).
func ramp(t, a, b float64) float64 {
	if t < a || t >= b {
		return 0
	}
	r := math.Min(1, math.Min((t-a)/rampS, (b-t)/rampS))
	return 0.5 - 0.5*math.Cos(math.Pi*r)
}

// sample returns beacon bs's contribution at time t.
func (bs *beaconState) sample(t float64, s *Source, rate float64) (complex128, bool) {
	for bs.si < len(bs.slots) && t >= bs.slots[bs.si][1] {
		bs.si++
		bs.ki = 0
	}
	if bs.si >= len(bs.slots) || t < bs.slots[bs.si][0] {
		return 0, false
	}
	slot := bs.slots[bs.si]
	ts := t - slot[0]
	for bs.ki < len(bs.keys) && ts >= bs.keys[bs.ki][1] {
		bs.ki++
	}
	key := 0.0
	if bs.ki < len(bs.keys) {
		key = ramp(ts, bs.keys[bs.ki][0], bs.keys[bs.ki][1])
	}
	edge := ramp(t, slot[0], slot[1])
	// Antenna gain, refreshed every millisecond.
	if bs.ampAt < 0 || s.n-bs.ampAt >= int64(rate/1000) {
		h := s.st.Turn.HeadingAt(t)
		// The transmitter is (bearing − heading) clockwise of boresight.
		g := GainDB(s.st.Antenna, bs.bearing-h) + s.st.RippleDB*bs.ripple(h)
		bs.ampCache = math.Pow(10, (bs.levelDB+g)/20)
		bs.ampAt = s.n
	}
	amp := bs.ampCache * edge
	bs.tonePh += 2 * math.Pi * bs.b.ToneHz / rate
	if bs.tonePh > 2*math.Pi {
		bs.tonePh -= 2 * math.Pi
	}
	tone := math.Sin(bs.tonePh)
	f := bs.freqHz
	switch bs.b.Mode {
	case morse.ModeAM:
		amp *= (1 + 0.8*key*tone) / 1.8
	case morse.ModeCW:
		amp *= key
	default:
		f += s.sc.DeviationHz * key * tone
	}
	bs.phase += 2 * math.Pi * f / rate
	if bs.phase > math.Pi {
		bs.phase -= 2 * math.Pi
	} else if bs.phase < -math.Pi {
		bs.phase += 2 * math.Pi
	}
	sn, cs := math.Sincos(bs.phase)
	return complex(amp*cs, amp*sn), true
}

// GainDB is the pattern's gain at offAxisDeg clockwise from boresight, linearly
// interpolated between its 1° steps.
func GainDB(p bearing.Pattern, offAxisDeg float64) float64 {
	x := angle.Wrap360(offAxisDeg)
	i := int(x)
	f := x - float64(i)
	n := len(p.GainDB)
	return p.GainDB[i%n]*(1-f) + p.GainDB[(i+1)%n]*f
}
