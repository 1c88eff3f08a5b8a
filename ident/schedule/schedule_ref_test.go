package schedule

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"nullseek/ident/fingerprint"
	"nullseek/internal/testtool"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"gonum.org/v1/gonum/stat"
)

// slotLSRef is one case of testdata/slots/ls_reference.json, written by
// testdata/slots/gen_ls_reference.py with scipy.stats.linregress (scipy
// 1.10.1) and numpy.polyfit (numpy 1.24.2).
type slotLSRef struct {
	Name              string    `json:"name"`
	K                 []int     `json:"k"`
	StartS            []float64 `json:"start_s"`
	Slope             float64   `json:"slope"`
	Intercept         float64   `json:"intercept"`
	SlopeStderr       float64   `json:"slope_stderr"`
	InterceptStderr   float64   `json:"intercept_stderr"`
	PolyfitSlope      float64   `json:"polyfit_slope"`
	PolyfitSlopeSigma float64   `json:"polyfit_slope_sigma"`
}

type slotLSFile struct {
	Numpy string      `json:"numpy"`
	Scipy string      `json:"scipy"`
	Cases []slotLSRef `json:"cases"`
}

func slotLoadLSRef(t *testing.T, path string) slotLSFile {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("read reference: %v", err)
	}
	var f slotLSFile
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatalf("parse %s: %v", path, err)
	}
	if len(f.Cases) == 0 {
		t.Fatalf("%s has no cases", path)
	}
	return f
}

func slotRelClose(got, want, rel float64) bool {
	return math.Abs(got-want) <= rel*math.Abs(want)
}

// TestSchedulePeriodFitAgainstScipy: the period, its standard error, the
// intercept and its standard error from Build (cycle numbers assigned
// by the schedule itself, including missed cycles) match
// scipy.stats.linregress 1.10.1 and numpy.polyfit(cov=True) 1.24.2 on the
// same synthetic start times (testdata/slots/ls_reference.json).
func TestSchedulePeriodFitAgainstScipy(t *testing.T) {
	ref := slotLoadLSRef(t, filepath.Join("..", "..", "testdata", "slots", "ls_reference.json"))
	for _, c := range ref.Cases {
		t.Run(c.Name, func(t *testing.T) {
			onS := c.Slope / 5
			var obs []fingerprint.Observation
			for i, s := range c.StartS {
				obs = append(obs, fingerprint.Observation{Index: i, StartS: s, EndS: s + onS, Ident: "X", IdentConfidence: 1})
			}
			plan, err := Build(obs, nil, Options{})
			if err != nil {
				t.Fatal(err)
			}
			tx := plan.Transmitter("X")
			if tx == nil {
				t.Fatal("transmitter X missing")
			}
			// scipy.stats.linregress slope and stderr (scipy 1.10.1).
			if !slotRelClose(tx.PeriodS, c.Slope, 1e-11) {
				t.Errorf("period %.9f s, scipy %.9f s", tx.PeriodS, c.Slope)
			}
			// linregress derives its standard errors from 1−r², which
			// cancels when r ≈ 1 (here 1−r² ~ 1e-10), so it is good to
			// ~1e-6 relative only; numpy.polyfit below is the tight check.
			if !slotRelClose(tx.PeriodSigmaS, c.SlopeStderr, 2e-5) {
				t.Errorf("period sigma %.9g s, scipy %.9g s", tx.PeriodSigmaS, c.SlopeStderr)
			}
			// numpy.polyfit(deg=1, cov=True) (numpy 1.24.2): covariance
			// (XᵀX)⁻¹·SSR/(n−2) through lstsq.
			if !slotRelClose(tx.PeriodSigmaS, c.PolyfitSlopeSigma, 1e-8) {
				t.Errorf("period sigma %.9g s, numpy.polyfit %.9g s", tx.PeriodSigmaS, c.PolyfitSlopeSigma)
			}
			// The fixture's first start is cycle 0.
			if math.Abs(tx.T0S-c.Intercept) > 1e-7 {
				t.Errorf("t0 %.9f s, scipy intercept %.9f s", tx.T0S, c.Intercept)
			}
			if !slotRelClose(math.Sqrt(tx.CovT0P[0][0]), c.InterceptStderr, 2e-5) { // scipy linregress, as above
				t.Errorf("t0 sigma %.9g s, scipy %.9g s", math.Sqrt(tx.CovT0P[0][0]), c.InterceptStderr)
			}
			if tx.FitBursts != len(c.K) || tx.Rejected != 0 {
				t.Errorf("fit used %d starts, rejected %d; want %d, 0", tx.FitBursts, tx.Rejected, len(c.K))
			}
		})
	}
}

