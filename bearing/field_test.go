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
		Pattern    string `json:"pattern"`
		Reflection *struct {
			PhaseRad float64 `json:"phase_rad"`
		} `json:"reflection"`
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
	tr, join := makeLevelsLog(t, cond, trials, seed)
	return tr, join(0)
}

// makeLevelsLog is makeLevels that returns the join itself: join(lagS)
// reads the heading log as lagS seconds late (heading.Track.WithLag).
func makeLevelsLog(t testing.TB, cond string, trials int, seed int) (fieldTruth, func(lagS float64) []fieldTrial) {
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
	return tr, func(lagS float64) []fieldTrial { return joinLevels(tr, vals, track.WithLag(lagS), pats) }
}

// joinLevels joins the readings vals (make_levels.py's levels.f32) with
// the heading track, trial by trial.
func joinLevels(tr fieldTruth, vals []float32, track *heading.Track, pats map[string]Pattern) []fieldTrial {
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
	return out
}

// fieldStats summarises a condition's trials: answered, of those flagged,
// refused; the error and the share within 2σ over the answered trials.
type fieldStats struct {
	answered, flagged, refused int
	medianErr, maxErr          float64
	within2                    float64
	medianSigma                float64
	ests                       []Estimate
	errs                       []error
	absErr                     []float64
}

func (s fieldStats) String() string {
	return fmt.Sprintf("answered %3d (flagged %3d), refused %3d; |error| median %5.2f° max %6.2f°; within 2σ %3.0f%%; median σ %.2f°",
		s.answered, s.flagged, s.refused, s.medianErr, s.maxErr, 100*s.within2, s.medianSigma)
}

func summarise(trials []fieldTrial, fit func(ft fieldTrial) (Estimate, error)) fieldStats {
	var st fieldStats
	var in2 int
	var sig []float64
	for _, ft := range trials {
		est, err := fit(ft)
		st.ests = append(st.ests, est)
		st.errs = append(st.errs, err)
		if err != nil {
			st.refused++
			st.absErr = append(st.absErr, math.NaN())
			continue
		}
		st.answered++
		if len(est.Flags) > 0 {
			st.flagged++
		}
		e := math.Abs(circErr(est.BearingDeg, ft.truth, ft.pattern.Symmetry))
		st.absErr = append(st.absErr, e)
		sig = append(sig, est.SigmaDeg)
		if e <= 2*est.SigmaDeg {
			in2++
		}
	}
	var e []float64
	for _, x := range st.absErr {
		if !math.IsNaN(x) {
			e = append(e, x)
		}
	}
	if len(e) > 0 {
		st.medianErr = median(append([]float64(nil), e...))
		sort.Float64s(e)
		st.maxErr = e[len(e)-1]
		st.within2 = float64(in2) / float64(len(e))
		st.medianSigma = median(sig)
	}
	return st
}

// fieldFit is the fit survey.Bearings makes of one burst: thermal model
// with the noise floor known (0 dB in these tracks), default options.
func fieldFit(ft fieldTrial) (Estimate, error) {
	floor := 0.0
	return Fit(ft.pts, ft.pattern, FitOptions{NoiseFloorDB: &floor})
}

