package schedule

import (
	"cmp"
	"math"
	"math/rand/v2"
	"nullseek/ident/fingerprint"
	"nullseek/ident/internal/stats"
	"slices"
	"testing"
	"time"

	"gonum.org/v1/gonum/stat/distuv"
)

// slotSimTx is one transmitter of a synthetic shared-channel schedule:
// true first start, clock drift (period = nominal·(1 + drift·1e-6)) and
// on-time.
type slotSimTx struct {
	id       string
	phaseS   float64
	driftPPM float64
	onS      float64
}

type slotSimCase struct {
	name        string
	nominalS    float64
	txs         []slotSimTx
	cycles      int
	jitterS     float64
	missed      map[string][]int
	giveNominal bool
	start       time.Time
	// nearCollision names the pair (A>B) whose collision falls a few cycles
	// after the recording: its forecast must be within one cycle.
	nearCollision string
}

func (tx slotSimTx) periodS(nominalS float64) float64 { return nominalS * (1 + tx.driftPPM*1e-6) }

// slotSimulate renders the schedule as observations with Gaussian start and
// end jitter; it returns them and the recording's end (s).
func slotSimulate(c slotSimCase, rng *rand.Rand) ([]fingerprint.Observation, float64) {
	var obs []fingerprint.Observation
	endS := 0.0
	for _, tx := range c.txs {
		p := tx.periodS(c.nominalS)
		for k := 0; k < c.cycles; k++ {
			s := tx.phaseS + float64(k)*p
			endS = max(endS, s+tx.onS)
			if slices.Contains(c.missed[tx.id], k) {
				continue
			}
			o := fingerprint.Observation{
				StartS:          s + rng.NormFloat64()*c.jitterS,
				EndS:            s + tx.onS + rng.NormFloat64()*c.jitterS,
				Ident:           tx.id,
				IdentConfidence: 0.9,
			}
			obs = append(obs, o)
		}
	}
	slices.SortFunc(obs, func(a, b fingerprint.Observation) int { return cmp.Compare(a.StartS, b.StartS) })
	for i := range obs {
		obs[i].Index = i
		if !c.start.IsZero() {
			obs[i].Start = c.start.Add(time.Duration(obs[i].StartS * float64(time.Second)))
		}
	}
	return obs, endS + 2
}

// slotTruthOrder is the cyclic order by true phase, rotated to the first
// transmitter heard in the observations.
func slotTruthOrder(c slotSimCase, obs []fingerprint.Observation) []string {
	txs := slices.Clone(c.txs)
	slices.SortFunc(txs, func(a, b slotSimTx) int {
		return cmp.Compare(math.Mod(a.phaseS, c.nominalS), math.Mod(b.phaseS, c.nominalS))
	})
	var order []string
	for _, tx := range txs {
		order = append(order, tx.id)
	}
	i := slices.Index(order, obs[0].Ident)
	return append(order[i:], order[:i]...)
}

// slotTruthCollision is the analytic crossing of B's start with A's end for
// the true schedule, and, by stepping cycle by cycle, the start of B's first
// burst that actually overlaps A's (an independent check of the analytic
// value). ok is false when the gap is not closing.
func slotTruthCollision(c slotSimCase, a, b slotSimTx) (atS, firstOverlapS float64, ok bool) {
	pa, pb := a.periodS(c.nominalS), b.periodS(c.nominalS)
	if pa <= pb {
		return 0, 0, false
	}
	m := 0.0
	if b.phaseS < a.phaseS {
		m = 1
	}
	j := (b.phaseS + m*pb - a.phaseS - a.onS) / (pa - pb)
	atS = a.phaseS + j*pa + a.onS
	for k := 0.0; k < 1e7; k++ {
		as := a.phaseS + k*pa
		bs := b.phaseS + (k+m)*pb
		if bs < as+a.onS {
			return atS, bs, true
		}
	}
	return atS, math.NaN(), true
}

func slotFind(c slotSimCase, id string) slotSimTx {
	for _, tx := range c.txs {
		if tx.id == id {
			return tx
		}
	}
	panic("test case has no transmitter " + id)
}

