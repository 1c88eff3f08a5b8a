package bearing

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"nullseek/heading"
	"nullseek/internal/testtool"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"
)

// fieldTruth is truth.json of testdata/bearing/make_levels.py.
type fieldTruth struct {
	Condition string `json:"condition"`
	Settings  struct {
		SNR         float64 `json:"snr"`
		Beamwidth   float64 `json:"beamwidth"`
		FrontBack   float64 `json:"front_back"`
		LoopDepth   float64 `json:"loop_depth"`
		BodyDepth   float64 `json:"body_depth"`
		Declination float64 `json:"declination"`
		Lag         float64 `json:"lag"`
	} `json:"settings"`
	Trials []struct {
		Pattern      string  `json:"pattern"`
		BearingDeg   float64 `json:"bearing_deg"`
		StartS       float64 `json:"start_s"`
		EndS         float64 `json:"end_s"`
		ReadingFirst int     `json:"reading_first"`
		Readings     int     `json:"readings"`
		Profile      struct {
			Kind      string  `json:"kind"`
			CentreDeg float64 `json:"centre_deg"`
			ArcDeg    float64 `json:"arc_deg"`
		} `json:"profile"`
	} `json:"trials"`
}

// fieldTrial is one sweep of a make_levels.py condition, joined with the
// heading log.
type fieldTrial struct {
	pattern Pattern
	kind    string
	truth   float64
	pts     []Point
	keyDown []float64 // fraction of each reading's samples keyed on
}

// makeLevels runs testdata/bearing/make_levels.py (GNU Radio 3.10) for one
// condition into a temporary directory and joins its readings with its
// heading log through heading.ReadLog and Track.At, as survey.Points does.
func makeLevels(t testing.TB, cond string, trials int, seed int) (fieldTruth, []fieldTrial) {
	t.Helper()
	py := testtool.GNURadio(t)
	dir := t.TempDir()
	script := filepath.Join("..", "testdata", "bearing", "make_levels.py")
	cmd := exec.Command(py, script, "--condition", cond, "--trials", fmt.Sprint(trials), "--seed", fmt.Sprint(seed), "--out", dir)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("make_levels.py --condition %s: %v\n%s", cond, err, out)
	}
	var tr fieldTruth
	b, err := os.ReadFile(filepath.Join(dir, "truth.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &tr); err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(filepath.Join(dir, "levels.f32"))
	if err != nil {
		t.Fatal(err)
	}
	vals := make([]float32, len(raw)/4)
	if err := binary.Read(strings.NewReader(string(raw)), binary.LittleEndian, vals); err != nil {
		t.Fatal(err)
	}
	fh, err := os.Open(filepath.Join(dir, "headings.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	ref := heading.True
	if tr.Settings.Declination != 0 {
		ref = heading.Magnetic
	}
	track, err := heading.ReadLog(fh, time.Time{}, ref)
	if err != nil {
		t.Fatal(err)
	}
	if ref == heading.Magnetic {
		track = track.ToTrue(tr.Settings.Declination)
	}
	pats := map[string]Pattern{
		"loop": mustPattern(SmallLoop(tr.Settings.LoopDepth)),
		"yagi": mustPattern(Yagi(tr.Settings.Beamwidth, tr.Settings.FrontBack)),
		"body": mustPattern(BodyShield(tr.Settings.BodyDepth)),
	}
	var out []fieldTrial
	for _, x := range tr.Trials {
		ft := fieldTrial{pattern: pats[x.Pattern], kind: x.Pattern, truth: x.BearingDeg}
		for r := x.ReadingFirst; r < x.ReadingFirst+x.Readings; r++ {
			ts, lv, clip, kd := float64(vals[4*r]), float64(vals[4*r+1]), vals[4*r+2], float64(vals[4*r+3])
			h, ok := track.At(ts)
			if !ok {
				continue
			}
			ft.pts = append(ft.pts, Point{T: ts, HeadingDeg: h, LevelDB: lv, Clipped: clip > 0, KeyUp: kd < 0.999})
			ft.keyDown = append(ft.keyDown, kd)
		}
		out = append(out, ft)
	}
	return tr, out
}

// fieldStats summarises a condition's trials: answered without a flag,
// answered with one, refused; the error and the share within 2σ over
// the answered trials.
type fieldStats struct {
	answered, flagged, refused int
	medianErr, maxErr          float64
	within2                    float64
	errs                       []float64
}

func (s fieldStats) String() string {
	return fmt.Sprintf("answered %d (flagged %d), refused %d; |error| median %.2f° max %.2f°; within 2σ %.0f%%",
		s.answered, s.flagged, s.refused, s.medianErr, s.maxErr, 100*s.within2)
}

func summarise(t testing.TB, name string, trials []fieldTrial, fit func(ft fieldTrial) (Estimate, error)) fieldStats {
	var st fieldStats
	var in2 int
	for i, ft := range trials {
		est, err := fit(ft)
		if err != nil {
			st.refused++
			t.Logf("%s trial %d (%s, truth %.1f°): refused: %v", name, i, ft.kind, ft.truth, err)
			continue
		}
		st.answered++
		if len(est.Warnings) > 0 {
			st.flagged++
		}
		e := math.Abs(circErr(est.BearingDeg, ft.truth, ft.pattern.Symmetry))
		st.errs = append(st.errs, e)
		if e <= 2*est.SigmaDeg {
			in2++
		}
		if e > 3 || e > 2*est.SigmaDeg {
			t.Logf("%s trial %d (%s, truth %.1f°): %.2f° ± %.2f° (error %.2f°) %v", name, i, ft.kind, ft.truth, est.BearingDeg, est.SigmaDeg, e, est.Warnings)
		}
	}
	if len(st.errs) > 0 {
		s := append([]float64(nil), st.errs...)
		sort.Float64s(s)
		st.medianErr = s[len(s)/2]
		if len(s)%2 == 0 {
			st.medianErr = (s[len(s)/2-1] + s[len(s)/2]) / 2
		}
		st.maxErr = s[len(s)-1]
		st.within2 = float64(in2) / float64(len(s))
	}
	return st
}

func TestFieldExplore(t *testing.T) {
	for _, c := range strings.Split(os.Getenv("FIELD"), ",") {
		if c == "" {
			t.Skip("FIELD not set")
		}
		_, trials := makeLevels(t, c, 30, 1)
		floor := 0.0
		st := summarise(t, c, trials, func(ft fieldTrial) (Estimate, error) {
			return Fit(ft.pts, ft.pattern, FitOptions{NoiseFloorDB: &floor})
		})
		t.Logf("%s: %v", c, st)
	}
}