// TestFieldConditions is the Monte-Carlo calibration of the bearing and
// its sigma under field conditions, against level tracks made by GNU
// Radio 3.10 (testdata/bearing/make_levels.py: channels.fading_model, the
// sum-of-sinusoids flat fader after Zheng & Xiao, IEEE Comm. Letters 6(6),
// 2002; analog.noise_source_c; 8-bit quantisation with float_to_uchar;
// Morse keying per ITU-R M.1677-1 Annex 1 §2; a static reflection added
// coherently), each trial at a true bearing drawn uniformly, the patterns
// taking turns. Per condition it logs answered/flagged/refused, the
// median and largest error and the share of errors within 2σ, and asserts
// the project's goals (issue "bearings that hold up in the field"):
//
//   - fading over several turns (Rayleigh and Rician, 0.1–1 Hz): median
//     error ≤ 3°, |error| ≤ 2σ in ≥ 90% of the trials pooled;
//   - fading in one turn: answered and flagged, the sigma widened (its
//     coverage is reported: one pass cannot always tell fading from the
//     pattern);
//   - clean sweeps: no flag at all; keyed carriers: key-up readings left
//     out; heavy clipping: answered with a clipping flag, not refused for
//     coverage; partial sweeps covering the feature: answered with a flag
//     and the covered arc; missing it: refused; a reflection 6 dB down from
//     90° away: answered, flagged multipath, sigma wider; weak carriers
//     (0–6 dB): answered, sigma covering the truth.
func TestFieldConditions(t *testing.T) {
	type cond struct {
		name   string
		trials int
	}
	scale := 1
	if testing.Short() {
		scale = 3
	}
	n := func(k int) int { return max(6, k/scale) }
	run := func(c string, k int) ([]fieldTrial, fieldStats) {
		_, trials := makeLevels(t, c, n(k), 1)
		st := summarise(trials, fieldFit)
		t.Logf("%-20s %s", c, st)
		return trials, st
	}
	flagged := func(st fieldStats, f Flag) int {
		k := 0
		for i, e := range st.ests {
			if st.errs[i] == nil && e.HasFlag(f) {
				k++
			}
		}
		return k
	}

	// Clean sweeps: nothing is wrong, so nothing may be flagged.
	var cleanSigma float64
	for _, c := range []string{"clean", "clean-1turn"} {
		_, st := run(c, 18)
		if st.refused > 0 || st.flagged > 0 || st.maxErr > 0.5 || st.within2 < 0.85 {
			t.Errorf("%s: %v; want all answered, none flagged, errors under 0.5°, ≥ 85%% within 2σ", c, st)
		}
		for i, e := range st.ests {
			if st.errs[i] == nil && len(e.Warnings) > 0 {
				t.Errorf("%s trial %d: warnings %q on clean data", c, i, e.Warnings)
			}
		}
		if c == "clean" {
			cleanSigma = st.medianSigma
		}
	}

	// Fading over several turns: the goal.
	var pooled []float64
	var pooledIn, pooledN, pooledRef int
	for _, c := range []string{"fade-rayleigh-0.1", "fade-rayleigh-0.3", "fade-rayleigh-1", "fade-rician-0.1", "fade-rician-1"} {
		_, st := run(c, 30)
		pooledRef += st.refused
		for i, e := range st.absErr {
			if st.errs[i] != nil {
				continue
			}
			pooled = append(pooled, e)
			pooledN++
			if e <= 2*st.ests[i].SigmaDeg {
				pooledIn++
			}
		}
		if st.medianErr > 3 || st.within2 < 0.8 {
			t.Errorf("%s: %v; want median ≤ 3° and ≥ 80%% within 2σ in each condition", c, st)
		}
	}
	med := median(append([]float64(nil), pooled...))
	share := float64(pooledIn) / float64(max(pooledN, 1))
	t.Logf("%-20s answered %d, refused %d; |error| median %.2f°; within 2σ %.1f%%", "fading, pooled", pooledN, pooledRef, med, 100*share)
	if med > 3 || share < 0.9 || pooledRef > pooledN/20 {
		t.Errorf("fading over several turns: median %.2f°, %.1f%% within 2σ, %d refused of %d; want ≤ 3°, ≥ 90%%, ≤ 5%% refused", med, 100*share, pooledRef, pooledN+pooledRef)
	}

	// Fading in one turn: flagged, answered.
	for _, c := range []string{"fade1-rayleigh-0.1", "fade1-rayleigh-1", "fade1-rician-0.3"} {
		_, st := run(c, 18)
		if st.refused > st.answered/10 || st.flagged < st.answered*7/10 {
			t.Errorf("%s: %v; want ≥ 90%% answered and ≥ 70%% of those flagged", c, st)
		}
	}

	// Keyed carrier: the key-up gaps are left out, the bearing is clean.
	_, st := run("keyed", 18)
	if st.refused > 0 || st.medianErr > 0.5 || st.within2 < 0.8 {
		t.Errorf("keyed: %v; want all answered, median ≤ 0.5°, ≥ 80%% within 2σ", st)
	}
	for i, e := range st.ests {
		if st.errs[i] == nil && !(e.Usage.KeyUp > e.Usage.Readings/5) {
			t.Errorf("keyed trial %d: %s; want the key-up readings (about half) left out", i, e.Usage)
		}
	}

	// Heavy clipping: half the readings at the 8-bit rails.
	_, st = run("clip-heavy", 16)
	if st.refused > 0 || flagged(st, FlagClipping) != st.answered || st.within2 < 0.8 {
		t.Errorf("clip-heavy: %v; want all answered with a clipping flag, ≥ 80%% within 2σ", st)
	}
	for i, e := range st.ests {
		if st.errs[i] == nil && e.Usage.Clipped < e.Usage.Readings/4 {
			t.Errorf("clip-heavy trial %d: %s; the condition should clip about half the readings", i, e.Usage)
		}
	}

	// Partial sweeps (120–150°, back and forth).
	_, st = run("partial-cover", 18)
	if st.refused > 0 || flagged(st, FlagPartial) != st.answered || st.within2 < 0.8 {
		t.Errorf("partial-cover: %v; want all answered with a partial flag, ≥ 80%% within 2σ", st)
	}
	for i, e := range st.ests {
		if st.errs[i] == nil && (e.CoverageDeg > 200 || !strings.Contains(strings.Join(e.Warnings, ";"), "°–")) {
			t.Errorf("partial-cover trial %d: coverage %.0f°, warnings %q: want the covered arc stated", i, e.CoverageDeg, e.Warnings)
		}
	}
	_, st = run("partial-miss", 18)
	for i, e := range st.ests {
		if st.errs[i] == nil && !e.HasFlag(FlagPartial) {
			t.Errorf("partial-miss trial %d: answered %.1f° without a partial flag", i, e.BearingDeg)
		}
	}
	if st.answered > st.refused {
		t.Errorf("partial-miss: %v; a sweep that misses the feature should mostly be refused", st)
	}

	// A static reflection 6 dB down from 90° away.
	_, st = run("reflection", 18)
	if st.refused > 0 || flagged(st, FlagMultipath) < st.answered*9/10 || !(st.medianSigma > 3*cleanSigma) {
		t.Errorf("reflection: %v; want all answered, ≥ 90%% flagged multipath, sigma wider than clean (%.2f°)", st, cleanSigma)
	}
	// A coherent second path biases a single-site bearing by an amount no
	// fit can see in full (a loop's null moves by atan(a) with a perfect
	// depth when the paths are in phase); the sector jackknife bounds what
	// it can. Measured here: 61% within 2σ (44% before the jackknife).
	if st.within2 < 0.55 {
		t.Errorf("reflection: %v; want ≥ 55%% within 2σ", st)
	}

	// Weak carriers.
	for _, c := range []string{"weak-0", "weak-3", "weak-6"} {
		_, st := run(c, 18)
		if st.refused > 0 || st.within2 < 0.85 || st.medianErr > 1 {
			t.Errorf("%s: %v; want all answered, ≥ 85%% within 2σ, median ≤ 1°", c, st)
		}
	}
}

