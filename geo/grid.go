package geo

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"nullseek/internal/angle"
	"strconv"
	"strings"
)

// Grid is an event map grid as a club prints it: square cells of CellM
// metres, columns lettered (A, B, …, Z, AA, AB, …) and rows numbered.
//
// Layout: the grid lies on the local tangent plane at its origin (fine for
// the few kilometres of an event map). "Up" on the printed map points at
// azimuth RotationDeg (clockwise from true north; 0 = north up). Columns run
// to the right (azimuth RotationDeg+90). Origin is the outer corner of the
// first cell (column FirstCol, row FirstRow). With RowsUp false (default)
// the origin is the TOP-left corner and rows count downward, like a street
// atlas; with RowsUp true the origin is the BOTTOM-left corner and rows
// count upward.
type Grid struct {
	OriginLat   float64 `json:"origin_lat"`
	OriginLon   float64 `json:"origin_lon"`
	CellM       float64 `json:"cell_m"`
	RotationDeg float64 `json:"rotation_deg"`
	FirstCol    int     `json:"-"` // 0 = "A"
	Cols        int     `json:"-"`
	FirstRow    int     `json:"-"` // label of the first row, usually 1
	Rows        int     `json:"-"`
	RowsUp      bool    `json:"-"`
	// Auto marks a grid made by AutoGrid rather than given by the user.
	Auto bool `json:"-"`
}

// ColumnLabel returns the letters of 0-based column index i: 0 → A, 25 → Z,
// 26 → AA, 27 → AB, 701 → ZZ, 702 → AAA ("" for i < 0).
func ColumnLabel(i int) string {
	if i < 0 {
		return ""
	}
	var b []byte
	for i++; i > 0; i = (i - 1) / 26 {
		b = append([]byte{byte('A' + (i-1)%26)}, b...)
	}
	return string(b)
}

// ColumnIndex is the inverse of ColumnLabel (case-insensitive); -1 when s
// is not letters.
func ColumnIndex(s string) int {
	s = strings.ToUpper(strings.TrimSpace(s))
	if s == "" || len(s) > 6 {
		return -1
	}
	n := 0
	for _, c := range s {
		if c < 'A' || c > 'Z' {
			return -1
		}
		n = n*26 + int(c-'A'+1)
	}
	return n - 1
}

// CellLabel is the label of 0-based cell (col, row), e.g. "F3".
func (g *Grid) CellLabel(col, row int) string {
	return ColumnLabel(g.FirstCol+col) + strconv.Itoa(g.FirstRow+row)
}

// axes returns unit vectors (east, north) of the column direction and of the
// row direction (increasing row index).
func (g *Grid) axes() (ce, cn, re, rn float64) {
	th := g.RotationDeg * deg
	ce, cn = math.Cos(th), -math.Sin(th) // right
	upE, upN := math.Sin(th), math.Cos(th)
	if g.RowsUp {
		return ce, cn, upE, upN
	}
	return ce, cn, -upE, -upN
}

// toGrid converts lat/lon to grid coordinates in cells (x along columns, y
// along rows, both 0 at the origin).
func (g *Grid) toGrid(lat, lon float64) (x, y float64) {
	e, n := ENU(g.OriginLat, g.OriginLon, lat, lon)
	ce, cn, re, rn := g.axes()
	return (e*ce + n*cn) / g.CellM, (e*re + n*rn) / g.CellM
}

// GridToENU converts grid coordinates (in cells) to east/north metres on the
// plane at the grid origin.
func (g *Grid) GridToENU(x, y float64) (e, n float64) {
	ce, cn, re, rn := g.axes()
	return g.CellM * (x*ce + y*re), g.CellM * (x*cn + y*rn)
}

// GridToLatLon converts grid coordinates (in cells) to latitude/longitude.
func (g *Grid) GridToLatLon(x, y float64) (lat, lon float64) {
	e, n := g.GridToENU(x, y)
	return FromENU(g.OriginLat, g.OriginLon, e, n)
}

// CellAt returns the cell holding a point: label and 0-based indices; ok is
// false (label "") when the point is outside the grid.
func (g *Grid) CellAt(lat, lon float64) (label string, col, row int, ok bool) {
	x, y := g.toGrid(lat, lon)
	col, row = int(math.Floor(x)), int(math.Floor(y))
	if col < 0 || row < 0 || col >= g.Cols || row >= g.Rows {
		return "", col, row, false
	}
	return g.CellLabel(col, row), col, row, true
}

