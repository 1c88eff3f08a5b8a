package store

import (
	"fmt"
	"strings"
	"time"

	"nullseek/sdr"
)

// StationID, CaptureID, TransmitterID, BurstID and FixID are row ids of
// their tables (INTEGER PRIMARY KEY). 0 means "none".
type (
	StationID     int64
	CaptureID     int64
	TransmitterID int64
	BurstID       int64
	FixID         int64
)

// Position sources of a station (stations.position_source).
const (
	PositionFixed = "fixed" // from the station file
	PositionGPSD  = "gpsd"  // live from gpsd
	PositionNMEA  = "nmea"  // live from an NMEA 0183 GGA/RMC feed
)

// Heading references (headings.reference).
const (
	RefTrue     = "true"
	RefMagnetic = "magnetic"
)

// Station is one listening place. Natural key: Name.
type Station struct {
	ID   StationID
	Name string
	// LatDeg, LonDeg (WGS84 degrees) and AltM (metres above the
	// ellipsoid) are nil for a moving station, whose bearings carry the
	// position they were taken at.
	LatDeg, LonDeg, AltM *float64
	// PositionSource is PositionFixed, PositionGPSD or PositionNMEA.
	PositionSource string
	// Antenna names the antenna or its pattern kind; PatternFile the
	// measured pattern in use ("" for none).
	Antenna, PatternFile string
	// MountOffsetDeg is degrees clockwise from the heading sensor's
	// reference direction to the antenna's reference direction (main lobe
	// or null): antenna heading = sensor heading + MountOffsetDeg, as in
	// heading.Track.
	MountOffsetDeg float64
	// DeclinationDeg (east positive) fixed for the station; nil to take it
	// from the magnetic model at each bearing.
	DeclinationDeg *float64
}

// Validate checks the station's fields.
func (s Station) Validate() error {
	switch {
	case strings.TrimSpace(s.Name) == "":
		return fmt.Errorf("%w: station has no name", ErrBadRow)
	case (s.LatDeg == nil) != (s.LonDeg == nil):
		return fmt.Errorf("%w: station %q: give both latitude and longitude, or neither", ErrBadRow, s.Name)
	case s.LatDeg != nil && !(*s.LatDeg >= -90 && *s.LatDeg <= 90):
		return fmt.Errorf("%w: station %q: latitude %v is outside -90…90", ErrBadRow, s.Name, *s.LatDeg)
	case s.LonDeg != nil && !(*s.LonDeg >= -180 && *s.LonDeg <= 180):
		return fmt.Errorf("%w: station %q: longitude %v is outside -180…180", ErrBadRow, s.Name, *s.LonDeg)
	case s.AltM != nil && !(*s.AltM > -500 && *s.AltM < 10000):
		return fmt.Errorf("%w: station %q: altitude %v m is outside -500…10000", ErrBadRow, s.Name, *s.AltM)
	case s.PositionSource != PositionFixed && s.PositionSource != PositionGPSD && s.PositionSource != PositionNMEA:
		return fmt.Errorf("%w: station %q: position source %q: want fixed, gpsd or nmea", ErrBadRow, s.Name, s.PositionSource)
	case s.PositionSource == PositionFixed && s.LatDeg == nil:
		return fmt.Errorf("%w: station %q: a fixed station needs its position", ErrBadRow, s.Name)
	case !finite(s.MountOffsetDeg) || s.MountOffsetDeg <= -360 || s.MountOffsetDeg >= 360:
		return fmt.Errorf("%w: station %q: mount offset %v° is outside (-360, 360)", ErrBadRow, s.Name, s.MountOffsetDeg)
	case s.DeclinationDeg != nil && !(*s.DeclinationDeg >= -180 && *s.DeclinationDeg <= 180):
		return fmt.Errorf("%w: station %q: declination %v° is outside -180…180", ErrBadRow, s.Name, *s.DeclinationDeg)
	}
	return nil
}

