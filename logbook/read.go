package logbook

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"text/tabwriter"
	"time"

	"nullseek/bearing"
	"nullseek/geo"
	"nullseek/ident/fingerprint"
	"nullseek/ident/schedule"
	"nullseek/locate"
	"nullseek/store"
	"nullseek/survey"
)

// Query selects what is read back: one station's and one transmitter's
// when named ("" for all), inside the UTC window [From, To] (a zero end is
// open).
type Query struct {
	Station, Ident string
	From, To       time.Time
}

// ParseTime reads a time given on the command line: RFC 3339 with a zone
// ("2026-05-01T08:00:00Z"); "" is the zero time (an open end). flag names
// it in the error.
func ParseTime(flag, s string) (time.Time, error) {
	if s == "" {
		return time.Time{}, nil
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return t, fmt.Errorf("--%s %q: want an RFC 3339 time with its zone, e.g. 2026-05-01T08:00:00Z", flag, s)
	}
	return t.UTC(), nil
}

// Window is q's time window, checked.
func (q Query) window() (store.Window, error) {
	if !q.From.IsZero() && !q.To.IsZero() && q.To.Before(q.From) {
		return store.Window{}, fmt.Errorf("--to %s is before --from %s", rfc3339(q.To), rfc3339(q.From))
	}
	return store.Window{From: q.From, To: q.To}, nil
}

// openRead opens an existing database for reading.
func openRead(path string) (*store.DB, error) {
	if path == "" {
		return nil, fmt.Errorf("--db: give the database to read (or a station file that names one)")
	}
	db, err := store.Open(path, store.Options{ReadOnly: true})
	if err != nil {
		return nil, fmt.Errorf("--db: %w", err) // the store names the file
	}
	return db, nil
}

// Bearings returns the stored bearings q selects, by time then station.
func Bearings(path string, q Query) ([]store.Bearing, error) {
	w, err := q.window()
	if err != nil {
		return nil, err
	}
	db, err := openRead(path)
	if err != nil {
		return nil, err
	}
	defer db.Close()
	return db.Bearings(store.BearingQuery{Station: q.Station, Ident: q.Ident, Window: w})
}

// ScheduleAt returns the slot schedule stored as it stood at t.
func ScheduleAt(path string, t time.Time) ([]store.Schedule, error) {
	if t.IsZero() {
		t = time.Now().UTC()
	}
	db, err := openRead(path)
	if err != nil {
		return nil, err
	}
	defer db.Close()
	return db.ScheduleAt(t)
}

func rfc3339(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Format("2006-01-02T15:04:05.000Z")
}

func round(v float64, digits int) float64 {
	p := math.Pow(10, float64(digits))
	return math.Round(v*p) / p
}

func ptrRound(p *float64, digits int) *float64 {
	if p == nil {
		return nil
	}
	v := round(*p, digits)
	return &v
}

// bearingLine is one bearing as a JSON line (type "bearing"); times are
// RFC 3339 UTC.
type bearingLine struct {
	Type           string   `json:"type"` // "stored_bearing": one burst's bearing read back
	Time           string   `json:"time"`
	Station        string   `json:"station"`
	Lat            *float64 `json:"lat,omitempty"` // absent: a moving station's position was not known
	Lon            *float64 `json:"lon,omitempty"`
	AltM           *float64 `json:"alt_m,omitempty"`
	Ident          string   `json:"ident"`
	Reference      string   `json:"reference"` // always "true": the store keeps true bearings
	BearingDeg     float64  `json:"bearing_deg"`
	SigmaDeg       float64  `json:"sigma_deg"`
	AltBearingDeg  *float64 `json:"alt_bearing_deg,omitempty"`
	MagneticDeg    *float64 `json:"magnetic_bearing_deg,omitempty"`
	DeclinationDeg *float64 `json:"declination_deg,omitempty"`
	NullDepthDB    float64  `json:"null_depth_db"`
	CoverageDeg    float64  `json:"coverage_deg"`
	Points         int      `json:"points"`
	Flags          []string `json:"flags"`
}