var slotSimCases = []slotSimCase{
	{
		// ARDF convention (IARU R2 ARDF rules v1.0, 2016; common practice): 1 min on, 300 s
		// cycle; three transmitters with 40 s guard, five cycles, one burst missed.
		name: "three_tx_five_cycles_missed", nominalS: 300, cycles: 5, jitterS: 0.010, giveNominal: true,
		txs: []slotSimTx{
			{"N0CALL/1", 10, +40, 60}, {"N0CALL/2", 110, -25, 60}, {"N0CALL/3", 210, +80, 60},
		},
		missed: map[string][]int{"N0CALL/2": {2}},
		start:  time.Date(2025, 5, 17, 9, 0, 0, 0, time.UTC),
	},
	{
		// Same, nominal period not given: drift against the median.
		name: "three_tx_median_reference", nominalS: 300, cycles: 12, jitterS: 0.020,
		txs: []slotSimTx{
			{"N0CALL/1", 10, +40, 60}, {"N0CALL/2", 110, -25, 60}, {"N0CALL/3", 210, +80, 60},
		},
		missed: map[string][]int{"N0CALL/3": {4}},
	},
	{
		// Five transmitters back to back (55 s on, short guards), 20 cycles;
		// the 3>4 gap (0.9 s, closing 36 ms/cycle) closes ~5 cycles after
		// the recording.
		name: "five_tx_collision_soon", nominalS: 300, cycles: 20, jitterS: 0.010, giveNominal: true,
		txs: []slotSimTx{
			{"N0CALL/1", 5, +40, 55}, {"N0CALL/2", 61.5, -25, 55}, {"N0CALL/3", 121.5, +80, 55},
			{"N0CALL/4", 177.4, -40, 55}, {"N0CALL/5", 237.4, +10, 55},
		},
		missed:        map[string][]int{"N0CALL/3": {7}},
		start:         time.Date(2025, 5, 17, 9, 0, 0, 0, time.UTC),
		nearCollision: "N0CALL/3>N0CALL/4",
	},
	{
		// Four transmitters, 30 ms jitter, the first one's first burst
		// missed: the order must start with the second.
		name: "four_tx_30ms_first_missed", nominalS: 300, cycles: 20, jitterS: 0.030, giveNominal: true,
		txs: []slotSimTx{
			{"N0CALL/1", 3, +40, 60}, {"N0CALL/2", 78, -25, 60}, {"N0CALL/3", 153, +80, 60}, {"N0CALL/4", 228, -60, 60},
		},
		missed: map[string][]int{"N0CALL/1": {0}, "N0CALL/4": {9}},
	},
}

