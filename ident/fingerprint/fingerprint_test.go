package fingerprint_test

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
	"nullseek/ident/internal/obstest"
	"nullseek/internal/testtool"
	"os/exec"
	"slices"
	"strings"
	"testing"
)

// TestClusterTransmittersSynthetic: beacons whose offsets differ by tens to
// hundreds of Hz (common practice: cheap crystals, tens of ppm at 144 MHz),
// with a few Hz of measurement jitter and slow drift, are separated; two with
// nearly the same offset are told apart by tone; unreadable IDs are
// attributed from the cluster.
func TestClusterTransmittersSynthetic(t *testing.T) {
	txs := []obstest.SimTx{
		{ID: "N0CALL/1", OffsetHz: -180, DriftHzCyc: 0.4, ToneHz: 800, UnreadableK: []int{3}},
		{ID: "N0CALL/2", OffsetHz: 40, DriftHzCyc: -0.6, ToneHz: 800},
		{ID: "N0CALL/3", OffsetHz: 48, ToneHz: 1020, UnreadableK: []int{0, 5}},
		// Keyed carrier warming up: 4 Hz a cycle, 44 Hz over the recording —
		// more than OffsetTolHz, followed by single linkage's chaining.
		{ID: "N0CALL/4", OffsetHz: 260, DriftHzCyc: 4.0, ToneHz: 0},
		{ID: "N0CALL/5", OffsetHz: 120, ToneHz: 650},
	}
	seeds := 40
	if testing.Short() {
		seeds = 8
	}
	for seed := 1; seed <= seeds; seed++ {
		rng := rand.New(rand.NewPCG(uint64(seed), 3))
		obs, truth := obstest.Simulate(txs, 12, 3, 2, rng)
		res, err := fingerprint.Cluster(obs, fingerprint.Options{})
		if err != nil {
			t.Fatal(err)
		}
		if !obstest.SamePartition(res.Labels, truth) {
			t.Fatalf("seed %d: partition %v differs from truth %v", seed, res.Labels, truth)
		}
		if len(res.Clusters) != len(txs) {
			t.Fatalf("seed %d: %d clusters, want %d", seed, len(res.Clusters), len(txs))
		}
		for n, c := range res.Clusters {
			// Labels in order of first appearance: truth index order here.
			if c.Label != fmt.Sprintf("T%d", n+1) || c.Ident != txs[n].ID {
				t.Errorf("seed %d: cluster %d is %s/%s, want T%d/%s", seed, n, c.Label, c.Ident, n+1, txs[n].ID)
			}
			if math.Abs(c.OffsetHz-(txs[n].OffsetHz+5.5*txs[n].DriftHzCyc)) > 5+2*math.Abs(txs[n].DriftHzCyc) {
				t.Errorf("seed %d: %s offset %.1f Hz", seed, c.Label, c.OffsetHz)
			}
		}
		for i, o := range obs {
			want := txs[truth[i]].ID
			if res.Idents[i] != want {
				t.Errorf("seed %d burst %d: attributed %q, want %q", seed, i, res.Idents[i], want)
			}
			if o.Ident == idmatch.Unknown && !strings.Contains(res.Notes[i], "attributed "+want) {
				t.Errorf("seed %d burst %d: note %q", seed, i, res.Notes[i])
			}
			if o.Ident != idmatch.Unknown && res.Notes[i] != "" {
				t.Errorf("seed %d burst %d: unexpected note %q", seed, i, res.Notes[i])
			}
		}
		if len(res.Flags) != 0 {
			t.Errorf("seed %d: flags %v on a clean event", seed, res.Flags)
		}
	}
}