// flagNames are the store's bearing flags in words, by bit.
var flagNames = []struct {
	bit  int
	name string
}{{store.FlagAmbiguous, "ambiguous"}, {store.FlagClipped, "clipped"}, {store.FlagBootstrapSigma, "bootstrap-sigma"},
	{store.FlagLowCoverage, "low-coverage"}, {store.FlagBurstCut, "burst-cut"}, {store.FlagMovingStation, "moving-station"}}

func flagWords(f int) []string {
	var out []string
	for _, n := range flagNames {
		if f&n.bit != 0 {
			out = append(out, n.name)
		}
	}
	return out
}

func identOr(s string) string {
	if s == "" {
		return "?"
	}
	return s
}

// WriteBearingsJSON writes one JSON line per bearing.
func WriteBearingsJSON(w io.Writer, bs []store.Bearing) error {
	enc := json.NewEncoder(w)
	for _, b := range bs {
		l := bearingLine{Type: "stored_bearing", Time: rfc3339(b.Time), Station: b.StationName, Ident: identOr(b.Ident),
			Reference: "true", BearingDeg: round(b.TrueDeg, 2), SigmaDeg: geo.RoundSigma(b.SigmaDeg), AltBearingDeg: ptrRound(b.AltTrueDeg, 2),
			MagneticDeg: ptrRound(b.MagneticDeg, 2), DeclinationDeg: ptrRound(b.DeclinationDeg, 2),
			NullDepthDB: round(b.NullDepthDB, 1), CoverageDeg: round(b.CoverageDeg, 1), Points: b.Points, Flags: flagWords(b.Flags)}
		if l.Flags == nil {
			l.Flags = []string{}
		}
		if !b.NoPosition {
			lat, lon := round(b.StationLatDeg, 6), round(b.StationLonDeg, 6)
			l.Lat, l.Lon, l.AltM = &lat, &lon, ptrRound(b.StationAltM, 1)
		}
		if err := enc.Encode(l); err != nil {
			return err
		}
	}
	return nil
}

// WriteBearingsTable writes the bearings as a table, one per line.
func WriteBearingsTable(w io.Writer, bs []store.Bearing) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "time (UTC)\tstation\tident\tbearing (true)\t±1σ\tor\tnull dB\tcover\tflags")
	for _, b := range bs {
		alt := "-"
		if b.AltTrueDeg != nil {
			alt = fmt.Sprintf("%.1f°", *b.AltTrueDeg)
		}
		fl := strings.Join(flagWords(b.Flags), ",")
		if fl == "" {
			fl = "-"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%.1f°\t%.1f°\t%s\t%.1f\t%.0f°\t%s\n", rfc3339(b.Time), b.StationName, identOr(b.Ident),
			b.TrueDeg, b.SigmaDeg, alt, b.NullDepthDB, b.CoverageDeg, fl)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	_, err := fmt.Fprintf(w, "%d bearings\n", len(bs))
	return err
}

// scheduleLine is one transmitter's stored schedule as a JSON line (type
// "stored_schedule"; slots' "schedule" object is a whole plan).
type scheduleLine struct {
	Type          string   `json:"type"`
	AsOf          string   `json:"as_of"`
	Ident         string   `json:"ident"`
	Order         int      `json:"order"` // 1-based place in the cycle
	ChannelHz     *float64 `json:"channel_hz,omitempty"`
	Bursts        int      `json:"bursts"`
	PeriodS       *float64 `json:"period_s"`
	PeriodSigmaS  *float64 `json:"period_sigma_s"`
	DriftPPM      *float64 `json:"drift_ppm"`
	DriftSigmaPPM *float64 `json:"drift_sigma_ppm"`
	FirstStart    string   `json:"first_start,omitempty"`
	OnS           *float64 `json:"on_s"`
	CommonPeriodS *float64 `json:"common_period_s"`
	Reason        string   `json:"reason,omitempty"`
}