// TestFieldMagneticAndLate: heading logs that are magnetic, or late, from
// the same GNU Radio generator. A magnetic log converted with its
// declination (heading.Track.ToTrue) gives the true bearing; a log 0.4 s
// late on a back-and-forth sweep is found by EstimateLag as +0.4 s (the
// module's convention, package heading: positive when the log is late)
// and, applied to the track the readings are joined with
// (heading.Track.WithLag, as survey does), gives the bearing: the
// estimator and the applier agree.
func TestFieldMagneticAndLate(t *testing.T) {
	tr, trials := makeLevels(t, "magnetic", 9, 2)
	st := summarise(trials, fieldFit)
	t.Logf("%-20s %s", "magnetic", st)
	if st.refused > 0 || st.maxErr > 0.5 {
		t.Errorf("magnetic log, converted: %v", st)
	}
	// without the conversion the bearing is off by the declination
	for _, ft := range trials[:3] {
		raw := append([]Point(nil), ft.pts...)
		for i := range raw {
			raw[i].HeadingDeg = math.Mod(raw[i].HeadingDeg-tr.Settings.Declination+720, 360)
		}
		est, err := fieldFit(fieldTrial{pattern: ft.pattern, truth: ft.truth, pts: raw})
		if err != nil {
			t.Fatal(err)
		}
		// true = magnetic + declination (east positive), so the magnetic
		// bearing is the truth less the declination
		if d := circErr(est.BearingDeg, ft.truth-tr.Settings.Declination, ft.pattern.Symmetry); math.Abs(d) > 0.5 {
			t.Errorf("unconverted magnetic log: %.2f°, want the truth %.2f° less the declination %+.1f°", est.BearingDeg, ft.truth, tr.Settings.Declination)
		}
	}

	tr, join := makeLevelsLog(t, "backforth-late", 6, 3)
	trials = join(0)
	floor := 0.0
	for i, ft := range trials {
		lag, sig, err := EstimateLag(ft.pts, ft.pattern, LagOptions{Fit: FitOptions{NoiseFloorDB: &floor}})
		if err != nil {
			t.Errorf("trial %d (%s): %v", i, ft.kind, err)
			continue
		}
		want := tr.Settings.Lag // make_levels.py: the log is late by "lag" s
		est, err := fieldFit(join(lag)[i])
		if err != nil {
			t.Errorf("trial %d after removing the lag: %v", i, err)
			continue
		}
		e := circErr(est.BearingDeg, ft.truth, ft.pattern.Symmetry)
		t.Logf("backforth-late trial %d (%s): lag %.3f ± %.3f s (log late by %.1f s); bearing %.2f° ± %.2f°, error %+.2f°", i, ft.kind, lag, sig, tr.Settings.Lag, est.BearingDeg, est.SigmaDeg, e)
		if math.Abs(lag-want) > 4*sig+0.02 {
			t.Errorf("trial %d: lag %.3f ± %.3f s, want %.2f s", i, lag, sig, want)
		}
		if math.Abs(e) > 2*est.SigmaDeg+0.1 {
			t.Errorf("trial %d: after removing the lag %.2f° ± %.2f°, truth %.2f°", i, est.BearingDeg, est.SigmaDeg, ft.truth)
		}
	}
}