func TestClusterTransmittersFlags(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	t.Run("shared_ident", func(t *testing.T) {
		// Two transmitters with different crystals both programmed N0CALL/1.
		obs, _ := obstest.Simulate([]obstest.SimTx{
			{ID: "N0CALL/1", OffsetHz: -90, ToneHz: 800},
			{ID: "N0CALL/2", OffsetHz: 60, ToneHz: 800},
			{ID: "N0CALL/1", OffsetHz: 210, ToneHz: 800},
		}, 5, 3, 2, rng)
		res, err := fingerprint.Cluster(obs, fingerprint.Options{})
		if err != nil {
			t.Fatal(err)
		}
		if len(res.Flags) != 1 || res.Flags[0].Kind != fingerprint.FlagSharedIdent ||
			!slices.Equal(res.Flags[0].Labels, []string{"T1", "T3"}) || !slices.Equal(res.Flags[0].Idents, []string{"N0CALL/1"}) {
			t.Fatalf("flags %+v", res.Flags)
		}
	})
	t.Run("mixed_ident", func(t *testing.T) {
		// One fingerprint sending N0CALL/2 for three cycles, then N0CALL/4.
		obs, _ := obstest.Simulate([]obstest.SimTx{{ID: "N0CALL/2", OffsetHz: 10, ToneHz: 900}}, 6, 3, 2, rng)
		for i := 3; i < 6; i++ {
			obs[i].Ident, obs[i].IdentConfidence = "N0CALL/4", 0.95
		}
		obs[0].IdentConfidence = 0.95
		res, err := fingerprint.Cluster(obs, fingerprint.Options{})
		if err != nil {
			t.Fatal(err)
		}
		if len(res.Clusters) != 1 || len(res.Flags) != 1 || res.Flags[0].Kind != fingerprint.FlagMixedIdent ||
			!slices.Equal(res.Flags[0].Idents, []string{"N0CALL/2", "N0CALL/4"}) {
			t.Fatalf("clusters %d, flags %+v", len(res.Clusters), res.Flags)
		}
		for i := 3; i < 6; i++ {
			if res.Idents[i] != "N0CALL/4" {
				t.Errorf("burst %d lost its own confident ID: %q", i, res.Idents[i])
			}
		}
	})
	t.Run("low_confidence_minority_not_flagged", func(t *testing.T) {
		obs, _ := obstest.Simulate([]obstest.SimTx{{ID: "N0CALL/2", OffsetHz: 10, ToneHz: 900}}, 6, 3, 2, rng)
		obs[2].Ident, obs[2].IdentConfidence = "N0CALL/3", 0.3 // misread
		res, err := fingerprint.Cluster(obs, fingerprint.Options{})
		if err != nil {
			t.Fatal(err)
		}
		if len(res.Flags) != 0 || res.Clusters[0].Ident != "N0CALL/2" {
			t.Fatalf("flags %+v, ident %s", res.Flags, res.Clusters[0].Ident)
		}
	})
}