// TestSlotLSReferenceReproducible re-runs the generator with Debian's python
// (scipy 1.10.1) and checks the committed reference matches what it prints.
func TestSlotLSReferenceReproducible(t *testing.T) {
	py := testtool.Python(t, "numpy, scipy.stats")
	script := filepath.Join("..", "..", "testdata", "slots", "gen_ls_reference.py")
	out, err := exec.Command(py, script).Output()
	if err != nil {
		t.Fatalf("running %s failed: %v", script, err)
	}
	var live slotLSFile
	if err := json.Unmarshal(out, &live); err != nil {
		t.Fatalf("parse generator output: %v", err)
	}
	ref := slotLoadLSRef(t, filepath.Join("..", "..", "testdata", "slots", "ls_reference.json"))
	if len(live.Cases) != len(ref.Cases) {
		t.Fatalf("generator gives %d cases, committed %d", len(live.Cases), len(ref.Cases))
	}
	for i, c := range ref.Cases {
		l := live.Cases[i]
		if l.Name != c.Name || len(l.StartS) != len(c.StartS) || !slotRelClose(l.Slope, c.Slope, 1e-12) ||
			!slotRelClose(l.SlopeStderr, c.SlopeStderr, 1e-6) {
			// linregress's stderr comes from sums that cancel: on the 1.5 s
			// telemetry case two machines' BLAS builds differ by 7e-8
			// relative, so 1e-6 is the reproducibility we can ask of it.
			t.Errorf("case %s: committed reference differs from the generator's output (numpy %s, scipy %s)", c.Name, live.Numpy, live.Scipy)
		}
	}
}

// TestSchedulePeriodFitAgainstGonum: on random start times generated here
// (random period, jitter, missed cycles), the fitted period and intercept
// equal gonum v0.17.0 stat.LinearRegression on the true cycle numbers.
func TestSchedulePeriodFitAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	for trial := range 200 {
		period := 0.5 + rng.Float64()*900
		jitter := period * 1e-4 * rng.Float64()
		n := 4 + rng.IntN(40)
		t0 := 1 + rng.Float64()*period
		var k, ts []float64
		var obs []fingerprint.Observation
		for c := 0; c < n; c++ {
			if c > 0 && c < n-1 && rng.Float64() < 0.2 {
				continue // missed burst
			}
			s := t0 + float64(c)*period + rng.NormFloat64()*jitter
			k = append(k, float64(c))
			ts = append(ts, s)
			obs = append(obs, fingerprint.Observation{Index: c, StartS: s, EndS: s + period*0.2, Ident: "X", IdentConfidence: 1})
		}
		if len(obs) < 3 {
			continue
		}
		plan, err := Build(obs, nil, Options{StartJitterS: max(jitter, 1e-6)})
		if err != nil {
			t.Fatalf("trial %d: %v", trial, err)
		}
		tx := plan.Transmitter("X")
		alpha, beta := stat.LinearRegression(k, ts, nil, false) // gonum v0.17.0
		if !slotRelClose(tx.PeriodS, beta, 1e-9) || math.Abs(tx.T0S-alpha) > 1e-6*period {
			t.Fatalf("trial %d (P=%.4f, n=%d): got P=%.9f t0=%.6f, gonum P=%.9f t0=%.6f (rejected %d)",
				trial, period, len(k), tx.PeriodS, tx.T0S, beta, alpha, tx.Rejected)
		}
	}
}