// Capture is one recording or live stream on one channel. Natural key:
// FileSHA256 and ChannelOffsetHz, so that the same file surveyed on two
// channels gives two captures and surveyed twice on one gives one.
type Capture struct {
	ID      CaptureID
	Station StationID // 0 when not tied to a station
	// Source names the recording (path) or stream (address); Format is its
	// SigMF datatype ("cu8", …).
	Source, Format string
	// Start is the UTC time of sample 0; zero when unknown.
	Start time.Time
	// CentreHz is the RF frequency of the DC bin; 0 when unknown.
	CentreHz float64
	// SampleRateHz is the complex sample rate (> 0).
	SampleRateHz float64
	// Samples is the length in samples; -1 for live or unknown.
	Samples int64
	// FileSHA256 is the lowercase hex SHA-256 of the IQ data (HashFile);
	// for a live stream without a file, any stable 64-hex-digit key of the
	// caller's choosing.
	FileSHA256 string
	// ChannelOffsetHz is the channel's offset from CentreHz.
	ChannelOffsetHz float64
}

// CaptureFromInfo fills a Capture from an sdr.Info and the key fields.
func CaptureFromInfo(info sdr.Info, fileSHA256 string, channelOffsetHz float64) Capture {
	return Capture{
		Source: info.Name, Format: info.Format, Start: info.Start.UTC(),
		CentreHz: info.CenterHz, SampleRateHz: info.SampleRate, Samples: info.Samples,
		FileSHA256: fileSHA256, ChannelOffsetHz: channelOffsetHz,
	}
}

// ChannelHz is the channel's RF frequency, or 0 when the centre is unknown.
func (c Capture) ChannelHz() float64 {
	if c.CentreHz == 0 {
		return 0
	}
	return c.CentreHz + c.ChannelOffsetHz
}

// Validate checks the capture's fields.
func (c Capture) Validate() error {
	switch {
	case !(c.SampleRateHz > 0 && c.SampleRateHz < 1e10):
		return fmt.Errorf("%w: capture %q: sample rate %v Hz must be above 0 and below 10 GHz", ErrBadRow, c.Source, c.SampleRateHz)
	case !finite(c.CentreHz, c.ChannelOffsetHz) || c.CentreHz < 0 || c.CentreHz > 1e11:
		return fmt.Errorf("%w: capture %q: centre %v Hz or channel offset %v Hz is not a usable frequency", ErrBadRow, c.Source, c.CentreHz, c.ChannelOffsetHz)
	case !validTime(c.Start):
		return fmt.Errorf("%w: capture %q: start %v is outside 1970…2200", ErrBadRow, c.Source, c.Start)
	case c.Samples < -1:
		return fmt.Errorf("%w: capture %q: %d samples", ErrBadRow, c.Source, c.Samples)
	case !isHex64(c.FileSHA256):
		return fmt.Errorf("%w: capture %q: file hash %q is not 64 lowercase hex digits (SHA-256)", ErrBadRow, c.Source, c.FileSHA256)
	}
	return nil
}

// validTime reports whether t is unknown (zero) or inside the years that
// INTEGER nanoseconds since 1970 hold with room to spare (1970…2200).
func validTime(t time.Time) bool {
	return t.IsZero() || (t.Year() >= 1970 && t.Year() <= 2200)
}

func isHex64(s string) bool {
	if len(s) != 64 {
		return false
	}
	for _, r := range s {
		if !(r >= '0' && r <= '9' || r >= 'a' && r <= 'f') {
			return false
		}
	}
	return true
}

// Transmitter is one beacon. Natural key: Ident (its identifier, or a
// fingerprint label when the identifier is unknown).
type Transmitter struct {
	ID    TransmitterID
	Ident string
	// OffsetHz (carrier offset from the channel) and ToneHz (keying tone;
	// 0 for keyed carrier) are its fingerprint; nil when not measured.
	OffsetHz, ToneHz *float64
}

