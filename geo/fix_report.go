package geo

import (
	"fmt"
	"math"
)

// Place fills the fix's Maidenhead locator (8 characters), its event-grid
// cell and the most probable cells (at most 10, none under 0.5 %) from the
// used bearings; sub is the number of samples per cell side for the
// probability map (see NewProbMap). A nil grid fills only the locator. A fix
// outside the grid gets GridCell "" and a warning.
func (f *Fix) Place(g *Grid, sub int) error {
	m, err := Maidenhead(f.Lat, f.Lon, 8)
	if err != nil {
		return fmt.Errorf("%s: maidenhead: %w", identName(f.Ident), err)
	}
	f.Maidenhead = m
	if g == nil {
		return nil
	}
	f.Grid = g
	label, _, _, ok := g.CellAt(f.Lat, f.Lon)
	f.GridCell = label
	if !ok {
		f.Warnings = append(f.Warnings, "the fix is outside the event grid")
	}
	used := 0
	for i := range f.Bearings {
		if f.Bearings[i].Used {
			used++
		}
	}
	pm, err := newProbMap(used, func(yield func(*LOP)) {
		for i := range f.Bearings {
			if f.Bearings[i].Used {
				yield(&f.Bearings[i].LOP)
			}
		}
	}, g, sub)
	if err != nil {
		return fmt.Errorf("%s: %w", identName(f.Ident), err)
	}
	f.Cells = pm.Top(10, 0.005)
	return nil
}

// BearingReport is one bearing in a FixReport.
type BearingReport struct {
	Station     string  `json:"station"`
	Lat         float64 `json:"lat"`
	Lon         float64 `json:"lon"`
	BearingDeg  float64 `json:"bearing_deg"`
	SigmaDeg    float64 `json:"sigma_deg"`
	ResidualDeg float64 `json:"residual_deg"`
	DistM       float64 `json:"dist_m"`
	Time        string  `json:"time,omitempty"`
	Row         int     `json:"row,omitempty"`
	Reason      string  `json:"reason,omitempty"`
}

// AmbiguityReport is one station's resolved 180° ambiguity in a FixReport.
type AmbiguityReport struct {
	Station   string   `json:"station"`
	TakenDeg  float64  `json:"taken_deg"`
	OtherDeg  float64  `json:"other_deg"`
	Flipped   bool     `json:"flipped"`
	DecidedBy []string `json:"decided_by"`
	// OtherFix is the best fix with this station's bearings the other way
	// round (null when that gives none).
	OtherFix *CandidateReport `json:"other_fix"`
}

// CandidateReport is a Candidate in a report.
type CandidateReport struct {
	Lat      float64 `json:"lat"`
	Lon      float64 `json:"lon"`
	Chi2     float64 `json:"chi2"`
	Rejected int     `json:"rejected"`
}

// FixReport is the machine-readable form of a Fix (the `fix --json` object).
// Field names are stable; fields may be added. Ellipse sizes are semi-axes
// (semi_major_m, semi_minor_m: centre to edge). cocked_hat_m and
// cocked_hat_area_m2 are left out when they were not computed.
type FixReport struct {
	Type            string            `json:"type"` // "fix"
	Ident           string            `json:"ident"`
	Lat             float64           `json:"lat"`
	Lon             float64           `json:"lon"`
	Ellipse         Ellipse           `json:"ellipse"`
	Ellipse1Sigma   Ellipse           `json:"ellipse_1sigma"`
	Maidenhead      string            `json:"maidenhead"`
	GridCell        string            `json:"grid_cell"`
	Cells           []CellProb        `json:"cells"`
	Used            []BearingReport   `json:"used"`
	Rejected        []BearingReport   `json:"rejected"`
	Grid            *GridSpec         `json:"grid"`
	Stations        int               `json:"stations"`
	CrossingDeg     float64           `json:"crossing_deg"`
	Ambiguities     []AmbiguityReport `json:"ambiguities,omitempty"`
	CockedHatM      *float64          `json:"cocked_hat_m,omitempty"`
	CockedHatAreaM2 *float64          `json:"cocked_hat_area_m2,omitempty"`
	Chi2            float64           `json:"chi2"`
	DOF             int               `json:"dof"`
	VarianceFactor  float64           `json:"variance_factor"`
	Warnings        []string          `json:"warnings"`
}

func round(x float64, digits int) float64 {
	p := math.Pow(10, float64(digits))
	return math.Round(x*p) / p
}

func roundEllipse(e Ellipse) Ellipse {
	return Ellipse{round(e.SemiMajorM, 2), round(e.SemiMinorM, 2), round(e.OrientationDeg, 2), round(e.Probability, 4)}
}

// Report converts the fix to its JSON form (lat/lon to 1e-7°, lengths to
// cm, angles to 0.01°).
func (f *Fix) Report() FixReport {
	r := FixReport{
		Type: "fix", Ident: f.Ident, Lat: round(f.Lat, 7), Lon: round(f.Lon, 7),
		Ellipse: roundEllipse(f.Ellipse), Ellipse1Sigma: roundEllipse(f.Ellipse1Sigma),
		Maidenhead: f.Maidenhead, GridCell: f.GridCell, Cells: append([]CellProb{}, f.Cells...),
		Used: []BearingReport{}, Rejected: []BearingReport{},
		Stations: f.Stations, CrossingDeg: round(f.CrossingDeg, 2),
		Chi2: round(f.Chi2, 3), DOF: f.DOF, VarianceFactor: round(f.VarianceFactor, 3),
		Warnings: append([]string{}, f.Warnings...),
	}
	if f.HasCockedHat {
		v := round(f.CockedHatM, 2)
		r.CockedHatM = &v
	}
	if f.HasCockedHatArea {
		v := round(f.CockedHatAreaM2, 1)
		r.CockedHatAreaM2 = &v
	}
	if f.Grid != nil {
		gs := f.Grid.Spec()
		r.Grid = &gs
	}
	for _, a := range f.Ambiguities {
		ar := AmbiguityReport{Station: a.Station, TakenDeg: round(a.TakenDeg, 2), OtherDeg: round(a.OtherDeg, 2), Flipped: a.Flipped,
			DecidedBy: append([]string{}, a.DecidedBy...)}
		if a.Other != nil {
			ar.OtherFix = &CandidateReport{Lat: round(a.Other.Lat, 7), Lon: round(a.Other.Lon, 7), Chi2: round(a.Other.Chi2, 3), Rejected: a.Other.Rejected}
		}
		r.Ambiguities = append(r.Ambiguities, ar)
	}
	for i := range r.Cells {
		r.Cells[i].Probability = round(r.Cells[i].Probability, 4)
	}
	for _, b := range f.Bearings {
		br := BearingReport{Station: b.Station, Lat: b.Lat, Lon: b.Lon, BearingDeg: round(b.BearingDeg, 3),
			SigmaDeg: b.SigmaDeg, ResidualDeg: round(b.ResidualDeg, 3), DistM: round(b.DistM, 1), Row: b.Row, Reason: b.Reason}
		if !b.Time.IsZero() {
			br.Time = b.Time.UTC().Format(BearingTimeLayout) // as the bearings files write it
		}
		if b.Used {
			r.Used = append(r.Used, br)
		} else {
			r.Rejected = append(r.Rejected, br)
		}
	}
	return r
}