// WriteScheduleJSON writes one JSON line per transmitter.
func WriteScheduleJSON(w io.Writer, ss []store.Schedule) error {
	enc := json.NewEncoder(w)
	for _, s := range ss {
		l := scheduleLine{Type: "stored_schedule", AsOf: rfc3339(s.AsOf), Ident: s.Ident, Order: s.Order + 1, Bursts: s.Bursts,
			PeriodS: ptrRound(s.PeriodS, 4), PeriodSigmaS: ptrRound(s.PeriodSigmaS, 4), DriftPPM: ptrRound(s.DriftPPM, 1),
			DriftSigmaPPM: ptrRound(s.DriftSigmaPPM, 1), FirstStart: rfc3339(s.T0), OnS: ptrRound(s.OnS, 2),
			CommonPeriodS: ptrRound(s.CommonPeriodS, 4), Reason: s.Reason}
		if s.ChannelHz > 0 {
			f := round(s.ChannelHz, 1)
			l.ChannelHz = &f
		}
		if err := enc.Encode(l); err != nil {
			return err
		}
	}
	return nil
}

// WriteScheduleTable writes the schedule as a table, in slot order.
func WriteScheduleTable(w io.Writer, ss []store.Schedule, at time.Time) error {
	if len(ss) == 0 {
		_, err := fmt.Fprintf(w, "no schedule stored as of %s\n", rfc3339(at))
		return err
	}
	num := func(p *float64, f string) string {
		if p == nil {
			return "-"
		}
		return fmt.Sprintf(f, *p)
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "order\tident\tbursts\tperiod s\t±1σ s\tdrift ppm\ton s\tfirst start (UTC)\tfitted as of (UTC)")
	for _, s := range ss {
		fmt.Fprintf(tw, "%d\t%s\t%d\t%s\t%s\t%s\t%s\t%s\t%s\n", s.Order+1, s.Ident, s.Bursts, num(s.PeriodS, "%.3f"),
			num(s.PeriodSigmaS, "%.4f"), num(s.DriftPPM, "%+.1f"), num(s.OnS, "%.2f"), rfc3339(s.T0), rfc3339(s.AsOf))
	}
	return tw.Flush()
}

// FixSource is the stored bearings q selects as a bearings input of
// locate.Run (the CSV that fix reads, geo.WriteBearingsCSV). The stored
// bearings are one per burst, with the fit's own sigma: as bearing does,
// the bursts of one transmitter heard at one place are combined
// (bearing.Combine) and the site error survey.DefaultSiteSigmaDeg, which
// repeats on every burst, is added in quadrature, so each station gives
// one line of position per transmitter, stamped with its latest burst.
// It returns the source and, per transmitter, the window of the bursts
// that went in (the window a fix of them is stored under, SaveFixes).
func FixSource(path string, q Query) (locate.Source, map[string]store.Window, error) {
	bs, err := Bearings(path, q)
	if err != nil {
		return locate.Source{}, nil, err
	}
	spans := map[string]store.Window{}
	type key struct {
		ident, station string
		lat, lon       float64
	}
	var order []key
	groups := map[key][]store.Bearing{}
	for _, b := range bs {
		if b.Ident == "" {
			continue // attributed to no transmitter: nothing to fix
		}
		k := key{b.Ident, b.StationName, round(b.StationLatDeg, 5), round(b.StationLonDeg, 5)}
		if _, ok := groups[k]; !ok {
			order = append(order, k)
		}
		groups[k] = append(groups[k], b)
		sp := spans[b.Ident]
		if sp.From.IsZero() || b.Time.Before(sp.From) {
			sp.From = b.Time
		}
		if b.Time.After(sp.To) {
			sp.To = b.Time
		}
		spans[b.Ident] = sp
	}
	var recs []geo.BearingRecord
	for _, k := range order {
		g := groups[k]
		ests := make([]bearing.Estimate, len(g))
		for i, b := range g {
			ests[i] = bearing.Estimate{BearingDeg: b.TrueDeg, SigmaDeg: b.SigmaDeg, AltBearingDeg: b.AltTrueDeg,
				NullDepthDB: b.NullDepthDB, CoverageDeg: b.CoverageDeg, Points: b.Points}
		}
		c, err := bearing.Combine(ests, bearing.CombineOptions{})
		if err != nil {
			continue
		}
		last := g[len(g)-1]
		recs = append(recs, geo.BearingRecord{LOP: geo.LOP{Ident: k.ident, Station: k.station, Lat: last.StationLatDeg,
			Lon: last.StationLonDeg, BearingDeg: c.BearingDeg, SigmaDeg: math.Hypot(c.SigmaDeg, survey.DefaultSiteSigmaDeg),
			Time: last.Time, Ambiguous: c.AltBearingDeg != nil}})
	}
	if len(recs) == 0 {
		return locate.Source{}, nil, fmt.Errorf("--db %s: no bearings of a known transmitter stored%s", path, q.describe())
	}
	var buf bytes.Buffer
	if err := geo.WriteBearingsCSV(&buf, recs); err != nil {
		return locate.Source{}, nil, err
	}
	return locate.Source{Name: path, R: &buf}, spans, nil
}

