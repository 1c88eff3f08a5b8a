package main

import (
	"encoding/json"
	"strings"
	"testing"
)

// TestScanJSONOneConvention: every line scan --json writes says its
// "type", and the summary names each transmitter's bursts by the same
// 1-based "index" the burst lines carry (steps96k, made by GNU Radio:
// testdata/bursts/make_bursts.py).
func TestScanJSONOneConvention(t *testing.T) {
	out, _, err := runCLI(t, "scan", stepsMeta, "--offset", stepsOffset, "--json")
	if err != nil {
		t.Fatal(err)
	}
	index := map[int]bool{}
	var summary struct {
		Type         string `json:"type"`
		Transmitters []struct {
			Label  string `json:"label"`
			Bursts []int  `json:"bursts"`
		} `json:"transmitters"`
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	for i, l := range lines {
		var v struct {
			Type  string `json:"type"`
			Index int    `json:"index"`
		}
		if err := json.Unmarshal([]byte(l), &v); err != nil {
			t.Fatalf("line %d: %v", i+1, err)
		}
		switch v.Type {
		case "burst":
			index[v.Index] = true
		case "summary":
			if i != len(lines)-1 {
				t.Errorf("the summary is line %d of %d, want the last", i+1, len(lines))
			}
			if err := json.Unmarshal([]byte(l), &summary); err != nil {
				t.Fatal(err)
			}
		default:
			t.Errorf("line %d has type %q", i+1, v.Type)
		}
	}
	if len(index) == 0 || len(summary.Transmitters) == 0 {
		t.Fatalf("%d bursts, %d transmitters:\n%s", len(index), len(summary.Transmitters), out)
	}
	n := 0
	for _, tx := range summary.Transmitters {
		for _, b := range tx.Bursts {
			n++
			if !index[b] {
				t.Errorf("%s names burst %d, which no burst line has", tx.Label, b)
			}
		}
	}
	if n != len(index) {
		t.Errorf("the transmitters name %d bursts, the burst lines are %d", n, len(index))
	}
}