// TestScheduleSyntheticTruth checks Build on multi-transmitter
// schedules with known truth generated here: order exact, period within
// 0.05 %, drift within 30 ppm, gap within 0.1 s, predicted starts and
// collision times against the analytic truth.
func TestScheduleSyntheticTruth(t *testing.T) {
	seeds := 30
	if testing.Short() {
		seeds = 5
	}
	for _, c := range slotSimCases {
		t.Run(c.name, func(t *testing.T) {
			var maxPeriodRel, maxDrift, maxNextErr, maxCollCycles float64
			var driftErrs []float64
			within2Sigma, nDrift := 0, 0
			for seed := 1; seed <= seeds; seed++ {
				rng := rand.New(rand.NewPCG(uint64(seed), 99))
				obs, endS := slotSimulate(c, rng)
				opts := DefaultOptions()
				opts.CaptureEndS, opts.StartJitterS = endS, c.jitterS
				if c.giveNominal {
					opts.NominalPeriodS = c.nominalS
				}
				plan, err := Build(obs, nil, opts)
				if err != nil {
					t.Fatalf("seed %d: %v", seed, err)
				}
				want := slotTruthOrder(c, obs)
				if !slices.Equal(plan.Order, want) {
					t.Fatalf("seed %d: order %v, want %v", seed, plan.Order, want)
				}
				// Median of the true periods (for the median reference).
				var truePeriods []float64
				for _, tx := range c.txs {
					truePeriods = append(truePeriods, tx.periodS(c.nominalS))
				}
				for i, id := range plan.Order {
					truth := slotFind(c, id)
					got := plan.Transmitters[i]
					if got.ID != id {
						t.Fatalf("transmitters not in order: %s at %d", got.ID, i)
					}
					pTrue := truth.periodS(c.nominalS)
					rel := math.Abs(got.PeriodS-pTrue) / pTrue
					maxPeriodRel = max(maxPeriodRel, rel)
					if rel > 5e-4 {
						t.Errorf("seed %d %s: period %.5f s, truth %.5f s", seed, id, got.PeriodS, pTrue)
					}
					// Drift: against the nominal, or relative drift against
					// every other transmitter when the median is the reference.
					if c.giveNominal {
						e := got.DriftPPM - truth.driftPPM
						maxDrift = max(maxDrift, math.Abs(e))
						nDrift++
						if math.Abs(e) <= 2*got.DriftSigmaPPM {
							within2Sigma++
						}
						driftErrs = append(driftErrs, math.Abs(e))
						// Each draw within 4.5σ of the LS theory (σ_P = jitter/√Sxx).
						if lim := 4.5 * c.jitterS / math.Sqrt(slotSxx(c, id)) / c.nominalS * 1e6; math.Abs(e) > lim {
							t.Errorf("seed %d %s: drift %+.1f ppm, truth %+.1f ppm (limit %.1f ppm)", seed, id, got.DriftPPM, truth.driftPPM, lim)
						}
						if plan.DriftReference != "nominal 300 s" {
							t.Errorf("drift reference %q", plan.DriftReference)
						}
					} else {
						med := stats.Median(truePeriods)
						wantDrift := (pTrue - med) / med * 1e6
						if e := got.DriftPPM - wantDrift; math.Abs(e) > 30 {
							t.Errorf("seed %d %s: drift vs median %+.1f ppm, truth %+.1f ppm", seed, id, got.DriftPPM, wantDrift)
						}
						for _, o := range c.txs {
							if o.id == id {
								continue
							}
							po := o.periodS(c.nominalS)
							wantRel := (pTrue - po) / po * 1e6
							e := got.RelativeDriftPPM[o.id] - wantRel
							maxDrift = max(maxDrift, math.Abs(e))
							driftErrs = append(driftErrs, math.Abs(e))
							if math.Abs(e) > 30 {
								t.Errorf("seed %d %s vs %s: relative drift %+.1f ppm, truth %+.1f ppm", seed, id, o.id, got.RelativeDriftPPM[o.id], wantRel)
							}
						}
						if plan.DriftReference != "median of transmitters" {
							t.Errorf("drift reference %q", plan.DriftReference)
						}
					}
					if math.Abs(got.OnS-truth.onS) > 0.05 {
						t.Errorf("seed %d %s: on %.3f s, truth %.3f s", seed, id, got.OnS, truth.onS)
					}
					// Gap to the next transmitter, at the end of the recording.
					next := slotFind(c, plan.Order[(i+1)%len(plan.Order)])
					pn := next.periodS(c.nominalS)
					ja := math.Floor((endS - truth.phaseS) / pTrue)
					as := truth.phaseS + ja*pTrue
					bs := next.phaseS + math.Ceil((as-next.phaseS)/pn)*pn
					if wantGap := bs - as - truth.onS; math.Abs(got.GapS-wantGap) > 0.1 {
						t.Errorf("seed %d %s: gap %.3f s, truth %.3f s", seed, id, got.GapS, wantGap)
					}
					// Predicted starts against the true (noise-free) schedule.
					if len(got.NextOnS) != 3 {
						t.Fatalf("seed %d %s: %d predictions, want 3", seed, id, len(got.NextOnS))
					}
					k := math.Floor((endS-truth.phaseS)/pTrue) + 1
					for n, s := range got.NextOnS {
						ts := truth.phaseS + (k+float64(n))*pTrue
						err := math.Abs(s - ts)
						maxNextErr = max(maxNextErr, err)
						// The prediction error over its fitted σ follows Student's t
						// with n−2 degrees of freedom (0.9995 quantile).
						if err > slotTQuantile(got.FitBursts-2)*got.NextOnSigmaS[n]+1e-3 || err > 0.2 {
							t.Errorf("seed %d %s: next start %d at %.3f s ± %.3f, truth %.3f s", seed, id, n, s, got.NextOnSigmaS[n], ts)
						}
						if !c.start.IsZero() {
							if d := got.NextOn[n].Sub(c.start.Add(time.Duration(s * 1e9))); d.Abs() > time.Millisecond {
								t.Errorf("next on UTC off by %v", d)
							}
						}
					}
				}
				// Collisions: exactly the closing neighbour pairs.
				var wantPairs, gotPairs []string
				for i, id := range plan.Order {
					a, b := slotFind(c, id), slotFind(c, plan.Order[(i+1)%len(plan.Order)])
					at, firstS, ok := slotTruthCollision(c, a, b)
					if !ok {
						continue
					}
					pair := a.id + ">" + b.id
					wantPairs = append(wantPairs, pair)
					// The stepped first overlap confirms the analytic crossing.
					if !(firstS >= at-1e-6 && firstS < at+b.periodS(c.nominalS)) {
						t.Fatalf("truth inconsistent for %s: crossing %.1f s, first overlap %.1f s", pair, at, firstS)
					}
					for _, col := range plan.Collisions {
						if col.A != a.id || col.B != b.id {
							continue
						}
						errCycles := math.Abs(col.AtS-at) / c.nominalS
						// Closing rate P_A − P_B (linear in the fit, so its σ is
						// exact up to Student's t; the crossing time is not, far away).
						wantRate := a.periodS(c.nominalS) - b.periodS(c.nominalS)
						if math.Abs(col.ClosingSPerCycle-wantRate) > slotTQuantile(slotMinFit(plan, a.id, b.id)-2)*col.ClosingSigmaS {
							t.Errorf("seed %d %s: closing %.2f ms/cycle ± %.2f, truth %.2f", seed, pair, col.ClosingSPerCycle*1e3, col.ClosingSigmaS*1e3, wantRate*1e3)
						}
						if pair == c.nearCollision {
							maxCollCycles = max(maxCollCycles, errCycles)
							if errCycles > 1 {
								t.Errorf("seed %d %s: collision at %.1f s, truth %.1f s: %.2f cycles off", seed, pair, col.AtS, at, errCycles)
							}
							if col.Already || col.Cycles < 1 || !col.Significant {
								t.Errorf("seed %d %s: collision %+v should be a significant future one", seed, pair, col)
							}
							if !c.start.IsZero() && col.At.IsZero() {
								t.Errorf("collision without UTC time")
							}
						}
					}
				}
				for _, col := range plan.Collisions {
					gotPairs = append(gotPairs, col.A+">"+col.B)
				}
				slices.Sort(wantPairs)
				slices.Sort(gotPairs)
				if !slices.Equal(gotPairs, wantPairs) {
					t.Errorf("seed %d: collisions %v, want %v", seed, gotPairs, wantPairs)
				}
				if len(plan.Overlaps) != 0 {
					t.Errorf("seed %d: overlaps %v in a schedule without any", seed, plan.Overlaps)
				}
			}
			if nDrift > 0 && float64(within2Sigma) < 0.8*float64(nDrift) {
				t.Errorf("drift errors within 2σ for %d of %d: σ underestimated", within2Sigma, nDrift)
			}
			p95 := 0.0
			if len(driftErrs) > 0 {
				slices.Sort(driftErrs)
				p95 = driftErrs[int(0.95*float64(len(driftErrs)-1))]
				// Spec: drift within 30 ppm (95 % of draws; single draws are
				// bounded at 4.5σ above).
				if p95 > 30 {
					t.Errorf("95th percentile drift error %.1f ppm > 30 ppm", p95)
				}
			}
			t.Logf("%d seeds: max |period error| %.2g (relative), drift error max %.1f ppm / p95 %.1f ppm, max |next start error| %.1f ms, near collision max error %.2f cycles, drift within 2σ %d/%d",
				seeds, maxPeriodRel, maxDrift, p95, maxNextErr*1e3, maxCollCycles, within2Sigma, nDrift)
		})
	}
}

// slotSxx is Σ(k − k̄)² over the cycles a transmitter was heard in.
func slotSxx(c slotSimCase, id string) float64 {
	var k []float64
	for i := 0; i < c.cycles; i++ {
		if !slices.Contains(c.missed[id], i) {
			k = append(k, float64(i))
		}
	}
	mean := 0.0
	for _, v := range k {
		mean += v
	}
	mean /= float64(len(k))
	sxx := 0.0
	for _, v := range k {
		sxx += (v - mean) * (v - mean)
	}
	return sxx
}

func slotMinFit(p *Plan, a, b string) int {
	return min(p.Transmitter(a).FitBursts, p.Transmitter(b).FitBursts)
}

// slotTQuantile is the two-sided 0.999 (one-sided 0.9995) quantile of
// Student's t with df degrees of freedom, from gonum v0.17.0 distuv.
func slotTQuantile(df int) float64 {
	if df < 1 {
		return math.Inf(1)
	}
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(df)}.Quantile(0.9995)
}