// describe says what q selects, for messages.
func (q Query) describe() string {
	var parts []string
	if q.Station != "" {
		parts = append(parts, "station "+q.Station)
	}
	if q.Ident != "" {
		parts = append(parts, "transmitter "+q.Ident)
	}
	if !q.From.IsZero() {
		parts = append(parts, "from "+rfc3339(q.From))
	}
	if !q.To.IsZero() {
		parts = append(parts, "to "+rfc3339(q.To))
	}
	if len(parts) == 0 {
		return ""
	}
	return " for " + strings.Join(parts, ", ")
}

// SaveFixes writes the fixes of res to the database at path: per fix, the
// window of its bearings (spans[ident] when given, as FixSource says; else
// the times of its lines of position), the ellipse and the lines (their
// stations written when new, never overwriting a station's own record).
// A fix whose bearings carry no time is not stored (its window is its key),
// which a note says.
func SaveFixes(path string, res *locate.Result, spans map[string]store.Window) (*Saved, error) {
	db, err := store.Open(path, store.Options{})
	if err != nil {
		return nil, fmt.Errorf("--db %s: %w", path, err)
	}
	defer db.Close()
	sv := &Saved{Path: path, Rows: Counts{}}
	if sv.Before, err = db.Counts(); err != nil {
		return nil, err
	}
	stations := map[string]store.StationID{}
	for _, f := range res.Fixes {
		row, ok := fixRow(f)
		if sp, known := spans[f.Ident]; known && ok && !sp.From.IsZero() {
			row.From, row.To = sp.From, sp.To
		}
		if !ok {
			sv.Notes = append(sv.Notes, fmt.Sprintf("fix of %s not stored: its bearings carry no time", f.Ident))
			continue
		}
		for i, b := range f.Bearings {
			id, ok := stations[b.Station]
			if !ok {
				lat, lon := b.Lat, b.Lon
				if id, err = db.EnsureStation(store.Station{Name: b.Station, LatDeg: &lat, LonDeg: &lon}); err != nil {
					return nil, fmt.Errorf("--db %s: %w", path, err)
				}
				stations[b.Station] = id
			}
			row.Lines[i].Station = id
		}
		if _, err := db.PutFix(row); err != nil {
			return nil, fmt.Errorf("--db %s: %w", path, err)
		}
		sv.Rows["fixes"]++
		sv.Rows["fix_lines"] += int64(len(row.Lines))
	}
	sv.Rows["stations"] = int64(len(stations))
	if sv.After, err = db.Counts(); err != nil {
		return nil, err
	}
	return sv, nil
}

// fixRow maps a fix to the store's row (lines without station ids yet);
// false when its bearings carry no time.
func fixRow(f *geo.Fix) (store.Fix, bool) {
	var from, to time.Time
	for _, b := range f.Bearings {
		if b.Time.IsZero() {
			continue
		}
		if from.IsZero() || b.Time.Before(from) {
			from = b.Time
		}
		if b.Time.After(to) {
			to = b.Time
		}
	}
	if from.IsZero() {
		return store.Fix{}, false
	}
	e := f.Ellipse
	row := store.Fix{Ident: f.Ident, From: from.UTC(), To: to.UTC(), LatDeg: f.Lat, LonDeg: f.Lon,
		CovEEM2: f.CovEE, CovENM2: f.CovEN, CovNNM2: f.CovNN, SemiMajorM: e.SemiMajorM, SemiMinorM: e.SemiMinorM,
		OrientationDeg: e.OrientationDeg, Probability: e.Probability, Chi2: f.Chi2, DOF: f.DOF,
		VarianceFactor: f.VarianceFactor, Maidenhead: f.Maidenhead, GridCell: f.GridCell}
	for _, b := range f.Bearings {
		row.Lines = append(row.Lines, store.FixLine{LatDeg: b.Lat, LonDeg: b.Lon, TrueDeg: b.BearingDeg, SigmaDeg: b.SigmaDeg,
			Used: b.Used, ResidualDeg: finiteOr(b.ResidualDeg, 0), DistM: finiteOr(b.DistM, 0), Reason: b.Reason})
	}
	return row, true
}