// TestClusterTransmittersSpreadEstimate: the tolerance widening uses a robust
// jitter estimate; on bursts with 12 Hz Gaussian jitter the widened offset
// tolerance is SpreadFactor·σ within 25 % (σ of Gaussian samples, common
// practice: 1.4826·MAD of successive differences / √2).
func TestClusterTransmittersSpreadEstimate(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	obs, truth := obstest.Simulate([]obstest.SimTx{
		{ID: "N0CALL/1", OffsetHz: -300, ToneHz: 800},
		{ID: "N0CALL/2", OffsetHz: 0, ToneHz: 800},
		{ID: "N0CALL/3", OffsetHz: 300, ToneHz: 800},
	}, 60, 12, 2, rng)
	res, err := fingerprint.Cluster(obs, fingerprint.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(res.OffsetTolHz-48)/48 > 0.25 {
		t.Errorf("offset tolerance %.1f Hz, want ≈ 4·12 = 48 Hz", res.OffsetTolHz)
	}
	if res.ToneTolHz != 15 {
		t.Errorf("tone tolerance %.1f Hz widened although the jitter is 2 Hz", res.ToneTolHz)
	}
	if !obstest.SamePartition(res.Labels, truth) {
		t.Errorf("partition differs from truth")
	}
}

// TestClusterTransmittersAgainstScipy: with widening off, the partition is
// the single-linkage dendrogram cut at normalised distance 1, as computed by
// scipy.cluster.hierarchy.linkage(method="single") + fcluster(t=1,
// criterion="distance") (Debian python3-scipy 1.10.1) on random fingerprints.
func TestClusterTransmittersAgainstScipy(t *testing.T) {
	py := testtool.Python(t, "scipy.cluster.hierarchy")
	rng := rand.New(rand.NewPCG(21, 2))
	type caseIn struct {
		X [][2]float64 `json:"x"`
	}
	var cases []caseIn
	var inputs [][]fingerprint.Observation
	for range 30 {
		n := 5 + rng.IntN(60)
		var obs []fingerprint.Observation
		var c caseIn
		tones := []float64{600, 640, 800, 1000}
		for i := range n {
			o := fingerprint.Observation{Index: i, StartS: float64(i), EndS: float64(i) + 1,
				OffsetHz: rng.Float64()*600 - 300, ToneHz: tones[rng.IntN(len(tones))] + rng.NormFloat64()*5}
			obs = append(obs, o)
			c.X = append(c.X, [2]float64{o.OffsetHz / 30, o.ToneHz / 15})
		}
		cases = append(cases, c)
		inputs = append(inputs, obs)
	}
	in, _ := json.Marshal(cases)
	script := `
import json, sys
from scipy.cluster.hierarchy import linkage, fcluster
out = []
for c in json.load(sys.stdin):
    z = linkage(c["x"], method="single", metric="euclidean")
    out.append([int(v) for v in fcluster(z, t=1.0, criterion="distance")])
json.dump(out, sys.stdout)
`
	cmd := exec.Command(py, "-c", script)
	cmd.Stdin = strings.NewReader(string(in))
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("scipy single linkage failed: %v", err)
	}
	var want [][]int
	if err := json.Unmarshal(out, &want); err != nil {
		t.Fatalf("parse scipy output: %v", err)
	}
	for i, obs := range inputs {
		res, err := fingerprint.Cluster(obs, fingerprint.Options{OffsetTolHz: 30, ToneTolHz: 15, SpreadFactor: -1})
		if err != nil {
			t.Fatal(err)
		}
		if !obstest.SamePartition(res.Labels, want[i]) {
			t.Errorf("case %d: partition %v, scipy %v", i, res.Labels, want[i])
		}
	}
}

func TestClusterTransmittersErrors(t *testing.T) {
	good := fingerprint.Observation{StartS: 1, EndS: 2, OffsetHz: 10, ToneHz: 800}
	for _, tc := range []struct {
		name string
		obs  []fingerprint.Observation
		want string
	}{
		{"empty", nil, "no bursts"},
		{"nan_offset", []fingerprint.Observation{good, {StartS: 3, EndS: 4, OffsetHz: math.NaN()}}, "carrier offset"},
		{"inf_tone", []fingerprint.Observation{good, {StartS: 3, EndS: 4, ToneHz: math.Inf(1)}}, "tone"},
		{"negative_tone", []fingerprint.Observation{{StartS: 3, EndS: 4, ToneHz: -5}}, "negative"},
		{"reversed", []fingerprint.Observation{{StartS: 5, EndS: 4}}, "before it starts"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := fingerprint.Cluster(tc.obs, fingerprint.Options{})
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want one mentioning %q", err, tc.want)
			}
		})
	}
}