// Validate checks the transmitter's fields.
func (t Transmitter) Validate() error {
	switch {
	case strings.TrimSpace(t.Ident) == "":
		return fmt.Errorf("%w: transmitter has no identifier", ErrBadRow)
	case t.OffsetHz != nil && !finite(*t.OffsetHz):
		return fmt.Errorf("%w: transmitter %q: offset is not finite", ErrBadRow, t.Ident)
	case t.ToneHz != nil && !(*t.ToneHz >= 0 && *t.ToneHz < 1e5):
		return fmt.Errorf("%w: transmitter %q: tone %v Hz is outside 0…100 kHz", ErrBadRow, t.Ident, *t.ToneHz)
	}
	return nil
}

// Burst is one transmission found on a capture's channel. Natural key:
// Capture and StartSample.
type Burst struct {
	ID      BurstID
	Capture CaptureID
	// StartSample and EndSample index the capture's samples; StartS and
	// EndS are the same in seconds from sample 0; Start and End in UTC
	// (zero when the capture start is unknown).
	StartSample, EndSample int64
	StartS, EndS           float64
	Start, End             time.Time
	// OffsetHz is the carrier offset from the capture centre; FreqHz the
	// carrier's RF frequency (0 when unknown).
	OffsetHz, FreqHz float64
	// LevelDBFS, PeakDBFS and NoiseDBFS are channel power; SNRDB their
	// ratio; ClippedFraction the share of raw samples at the ADC rails.
	LevelDBFS, PeakDBFS, NoiseDBFS, SNRDB float64
	ClippedFraction                       float64
	CutAtStart, CutAtEnd, DoubleCarrier   bool
	CarrierSpreadHz                       float64
	// Mode is how the identifier was keyed ("fm", "am", "cw"), Text the
	// decoded Morse.
	Mode, Text string
	// Ident names the transmitter ("" for none); the Writer creates the
	// transmitter row when it does not exist yet.
	Ident           string
	IdentConfidence float64
	IdentMethod     string
	ToneHz, WPM     float64
	// ReadingsPerS is the rate of the stored readings after thinning; set
	// by the Writer.
	ReadingsPerS float64
}

// Validate checks the burst's fields.
func (b Burst) Validate() error {
	where := fmt.Sprintf("burst at sample %d", b.StartSample)
	switch {
	case b.Capture <= 0:
		return fmt.Errorf("%w: %s: no capture", ErrBadRow, where)
	case b.StartSample < 0 || b.EndSample < b.StartSample:
		return fmt.Errorf("%w: %s: ends at sample %d, before it starts", ErrBadRow, where, b.EndSample)
	case !finite(b.StartS, b.EndS, b.OffsetHz, b.FreqHz, b.LevelDBFS, b.PeakDBFS, b.NoiseDBFS, b.SNRDB, b.ClippedFraction, b.CarrierSpreadHz, b.IdentConfidence, b.ToneHz, b.WPM, b.ReadingsPerS):
		return fmt.Errorf("%w: %s: a measurement is NaN or infinite", ErrBadRow, where)
	case b.EndS < b.StartS:
		return fmt.Errorf("%w: %s: ends at %.3f s, before it starts at %.3f s", ErrBadRow, where, b.EndS, b.StartS)
	case b.ClippedFraction < 0 || b.ClippedFraction > 1:
		return fmt.Errorf("%w: %s: clipped fraction %v is outside 0…1", ErrBadRow, where, b.ClippedFraction)
	case b.IdentConfidence < 0 || b.IdentConfidence > 1:
		return fmt.Errorf("%w: %s: identifier confidence %v is outside 0…1", ErrBadRow, where, b.IdentConfidence)
	case !validTime(b.Start) || !validTime(b.End):
		return fmt.Errorf("%w: %s: UTC time outside 1970…2200", ErrBadRow, where)
	case !b.Start.IsZero() && !b.End.IsZero() && b.End.Before(b.Start):
		return fmt.Errorf("%w: %s: ends (UTC) before it starts", ErrBadRow, where)
	}
	return nil
}