// Plan works out the slot schedule from the bursts q selects, as slots
// does from a recording: transmitters are named by their stored
// identifiers (bursts with none are left out). Bursts of two stations
// would count each transmission twice, so a database holding several
// needs q.Station.
func Plan(path string, q Query, opts schedule.Options) (*schedule.Plan, error) {
	w, err := q.window()
	if err != nil {
		return nil, err
	}
	db, err := openRead(path)
	if err != nil {
		return nil, err
	}
	defer db.Close()
	bs, err := db.Bursts(store.BurstQuery{Station: q.Station, Ident: q.Ident, Window: w})
	if err != nil {
		return nil, err
	}
	seen := map[string]bool{}
	for _, b := range bs {
		seen[b.StationName] = true
	}
	if len(seen) > 1 {
		names := sortedKeys(seen)
		return nil, fmt.Errorf("--db %s: bursts of %d stations (%s): give --station-name NAME so that no transmission counts twice", path, len(names), strings.Join(quoted(names), ", "))
	}
	if len(bs) == 0 {
		return nil, fmt.Errorf("--db %s: no bursts with a UTC time stored%s", path, q.describe())
	}
	sort.SliceStable(bs, func(i, j int) bool { return bs[i].Start.Before(bs[j].Start) })
	t0 := bs[0].Start
	obs := make([]fingerprint.Observation, len(bs))
	labels := make([]string, len(bs))
	var endS float64
	for i, b := range bs {
		s := b.Start.Sub(t0).Seconds()
		e := s + (b.EndS - b.StartS)
		obs[i] = fingerprint.Observation{Index: i, StartS: s, EndS: e, Start: b.Start, OffsetHz: b.OffsetHz, ToneHz: b.ToneHz,
			LevelDB: b.LevelDBFS, Ident: b.Ident, IdentConfidence: b.IdentConfidence, IdentMethod: b.IdentMethod,
			CutStart: b.CutAtStart, CutEnd: b.CutAtEnd, DoubleCarrier: b.DoubleCarrier}
		labels[i] = b.Ident
		endS = math.Max(endS, e)
	}
	if opts.CaptureStart.IsZero() {
		opts.CaptureStart = t0
	}
	if opts.CaptureEndS == 0 {
		opts.CaptureEndS = endS
	}
	return schedule.Build(obs, labels, opts)
}

func quoted(s []string) []string {
	out := make([]string, len(s))
	for i, v := range s {
		if v == "" {
			v = "no station"
		}
		out[i] = fmt.Sprintf("%q", v)
	}
	return out
}

// ShowBearings writes the stored bearings q selects to w: a table, or one
// JSON line each (type "bearing").
func ShowBearings(w io.Writer, path string, q Query, asJSON bool) error {
	bs, err := Bearings(path, q)
	if err != nil {
		return err
	}
	if asJSON {
		return WriteBearingsJSON(w, bs)
	}
	return WriteBearingsTable(w, bs)
}

// ShowSchedule writes the slot schedule stored as it stood at t (zero:
// now) to w: a table, or one JSON line per transmitter (type
// "schedule").
func ShowSchedule(w io.Writer, path string, t time.Time, asJSON bool) error {
	if t.IsZero() {
		t = time.Now().UTC()
	}
	ss, err := ScheduleAt(path, t)
	if err != nil {
		return err
	}
	if asJSON {
		return WriteScheduleJSON(w, ss)
	}
	return WriteScheduleTable(w, ss, t)
}