// CellCenter returns the centre of 0-based cell (col, row).
func (g *Grid) CellCenter(col, row int) (lat, lon float64) {
	return g.GridToLatLon(float64(col)+0.5, float64(row)+0.5)
}

// Validate checks the grid's numbers.
func (g *Grid) Validate() error {
	switch {
	case !(g.OriginLat >= -89 && g.OriginLat <= 89):
		return fmt.Errorf("grid origin latitude %v is outside -89..89", g.OriginLat)
	case !(g.OriginLon >= -180 && g.OriginLon <= 180):
		return fmt.Errorf("grid origin longitude %v is outside -180..180", g.OriginLon)
	case !(g.CellM >= 1 && g.CellM <= 100e3):
		return fmt.Errorf("grid cell size %v m is outside 1..100000", g.CellM)
	case math.IsNaN(g.RotationDeg) || math.IsInf(g.RotationDeg, 0):
		return fmt.Errorf("grid rotation %v is not a number", g.RotationDeg)
	case g.Cols < 1 || g.Rows < 1 || float64(g.Cols)*float64(g.Rows) > 4_000_000:
		return fmt.Errorf("grid must have 1 or more columns and rows and at most 4e6 cells (have %d×%d)", g.Cols, g.Rows)
	case g.FirstCol < 0:
		return errors.New("grid first column must be a letter")
	case float64(g.Cols)*g.CellM > 500e3 || float64(g.Rows)*g.CellM > 500e3:
		return errors.New("grid is larger than 500 km: an event grid lives on a local plane")
	}
	return nil
}

// ParseGrid reads a grid from a one-line spec of space-separated key=value
// pairs, e.g. "origin=51.5,-0.12 cell=250 rotation=0 cols=A-L rows=1-9".
// Keys: origin=LAT,LON (required, the outer corner of the first cell),
// cell=METRES (required), rotation=DEG (default 0), cols=A-L or cols=12
// (default A-J), rows=1-9 or rows=9 (default 1-10), rowdir=down|up
// (default down: see Grid).
func ParseGrid(spec string) (*Grid, error) {
	g := &Grid{FirstRow: 1, Cols: 10, Rows: 10}
	seen := map[string]bool{}
	for _, tok := range strings.Fields(spec) {
		k, v, ok := strings.Cut(tok, "=")
		if !ok {
			return nil, fmt.Errorf("grid spec: %q is not key=value", tok)
		}
		k = strings.ToLower(k)
		seen[k] = true
		if err := g.set(k, v); err != nil {
			return nil, fmt.Errorf("grid spec %s: %w", k, err)
		}
	}
	if !seen["origin"] || !seen["cell"] {
		return nil, errors.New("grid spec needs at least origin=LAT,LON and cell=METRES")
	}
	return g, g.Validate()
}

func (g *Grid) set(k, v string) error {
	num := func(s string) (float64, error) {
		x, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
		if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
			return 0, fmt.Errorf("%q is not a number", s)
		}
		return x, nil
	}
	var err error
	switch k {
	case "origin":
		a, b, ok := strings.Cut(v, ",")
		if !ok {
			return fmt.Errorf("%q: want LAT,LON", v)
		}
		if g.OriginLat, err = num(a); err != nil {
			return err
		}
		g.OriginLon, err = num(b)
	case "cell":
		g.CellM, err = num(v)
	case "rotation":
		g.RotationDeg, err = num(v)
	case "cols":
		if a, b, ok := strings.Cut(v, "-"); ok {
			i, j := ColumnIndex(a), ColumnIndex(b)
			if i < 0 || j < i {
				return fmt.Errorf("%q: want letters like A-L", v)
			}
			g.FirstCol, g.Cols = i, j-i+1
		} else {
			n, e := strconv.Atoi(v)
			if e != nil || n < 1 {
				return fmt.Errorf("%q: want A-L or a count", v)
			}
			g.FirstCol, g.Cols = 0, n
		}
	case "rows":
		if a, b, ok := strings.Cut(v, "-"); ok {
			i, e1 := strconv.Atoi(a)
			j, e2 := strconv.Atoi(b)
			if e1 != nil || e2 != nil || j < i || i < 0 {
				return fmt.Errorf("%q: want numbers like 1-9", v)
			}
			g.FirstRow, g.Rows = i, j-i+1
		} else {
			n, e := strconv.Atoi(v)
			if e != nil || n < 1 {
				return fmt.Errorf("%q: want 1-9 or a count", v)
			}
			g.FirstRow, g.Rows = 1, n
		}
	case "rowdir":
		switch strings.ToLower(v) {
		case "down", "south":
			g.RowsUp = false
		case "up", "north":
			g.RowsUp = true
		default:
			return fmt.Errorf("%q: want down or up", v)
		}
	default:
		return fmt.Errorf("unknown key (known: origin, cell, rotation, cols, rows, rowdir)")
	}
	return err
}