// LevelReading is one reading of channel power during a burst. Natural
// key: its burst and Sample.
type LevelReading struct {
	// Sample is the capture sample index of the reading's centre; TimeS
	// the same in seconds from sample 0.
	Sample int64
	TimeS  float64
	// LevelDBFS is channel power in dBFS.
	LevelDBFS float64
	// Clipped counts raw samples at the ADC rails during the reading.
	Clipped int
}

// HeadingSample is one antenna heading observation on a capture's clock.
// Natural key: its capture and TimeS.
type HeadingSample struct {
	// TimeS is seconds from the capture's sample 0 (negative before it).
	TimeS float64
	// Deg is the sensor heading in [0, 360), clockwise from the north
	// named by the batch's reference; the mount offset is not applied.
	Deg float64
}

// Bearing flags (bearings.flags, a bit set).
const (
	// FlagAmbiguous: the alternate bearing fits equally (AltTrueDeg set).
	FlagAmbiguous = 1 << iota
	// FlagClipped: some readings were at the ADC rails and left out.
	FlagClipped
	// FlagBootstrapSigma: the sigma is the bootstrap's, more than twice
	// the Fisher value.
	FlagBootstrapSigma
	// FlagLowCoverage: the sweep covered little of the circle.
	FlagLowCoverage
	// FlagBurstCut: the burst was cut by the start or end of the capture.
	FlagBurstCut
	// FlagMovingStation: the station position is a live fix (gpsd/NMEA).
	FlagMovingStation
	// flagsAll is every defined bit.
	flagsAll = 1<<iota - 1
)

// Bearing is the bearing one station measured on one burst. Natural key:
// the burst (Capture, BurstStartSample) and Station.
type Bearing struct {
	ID int64 // the bearing's own row id when read back
	// Capture and BurstStartSample name the burst (it must have been
	// written before, or earlier in the same Writer).
	Capture          CaptureID
	BurstStartSample int64
	Station          StationID
	// StationName and Ident are filled when reading; Ident may also be
	// given when writing to attribute the bearing to a transmitter
	// (default: the burst's).
	StationName, Ident string
	// Time is the burst's start (UTC); zero when unknown.
	Time time.Time
	// TrueDeg is the bearing from TRUE north in [0, 360). MagneticDeg
	// (nil unless the heading source was magnetic) and DeclinationDeg
	// (east positive, nil when not used) record how it was derived.
	TrueDeg                     float64
	MagneticDeg, DeclinationDeg *float64
	// SigmaDeg is the 1-sigma uncertainty (> 0).
	SigmaDeg float64
	// AltTrueDeg is the equally good alternate bearing of an ambiguous
	// pattern, nil otherwise.
	AltTrueDeg *float64
	// Flags is a set of Flag* bits.
	Flags int
	// StationLatDeg, StationLonDeg, StationAltM: where the station was.
	// NoPosition says it is not known (a moving station's position
	// source had no fix near the burst): nothing is stored for the three,
	// and a bearing read back has NoPosition set and NaN latitude and
	// longitude, so that it cannot be drawn from a made-up place.
	StationLatDeg, StationLonDeg float64
	StationAltM                  *float64
	NoPosition                   bool
	NullDepthDB, CoverageDeg     float64
	ResidualDB                   float64
	Points                       int
	Warnings                     []string
}

