// Package obstest makes the synthetic burst observations the fingerprint
// and schedule tests share. Only tests import it.
package obstest

import (
	"math"
	"math/rand/v2"
	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
	"slices"
)

// SimTx is a synthetic beacon: carrier offset (crystal tolerance), offset
// drift per cycle (temperature), tone pitch (0: keyed carrier) and ID.
type SimTx struct {
	ID          string
	OffsetHz    float64
	DriftHzCyc  float64
	ToneHz      float64
	UnreadableK []int // cycles whose ID could not be read
}

// Simulate renders cycles×transmitters bursts (300 s cycle, 60 s slots)
// with Gaussian offset and tone jitter; truth[i] is the transmitter index of
// obs[i].
func Simulate(txs []SimTx, cycles int, jitterHz, toneJitterHz float64, rng *rand.Rand) (obs []fingerprint.Observation, truth []int) {
	for k := 0; k < cycles; k++ {
		for n, tx := range txs {
			o := fingerprint.Observation{
				Index:           len(obs),
				StartS:          float64(k)*300 + float64(n)*60 + 1,
				OffsetHz:        tx.OffsetHz + float64(k)*tx.DriftHzCyc + rng.NormFloat64()*jitterHz,
				Ident:           tx.ID,
				IdentConfidence: 0.7 + 0.3*rng.Float64(),
			}
			o.EndS = o.StartS + 59
			if tx.ToneHz > 0 {
				o.ToneHz = tx.ToneHz + rng.NormFloat64()*toneJitterHz
			}
			if slices.Contains(tx.UnreadableK, k) {
				o.Ident, o.IdentConfidence = idmatch.Unknown, 0
			}
			obs = append(obs, o)
			truth = append(truth, n)
		}
	}
	return obs, truth
}

// SamePartition reports whether two labelings group the items the same way.
func SamePartition[A, B comparable](a []A, b []B) bool {
	if len(a) != len(b) {
		return false
	}
	ab, ba := map[A]B{}, map[B]A{}
	for i := range a {
		if v, ok := ab[a[i]]; ok && v != b[i] {
			return false
		}
		if v, ok := ba[b[i]]; ok && v != a[i] {
			return false
		}
		ab[a[i]], ba[b[i]] = b[i], a[i]
	}
	return true
}

// FuzzObservations turns fuzz bytes into observations: 6 bytes a burst
// (start step, length, offset, tone, ID, confidence), with a few
// special values (NaN, huge) reachable.
func FuzzObservations(data []byte) []fingerprint.Observation {
	var obs []fingerprint.Observation
	t := 0.0
	special := []float64{math.NaN(), math.Inf(1), -1e300, 1e300, 0, -0.5}
	for i := 0; i+6 <= len(data) && len(obs) < 300; i += 6 {
		b := data[i : i+6]
		step := float64(b[0]) * 3
		if b[0] == 255 {
			step = special[int(b[1])%len(special)]
		}
		t += step
		o := fingerprint.Observation{
			Index:           len(obs),
			StartS:          t,
			EndS:            t + float64(b[1]),
			OffsetHz:        float64(int8(b[2])) * 4,
			ToneHz:          float64(b[3]) * 8,
			Ident:           []string{"N0CALL/1", "N0CALL/2", "N0CALL/3", idmatch.Unknown, ""}[int(b[4])%5],
			IdentConfidence: float64(b[5]) / 200,
			DoubleCarrier:   b[5] == 7,
		}
		if b[2] == 0x80 {
			o.OffsetHz = special[int(b[3])%len(special)]
		}
		obs = append(obs, o)
	}
	return obs
}