// gridFile is the JSON form of a grid (ReadGridJSON ignores spec and
// automatic, which GridSpec writes).
type gridFile struct {
	Spec        string   `json:"spec,omitempty"`
	Automatic   bool     `json:"automatic,omitempty"`
	OriginLat   *float64 `json:"origin_lat"`
	OriginLon   *float64 `json:"origin_lon"`
	CellM       *float64 `json:"cell_m"`
	RotationDeg float64  `json:"rotation_deg"`
	Cols        string   `json:"cols"`
	Rows        string   `json:"rows"`
	RowDir      string   `json:"row_direction"`
}

// ReadGridJSON reads a grid from JSON such as
// {"origin_lat":51.5,"origin_lon":-0.12,"cell_m":250,"rotation_deg":0,
// "cols":"A-L","rows":"1-9","row_direction":"down"}; the keys mean the same
// as in ParseGrid.
func ReadGridJSON(r io.Reader) (*Grid, error) {
	var f gridFile
	dec := json.NewDecoder(r)
	dec.DisallowUnknownFields()
	if err := dec.Decode(&f); err != nil {
		return nil, fmt.Errorf("grid JSON: %w", err)
	}
	// One object and nothing after it: a second object or stray text is a
	// damaged or concatenated file, not a grid to guess from.
	var extra json.RawMessage
	if err := dec.Decode(&extra); err != io.EOF {
		return nil, errors.New("grid JSON: more after the grid object: want one object and nothing else")
	}
	if f.OriginLat == nil || f.OriginLon == nil || f.CellM == nil {
		return nil, errors.New("grid JSON needs origin_lat, origin_lon and cell_m")
	}
	g := &Grid{OriginLat: *f.OriginLat, OriginLon: *f.OriginLon, CellM: *f.CellM, RotationDeg: f.RotationDeg, FirstRow: 1, Cols: 10, Rows: 10}
	for k, v := range map[string]string{"cols": f.Cols, "rows": f.Rows, "rowdir": f.RowDir} {
		if v == "" {
			continue
		}
		if err := g.set(k, v); err != nil {
			return nil, fmt.Errorf("grid JSON %s: %w", k, err)
		}
	}
	return g, g.Validate()
}

// GridSpec is a grid as written into the fix outputs: the keys of
// ReadGridJSON (so the object can be given back with --grid-file), the
// ParseGrid spec, and whether the grid was made automatically.
type GridSpec struct {
	Spec        string  `json:"spec"`
	Automatic   bool    `json:"automatic"`
	OriginLat   float64 `json:"origin_lat"`
	OriginLon   float64 `json:"origin_lon"`
	CellM       float64 `json:"cell_m"`
	RotationDeg float64 `json:"rotation_deg"`
	Cols        string  `json:"cols"`
	Rows        string  `json:"rows"`
	RowDir      string  `json:"row_direction"`
}

// Spec returns the grid's GridSpec.
func (g *Grid) Spec() GridSpec {
	dir := "down"
	if g.RowsUp {
		dir = "up"
	}
	return GridSpec{Spec: g.String(), Automatic: g.Auto, OriginLat: round(g.OriginLat, 7), OriginLon: round(g.OriginLon, 7),
		CellM: g.CellM, RotationDeg: g.RotationDeg, Cols: ColumnLabel(g.FirstCol) + "-" + ColumnLabel(g.FirstCol+g.Cols-1),
		Rows: fmt.Sprintf("%d-%d", g.FirstRow, g.FirstRow+g.Rows-1), RowDir: dir}
}