// Validate checks the bearing's fields.
func (b Bearing) Validate() error {
	where := fmt.Sprintf("bearing of the burst at sample %d", b.BurstStartSample)
	in360 := func(p *float64) bool { return p == nil || (*p >= 0 && *p < 360) }
	switch {
	case b.Capture <= 0 || b.Station <= 0:
		return fmt.Errorf("%w: %s: no capture or station", ErrBadRow, where)
	case !(b.TrueDeg >= 0 && b.TrueDeg < 360) || !in360(b.MagneticDeg) || !in360(b.AltTrueDeg):
		return fmt.Errorf("%w: %s: bearings must be in [0, 360)", ErrBadRow, where)
	case b.DeclinationDeg != nil && !(*b.DeclinationDeg >= -180 && *b.DeclinationDeg <= 180):
		return fmt.Errorf("%w: %s: declination %v° is outside -180…180", ErrBadRow, where, *b.DeclinationDeg)
	case !(b.SigmaDeg > 0 && b.SigmaDeg <= 180):
		return fmt.Errorf("%w: %s: sigma %v° must be above 0 and at most 180", ErrBadRow, where, b.SigmaDeg)
	case !validTime(b.Time):
		return fmt.Errorf("%w: %s: time %v is outside 1970…2200", ErrBadRow, where, b.Time)
	case b.Flags&^flagsAll != 0:
		return fmt.Errorf("%w: %s: unknown flag bits %#x", ErrBadRow, where, b.Flags&^flagsAll)
	case !b.NoPosition && !(b.StationLatDeg >= -90 && b.StationLatDeg <= 90 && b.StationLonDeg >= -180 && b.StationLonDeg <= 180):
		return fmt.Errorf("%w: %s: station position %v, %v is not a latitude and longitude", ErrBadRow, where, b.StationLatDeg, b.StationLonDeg)
	case b.StationAltM != nil && !finite(*b.StationAltM):
		return fmt.Errorf("%w: %s: station altitude is not finite", ErrBadRow, where)
	case !finite(b.NullDepthDB, b.CoverageDeg, b.ResidualDB) || b.Points < 0:
		return fmt.Errorf("%w: %s: a fit figure is NaN, infinite or negative", ErrBadRow, where)
	}
	return nil
}

// Schedule is one transmitter's place in the slot schedule as worked out
// at AsOf. Natural key: Ident and AsOf. Quantities that could not be
// estimated are nil, with Reason saying why.
type Schedule struct {
	Ident string
	// AsOf is the UTC time the schedule describes (the end of the data it
	// was fitted on).
	AsOf time.Time
	// Order is the 0-based place in the cyclic order of the channel's
	// transmitters; Bursts how many bursts were attributed.
	Order, Bursts int
	// PeriodS ± PeriodSigmaS is the fitted repetition period; DriftPPM ±
	// DriftSigmaPPM its drift against the reference period (positive: the
	// slot slides later each cycle).
	PeriodS, PeriodSigmaS, DriftPPM, DriftSigmaPPM *float64
	// T0 is the fitted start of the first fitted cycle (UTC; zero when
	// unknown); OnS the mean on-time in seconds; CommonPeriodS the cycle of
	// the whole channel.
	T0            time.Time
	OnS           *float64
	CommonPeriodS *float64
	Reason        string
	// ChannelHz is the RF frequency of the channel the schedule was fitted
	// on; 0 when unknown (stored as NULL).
	ChannelHz float64
}

// Validate checks the schedule's fields.
func (s Schedule) Validate() error {
	for _, p := range []*float64{s.PeriodS, s.PeriodSigmaS, s.DriftPPM, s.DriftSigmaPPM, s.OnS, s.CommonPeriodS} {
		if p != nil && !finite(*p) {
			return fmt.Errorf("%w: schedule of %q: a figure is NaN or infinite (leave it nil instead)", ErrBadRow, s.Ident)
		}
	}
	switch {
	case strings.TrimSpace(s.Ident) == "":
		return fmt.Errorf("%w: schedule has no transmitter", ErrBadRow)
	case s.AsOf.IsZero() || !validTime(s.AsOf) || !validTime(s.T0):
		return fmt.Errorf("%w: schedule of %q: as-of time missing, or a time outside 1970…2200", ErrBadRow, s.Ident)
	case s.Order < 0 || s.Bursts < 0:
		return fmt.Errorf("%w: schedule of %q: negative order or burst count", ErrBadRow, s.Ident)
	case s.PeriodS != nil && !(*s.PeriodS > 0):
		return fmt.Errorf("%w: schedule of %q: period %v s must be positive", ErrBadRow, s.Ident, *s.PeriodS)
	case !finite(s.ChannelHz) || s.ChannelHz < 0:
		return fmt.Errorf("%w: schedule of %q: channel %v Hz is not a frequency (0: unknown)", ErrBadRow, s.Ident, s.ChannelHz)
	}
	return nil
}