func FuzzClusterTransmitters(f *testing.F) {
	f.Add([]byte{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12})
	f.Add(make([]byte, 64))
	f.Fuzz(func(t *testing.T, data []byte) {
		obs := obstest.FuzzObservations(data)
		res, err := fingerprint.Cluster(obs, fingerprint.Options{})
		if err != nil {
			return
		}
		if len(res.Labels) != len(obs) || len(res.Idents) != len(obs) {
			t.Fatalf("result not parallel to input")
		}
		// An edge burst (cut, split or carrying two carriers) that fits no
		// transmitter is left without a label and counted (Cluster's doc);
		// every other burst has one.
		empty := 0
		for i, l := range res.Labels {
			if l == "" {
				empty++
				if o := obs[i]; !o.CutStart && !o.CutEnd && !o.DoubleCarrier {
					t.Fatalf("burst %d is no edge burst and has no label", i)
				}
			}
		}
		if empty != res.Unattributed {
			t.Fatalf("%d bursts without a label, Unattributed %d", empty, res.Unattributed)
		}
	})
}

// TestClusterEdgeBursts: bursts cut by the recording, split from an
// overlap or carrying two carriers do not make transmitters of their own:
// one whose offset (measured on less, 50 Hz off) and level fit joins its
// transmitter; one that fits nothing but reads an ID joins the
// transmitter reading it, or makes its own when none does; a double burst
// that fits nothing is left unattributed.
func TestClusterEdgeBursts(t *testing.T) {
	var obs []fingerprint.Observation
	add := func(o fingerprint.Observation) int {
		o.Index, o.EndS = len(obs), o.StartS+10
		obs = append(obs, o)
		return len(obs) - 1
	}
	for k := 0; k < 4; k++ {
		add(fingerprint.Observation{StartS: float64(100 * k), OffsetHz: -1500, ToneHz: 800, LevelDB: -10, Ident: "N0CALL/1", IdentConfidence: 0.99})
		add(fingerprint.Observation{StartS: float64(100*k + 30), OffsetHz: 500, ToneHz: 700, LevelDB: -13, Ident: "N0CALL/2", IdentConfidence: 0.99})
	}
	cut := add(fingerprint.Observation{StartS: 0, OffsetHz: -1450, ToneHz: 805, LevelDB: -11, Ident: idmatch.Unknown, CutStart: true})
	byID := add(fingerprint.Observation{StartS: 400, OffsetHz: 900, ToneHz: 760, LevelDB: -30, Ident: "N0CALL/2", IdentConfidence: 0.95, CutEnd: true})
	own := add(fingerprint.Observation{StartS: 420, OffsetHz: 2500, ToneHz: 950, LevelDB: -5, Ident: "N0CALL/7", IdentConfidence: 0.95, CutEnd: true})
	lost := add(fingerprint.Observation{StartS: 440, OffsetHz: 2500, ToneHz: 950, LevelDB: -5, Ident: idmatch.Unknown, DoubleCarrier: true, CutStart: true, CutEnd: true})
	res, err := fingerprint.Cluster(obs, fingerprint.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if res.Labels[cut] != res.Labels[0] || res.Idents[cut] != "N0CALL/1" {
		t.Errorf("cut burst: %s/%s, want %s/N0CALL/1", res.Labels[cut], res.Idents[cut], res.Labels[0])
	}
	if res.Labels[byID] != res.Labels[1] {
		t.Errorf("cut burst reading N0CALL/2: %s, want %s", res.Labels[byID], res.Labels[1])
	}
	if res.Labels[own] == "" || res.Labels[own] == res.Labels[0] || res.Labels[own] == res.Labels[1] {
		t.Errorf("cut burst reading an ID no one else reads: %q", res.Labels[own])
	}
	if res.Labels[lost] != res.Labels[own] && res.Labels[lost] != "" {
		t.Errorf("double burst: %q", res.Labels[lost])
	}
	if len(res.Clusters) != 3 {
		t.Errorf("%d transmitters, want 3 (two whole, one heard only cut)", len(res.Clusters))
	}
	// Without the burst reading N0CALL/7, the double burst fits no one.
	res, err = fingerprint.Cluster(append(obs[:own:own], obs[lost]), fingerprint.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if l := res.Labels[len(res.Labels)-1]; l != "" || res.Unattributed != 1 {
		t.Errorf("lone double burst: label %q, %d unattributed; want none, 1", l, res.Unattributed)
	}
}
