package logbook

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"sort"
	"strings"
	"time"

	"nullseek/heading"
	"nullseek/ident/idmatch"
	"nullseek/ident/schedule"
	"nullseek/internal/angle"
	"nullseek/station"
	"nullseek/store"
	"nullseek/survey"
)

// Station is where a recording was made, as the commands know it.
type Station struct {
	// Name names the station; "" when neither a station file nor a
	// position says (the recording is then tied to no station and its
	// bearings are not stored).
	Name string
	// LatDeg, LonDeg when HasPosition; AltM may be nil.
	LatDeg, LonDeg float64
	HasPosition    bool
	AltM           *float64
	// Antenna is the antenna kind or pattern file; MountOffsetDeg as in
	// store.Station; DeclinationDeg a fixed declination, nil for WMM.
	Antenna, PatternFile string
	MountOffsetDeg       float64
	DeclinationDeg       *float64
}

// StationOf is the station of a command run: the station file's (f, may be
// nil) name, altitude and declination, with the position, antenna and
// mount offset the command used (its flags, which the file filled unless
// given). Without a file, a position names the station by its
// coordinates (survey.Site.Name).
func StationOf(f *station.File, hasPos bool, lat, lon float64, antenna string, mountOffsetDeg float64) Station {
	s := Station{LatDeg: lat, LonDeg: lon, HasPosition: hasPos, Antenna: antenna, MountOffsetDeg: mountOffsetDeg}
	if strings.HasSuffix(strings.ToLower(antenna), ".json") {
		s.Antenna, s.PatternFile = "pattern", antenna
	}
	if f != nil {
		s.Name, s.AltM, s.DeclinationDeg = f.Name, f.Position.AltM, f.Position.DeclinationDeg
		if !hasPos && f.Position.HasLatLon {
			s.LatDeg, s.LonDeg, s.HasPosition = f.Position.LatDeg, f.Position.LonDeg, true
		}
	} else if hasPos {
		s.Name = survey.Site{Lat: lat, Lon: lon}.Name()
	}
	return s
}

// Recording is what one command run found in one recording.
type Recording struct {
	// Path is the recording as given on the command line; the capture's
	// key is the SHA-256 of its IQ data (the .sigmf-data of a pair, or the
	// file itself). Key, when set, is used instead (a rendered recording
	// without a file, as the demo's).
	Path, Key string
	Station   Station
	Result    *survey.Result
	// Bearings are the per-burst fits of a bearing run, one per record of
	// Result in order (survey.Bearings); Track the true heading track they
	// were fitted against (mount offset applied). Both nil otherwise.
	Bearings []survey.BurstBearing
	Track    *heading.Track
	// Plan is the slot plan of a slots run, stored as of the recording's
	// end; nil otherwise.
	Plan *schedule.Plan
}

// Counts are the store's rows per table (store.Tables).
type Counts map[string]int64

// Saved says what a Save wrote: the rows the run gave per table (Rows)
// and the store's totals before and after.
type Saved struct {
	Path          string
	seen          map[string]bool // stations and transmitters counted once
	Rows          Counts
	Before, After Counts
	Notes         []string
}

// New is how many rows the save added to the store (0 on a re-run).
func (s Saved) New() int64 {
	var n int64
	for _, t := range store.Tables {
		n += s.After[t] - s.Before[t]
	}
	return n
}

// String is the save's one-line report for the user.
func (s Saved) String() string {
	var parts []string
	for _, t := range store.Tables {
		if n := s.Rows[t]; n > 0 {
			parts = append(parts, fmt.Sprintf("%d %s", n, strings.ReplaceAll(t, "_", " ")))
		}
	}
	if len(parts) == 0 {
		parts = []string{"nothing"}
	}
	return fmt.Sprintf("stored in %s: %s (%d new rows)", s.Path, strings.Join(parts, ", "), s.New())
}

// Check opens (creating or migrating) the database at path and closes it:
// a bad --db is found before a long scan. A database Check had to create
// is removed again (with SQLite's -wal, -shm and -journal files it made):
// the file is made by the Save that has something to store, so a run
// that fails leaves nothing behind.
func Check(path string) error {
	var made []string
	for _, p := range []string{path, path + "-wal", path + "-shm", path + "-journal"} {
		if _, err := os.Lstat(p); errors.Is(err, fs.ErrNotExist) {
			made = append(made, p)
		}
	}
	db, err := store.Open(path, store.Options{})
	if err == nil {
		err = db.Close()
	}
	if len(made) > 0 && made[0] == path {
		for _, p := range made {
			if rerr := os.Remove(p); rerr != nil && !errors.Is(rerr, fs.ErrNotExist) && err == nil {
				err = rerr
			}
		}
	}
	if err != nil {
		return fmt.Errorf("--db %s: %w", path, err)
	}
	return nil
}

// dataPath is the file whose bytes are a recording's IQ data.
func dataPath(p string) string {
	if l := strings.ToLower(p); strings.HasSuffix(l, ".sigmf-meta") {
		return p[:len(p)-len(".sigmf-meta")] + ".sigmf-data"
	}
	return p
}

// KeyOf is a stable capture key for a recording without a file: the
// SHA-256 of the words given.
func KeyOf(words ...string) string {
	h := sha256.Sum256([]byte(strings.Join(words, "\x00")))
	return hex.EncodeToString(h[:])
}

