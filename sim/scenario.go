// Package sim renders invented direction-finding scenarios as IQ streams,
// heading tracks and truth: several beacons taking turns on one channel,
// each keying a Morse identifier, heard by stations whose antennas turn.
// It is for the demo and for tests that need a whole scene; its numbers
// are invented and are never a test's reference.
package sim

import (
	"fmt"
	"math"
	"nullseek/ident/morse"
	"time"

	"nullseek/bearing"
	"nullseek/geo"
	"nullseek/heading"
	"nullseek/internal/angle"
)

// Beacon is one transmitter of the scene.
type Beacon struct {
	ID        string
	Lat, Lon  float64
	ToneHz    float64 // MCW tone (FM or AM modes)
	WPM       float64
	CarrierHz float64 // carrier offset from the channel's nominal frequency (crystal error)
	// LevelDB is the carrier level, dBFS, a receiver would see at 1 km
	// with an antenna gain of 0 dB; it falls 20 dB a decade with range.
	LevelDB float64
	// FirstOnS is the start of the first transmission, seconds from the
	// capture start; OnS is the on-time, PeriodS the programmed cycle.
	FirstOnS, OnS, PeriodS float64
	// DriftPPM is the beacon timer's rate error as its slots drift: its
	// real cycle is PeriodS·(1 + DriftPPM·1e-6) of receiver time, so a
	// positive value (a slow clock) brings the beacon back later each cycle.
	DriftPPM float64
	Mode     morse.Mode // ModeFM, ModeAM or ModeCW
}

// Station is a receiving site with a turning antenna.
type Station struct {
	Name     string
	Lat, Lon float64
	Antenna  bearing.Pattern
	// AntennaName is the --antenna value that selects the same pattern.
	AntennaName string
	Turn        heading.SteadyTurn
	// HeadingRef says whether the station's heading log is written true
	// or magnetic; DeclDeg is the declination used to make a magnetic log.
	HeadingRef heading.Ref
	DeclDeg    float64
	// RippleDB is the depth of a site's multipath ripple on the antenna
	// pattern (a few dB at real sites), which gives the bearings the
	// small, honest errors a real site has.
	RippleDB float64
}

// Scenario is a whole scene.
type Scenario struct {
	Name, Place                  string
	Start                        time.Time
	CenterHz                     float64 // capture centre
	ChannelHz                    float64 // the beacons' nominal channel
	SampleRate                   float64
	DurationS                    float64
	NoiseDBFS                    float64 // complex Gaussian noise over the whole captured band
	DeviationHz                  float64 // FM peak deviation
	Seed                         int64
	Beacons                      []Beacon
	Stations                     []Station
	GridOriginLat, GridOriginLon float64
	GridCellM                    float64
	GridCols, GridRows           int
}

// TrueBearing is the geodesic azimuth from station st to beacon b, degrees.
func TrueBearing(st Station, b Beacon) float64 {
	_, az, _ := geo.Inverse(st.Lat, st.Lon, b.Lat, b.Lon)
	return angle.Wrap360(az)
}

// DistanceM is the geodesic distance from station st to beacon b.
func DistanceM(st Station, b Beacon) float64 {
	d, _, _ := geo.Inverse(st.Lat, st.Lon, b.Lat, b.Lon)
	return d
}

// Slots returns the on-intervals of beacon b inside [0, durS).
func (b Beacon) Slots(durS float64) [][2]float64 {
	var out [][2]float64
	p := b.PeriodS * (1 + b.DriftPPM*1e-6)
	for k := 0; ; k++ {
		t0 := b.FirstOnS + float64(k)*p
		if t0 >= durS {
			break
		}
		out = append(out, [2]float64{t0, math.Min(t0+b.OnS, durS)})
	}
	return out
}

// keying returns the ID's ideal keying repeated to fill onS seconds, as
// key-down intervals relative to the slot start.
func (b Beacon) keying(onS float64) ([][2]float64, error) {
	marks, err := morse.Encode(b.ID, b.WPM, 0)
	if err != nil {
		return nil, fmt.Errorf("beacon %s: %w", b.ID, err)
	}
	if len(marks) == 0 {
		return nil, fmt.Errorf("beacon %s: empty keying", b.ID)
	}
	last := marks[len(marks)-1]
	idLen := last.StartS + last.DurS
	word := 7 * morse.DotSeconds(b.WPM)
	lead := 0.5 // a short plain carrier before the first character
	var on [][2]float64
	for start := lead; start+idLen <= onS-0.2; start += idLen + word {
		for _, m := range marks {
			if m.On {
				on = append(on, [2]float64{start + m.StartS, start + m.StartS + m.DurS})
			}
		}
	}
	return on, nil
}

// Demo is the built-in invented scenario: three beacons N0CALL/1…3 taking
// turns on one channel near an invented place, heard by three stations
// with turning antennas.
func Demo() (Scenario, error) {
	yagi, err := bearing.Yagi(60, 18)
	if err != nil {
		return Scenario{}, err
	}
	loop, err := bearing.SmallLoop(25)
	if err != nil {
		return Scenario{}, err
	}
	// Invented place "Hollowmere Common": an origin and local offsets.
	lat0, lon0 := 52.2046, 5.8731
	at := func(eM, nM float64) (float64, float64) { return geo.FromENU(lat0, lon0, eM, nM) }
	sc := Scenario{
		Name:        "demo",
		Place:       "Hollowmere Common",
		Start:       time.Date(2026, 5, 16, 9, 0, 0, 0, time.UTC),
		CenterHz:    144.500e6,
		ChannelHz:   144.525e6,
		SampleRate:  96000,
		DurationS:   180,
		NoiseDBFS:   -42,
		DeviationHz: 2500,
		Seed:        7,
		GridCellM:   500,
		GridCols:    12,
		GridRows:    14,
	}
	sc.GridOriginLat, sc.GridOriginLon = at(-3000, 5000) // north-west corner
	type bc struct {
		id                    string
		e, n, tone, carrier   float64
		first, drift, levelDB float64
	}
	for _, x := range []bc{
		{"N0CALL/1", 1200, 2300, 700, 140, 1.0, 80, 0},
		{"N0CALL/2", -1700, 1300, 850, -310, 16.0, -60, -2},
		{"N0CALL/3", 700, -900, 1000, 420, 31.0, 150, -3},
	} {
		la, lo := at(x.e, x.n)
		sc.Beacons = append(sc.Beacons, Beacon{
			ID: x.id, Lat: la, Lon: lo, ToneHz: x.tone, WPM: 18, CarrierHz: x.carrier,
			LevelDB: x.levelDB, FirstOnS: x.first, OnS: 12, PeriodS: 45, DriftPPM: x.drift,
			Mode: morse.ModeFM,
		})
	}
	type stc struct {
		name        string
		e, n        float64
		pat         bearing.Pattern
		ant         string
		start, rate float64
	}
	for _, x := range []stc{
		{"north-hill", -400, 4200, yagi, "yagi", 10, 30},
		{"mill-lane", -3200, -2600, yagi, "yagi", 200, -30},
		{"east-gate", 3600, -1200, loop, "loop", 75, 30},
	} {
		la, lo := at(x.e, x.n)
		sc.Stations = append(sc.Stations, Station{
			Name: x.name, Lat: la, Lon: lo, Antenna: x.pat, AntennaName: x.ant,
			Turn:       heading.SteadyTurn{StartDeg: x.start, RateDegPerS: x.rate},
			HeadingRef: heading.True,
			RippleDB:   1.5,
		})
	}
	return sc, nil
}