// String gives the grid back as a ParseGrid spec.
func (g *Grid) String() string {
	dir := "down"
	if g.RowsUp {
		dir = "up"
	}
	return fmt.Sprintf("origin=%s,%s cell=%g rotation=%g cols=%s-%s rows=%d-%d rowdir=%s",
		strconv.FormatFloat(round(g.OriginLat, 7), 'f', -1, 64), strconv.FormatFloat(round(g.OriginLon, 7), 'f', -1, 64), g.CellM, g.RotationDeg, ColumnLabel(g.FirstCol), ColumnLabel(g.FirstCol+g.Cols-1),
		g.FirstRow, g.FirstRow+g.Rows-1, dir)
}

// AutoGrid makes a north-up grid with a round cell size (1, 2, 2.5 or 5
// times a power of ten metres) that covers the given points with a margin
// of one cell, with about maxCells columns and rows (a few more at most;
// default 16 when maxCells < 2, at most 1000). It is used when the user
// gives no event grid. So that cell names stay the same from run to run
// while the points move a little, the grid is anchored on round
// coordinates: the origin (the top-left corner) is the nearest multiple, to
// the north-west, of a round step in degrees (1, 2 or 5 times a power of ten,
// at least one cell long), and only moves when the points cross such a
// line. It returns nil for no points.
func AutoGrid(lats, lons []float64, maxCells int) *Grid {
	if len(lats) == 0 || len(lats) != len(lons) {
		return nil
	}
	if maxCells < 2 {
		maxCells = 16
	}
	maxCells = min(maxCells, 1000)
	lat0, lon0 := lats[0], lons[0]
	minE, maxE, minN, maxN := 0.0, 0.0, 0.0, 0.0
	for i := range lats {
		e, n := ENU(lat0, lon0, lats[i], lons[i])
		minE, maxE = math.Min(minE, e), math.Max(maxE, e)
		minN, maxN = math.Min(minN, n), math.Max(maxN, n)
	}
	span := math.Max(math.Max(maxE-minE, maxN-minN), 100)
	cell := niceStep(span / float64(maxCells-2))
	// The extent's north-west corner, one cell out.
	nwLat, _ := FromENU(lat0, lon0, 0, maxN+cell)
	_, nwLon := FromENU(lat0, lon0, minE-cell, 0)
	for i := range lats { // the westmost point may lie north or south of lat0
		_, lo := FromENU(lats[i], lons[i], -cell, 0)
		if angle.Diff(nwLon, lo) < 0 {
			nwLon = lo
		}
	}
	const mPerDeg = 111_320.0
	q := niceDeg(cell / mPerDeg)
	olat := math.Min(math.Ceil(nwLat/q)*q, 89)
	olon := math.Floor(nwLon/q) * q
	if olon < -180 {
		olon = -180
	}
	g := &Grid{OriginLat: roundTo(olat, q), OriginLon: roundTo(olon, q), CellM: cell, FirstRow: 1, Auto: true}
	maxX, maxY := 0.0, 0.0
	for i := range lats {
		x, y := g.toGrid(lats[i], lons[i])
		maxX, maxY = math.Max(maxX, x), math.Max(maxY, y)
	}
	g.Cols = int(math.Ceil(maxX+1e-9)) + 1
	g.Rows = int(math.Ceil(maxY+1e-9)) + 1
	return g
}

// niceDeg rounds x (degrees) up to 1, 2 or 5 times a power of ten.
func niceDeg(x float64) float64 {
	p := math.Pow(10, math.Floor(math.Log10(x)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*p >= x*(1-1e-12) {
			return m * p
		}
	}
	return 10 * p
}

// roundTo removes the rounding noise of a multiple of q.
func roundTo(x, q float64) float64 {
	digits := math.Max(0, -math.Floor(math.Log10(q))+1)
	return round(x, int(digits))
}

// niceStep rounds x up to 1, 2, 2.5 or 5 times a power of ten.
func niceStep(x float64) float64 {
	p := math.Pow(10, math.Floor(math.Log10(x)))
	for _, m := range []float64{1, 2, 2.5, 5, 10} {
		if m*p >= x {
			return m * p
		}
	}
	return 10 * p
}