// Fix is a transmitter position worked out from the bearings of a time
// window. Natural key: Ident, From and To.
type Fix struct {
	ID    FixID
	Ident string
	// From and To bound the bearing times used (UTC).
	From, To time.Time
	// LatDeg, LonDeg: the fix (WGS84).
	LatDeg, LonDeg float64
	// CovEEM2, CovENM2, CovNNM2: the 1-sigma covariance on the local
	// east/north plane, m².
	CovEEM2, CovENM2, CovNNM2 float64
	// The error ellipse holding Probability: semi-axes in metres, major
	// axis azimuth in [0, 180) degrees from true north.
	SemiMajorM, SemiMinorM, OrientationDeg, Probability float64
	Chi2                                                float64
	DOF                                                 int
	VarianceFactor                                      float64
	Maidenhead, GridCell                                string
	// Computed is when the fix was worked out (UTC).
	Computed time.Time
	// Lines are the lines of position that went in, in input order.
	Lines []FixLine
}

// FixLine is one line of position given to a fix.
type FixLine struct {
	Station        StationID
	StationName    string // filled when reading
	LatDeg, LonDeg float64
	TrueDeg        float64
	SigmaDeg       float64
	Used           bool
	// ResidualDeg = measured − computed bearing, (−180, 180]; DistM the
	// distance from the station to the fix; Reason why it was rejected.
	ResidualDeg, DistM float64
	Reason             string
}

// Validate checks the fix's fields.
func (f Fix) Validate() error {
	switch {
	case strings.TrimSpace(f.Ident) == "":
		return fmt.Errorf("%w: fix has no transmitter", ErrBadRow)
	case f.From.IsZero() || f.To.IsZero() || f.To.Before(f.From) || !validTime(f.From) || !validTime(f.To) || !validTime(f.Computed):
		return fmt.Errorf("%w: fix of %q: bearing window %v … %v is empty or reversed", ErrBadRow, f.Ident, f.From, f.To)
	case !(f.LatDeg >= -90 && f.LatDeg <= 90 && f.LonDeg >= -180 && f.LonDeg <= 180):
		return fmt.Errorf("%w: fix of %q: %v, %v is not a latitude and longitude", ErrBadRow, f.Ident, f.LatDeg, f.LonDeg)
	case !finite(f.CovEEM2, f.CovENM2, f.CovNNM2, f.SemiMajorM, f.SemiMinorM, f.OrientationDeg, f.Chi2, f.VarianceFactor):
		return fmt.Errorf("%w: fix of %q: a figure is NaN or infinite", ErrBadRow, f.Ident)
	case !(f.Probability > 0 && f.Probability < 1):
		return fmt.Errorf("%w: fix of %q: ellipse probability %v is outside (0, 1)", ErrBadRow, f.Ident, f.Probability)
	}
	for i, l := range f.Lines {
		if l.Station <= 0 || !finite(l.LatDeg, l.LonDeg, l.TrueDeg, l.SigmaDeg, l.ResidualDeg, l.DistM) {
			return fmt.Errorf("%w: fix of %q: line %d has no station or a NaN/infinite figure", ErrBadRow, f.Ident, i+1)
		}
	}
	return nil
}