// Save writes the recordings to the database at path (created when
// absent) and says what it wrote.
func Save(path string, recs ...Recording) (*Saved, error) {
	db, err := store.Open(path, store.Options{})
	if err != nil {
		return nil, fmt.Errorf("--db %s: %w", path, err)
	}
	defer db.Close()
	sv := &Saved{Path: path, Rows: Counts{}, seen: map[string]bool{}}
	if sv.Before, err = db.Counts(); err != nil {
		return nil, err
	}
	for _, r := range recs {
		if err := save(db, r, sv); err != nil {
			return nil, fmt.Errorf("--db %s: %w", path, err)
		}
	}
	if sv.After, err = db.Counts(); err != nil {
		return nil, err
	}
	return sv, nil
}

// stationRow is the store's row of s.
func stationRow(s Station) store.Station {
	row := store.Station{Name: s.Name, AltM: s.AltM, PositionSource: store.PositionFixed, Antenna: s.Antenna,
		PatternFile: s.PatternFile, MountOffsetDeg: s.MountOffsetDeg, DeclinationDeg: s.DeclinationDeg}
	if s.HasPosition {
		lat, lon := s.LatDeg, s.LonDeg
		row.LatDeg, row.LonDeg = &lat, &lon
	}
	return row
}

func save(db *store.DB, r Recording, sv *Saved) error {
	res := r.Result
	if res == nil {
		return fmt.Errorf("nothing to store")
	}
	var sid store.StationID
	if r.Station.Name != "" && r.Station.HasPosition {
		var err error
		if sid, err = db.PutStation(stationRow(r.Station)); err != nil {
			return err
		}
		sv.once("stations", "s:"+r.Station.Name)
	} else if len(r.Bearings) > 0 {
		sv.Notes = append(sv.Notes, "bearings not stored: the station's position is not known (--station or --station-file)")
	}
	key := r.Key
	if key == "" {
		var err error
		if key, err = store.HashFile(dataPath(r.Path)); err != nil {
			return err
		}
	}
	info := res.Info
	cap := store.CaptureFromInfo(info, key, res.Summary.OffsetHz)
	cap.Station = sid
	cid, err := db.PutCapture(cap)
	if err != nil {
		return err
	}
	sv.Rows["captures"]++
	idents := map[string]bool{}
	for _, rec := range res.Records {
		if idmatch.Known(rec.Ident) { // as BurstRow names transmitters
			idents[rec.Ident] = true
		}
	}
	for _, id := range sortedKeys(idents) {
		if _, err := db.PutTransmitter(store.Transmitter{Ident: id}); err != nil {
			return err
		}
		sv.once("transmitters", "t:"+id)
	}
	wr, err := db.NewWriter(store.WriterOptions{})
	if err != nil {
		return err
	}
	fail := func(err error) error { wr.Close(); return err }
	for i, rec := range res.Records {
		b := BurstRow(cid, rec, info.SampleRate)
		if err := wr.AddBurst(b, Readings(rec)); err != nil {
			return fail(err)
		}
		if sid == 0 || i >= len(r.Bearings) {
			continue
		}
		bb := r.Bearings[i]
		br, why := BearingRow(bb.Est, bb.Err, b, Fitted{Station: sid, StationLatDeg: r.Station.LatDeg, StationLonDeg: r.Station.LonDeg, StationAltM: r.Station.AltM})
		if why != "" {
			continue
		}
		if err := wr.AddBearing(br); err != nil {
			return fail(err)
		}
	}
	if r.Track != nil {
		hs := make([]store.HeadingSample, 0, len(r.Track.Samples))
		for _, s := range r.Track.Samples {
			if math.IsNaN(s.Deg) || math.IsNaN(s.T) {
				continue
			}
			// the sensor's readings: the track keeps its offset and lag apart
			hs = append(hs, store.HeadingSample{TimeS: s.T, Deg: angle.Wrap360(s.Deg)})
		}
		if err := wr.AddHeadings(cid, r.Track.Ref.String(), hs); err != nil {
			return fail(err)
		}
	}
	if err := wr.Close(); err != nil {
		return err
	}
	st := wr.Stats()
	sv.Rows["bursts"] += st.Bursts
	sv.Rows["level_readings"] += st.Readings
	sv.Rows["headings"] += st.Headings
	sv.Rows["bearings"] += st.Bearings
	if r.Plan != nil {
		end := info.Start.Add(time.Duration(res.Summary.DurationS * float64(time.Second)))
		if info.Start.IsZero() {
			sv.Notes = append(sv.Notes, "schedule not stored: the recording does not say when it started")
		} else {
			var rows []store.Schedule
			for _, s := range ScheduleRows(r.Plan, end) {
				if idmatch.Known(s.Ident) { // a fingerprint label is this recording's own
					rows = append(rows, s)
				}
			}
			if err := db.PutSchedules(rows); err != nil {
				return err
			}
			sv.Rows["schedules"] += int64(len(rows))
		}
	}
	return nil
}

// once counts a row of table under key the first time it is written.
func (s *Saved) once(table, key string) {
	if !s.seen[key] {
		s.seen[key] = true
		s.Rows[table]++
	}
}

func sortedKeys(m map[string]bool) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
