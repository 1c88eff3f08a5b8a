package schedule

import (
	"bytes"
	"encoding/json"
	"math/rand/v2"
	"strings"
	"testing"
	"time"
)

// ReadPlanJSON gives back the plan MarshalJSON wrote: marshalling the
// plan read back yields the same bytes (null for NaN included), and the
// UTC times are the builder's, with and without a known capture start.
func TestReadPlanJSONRoundTrip(t *testing.T) {
	eachStart(t, rand.New(rand.NewPCG(7, 11)), func(t *testing.T, _ time.Time, plan *Plan, want []byte) {
		back, err := ReadPlanJSON(bytes.NewReader(want))
		if err != nil {
			t.Fatal(err)
		}
		got, err := json.Marshal(back)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got, want) {
			t.Fatalf("round trip differs:\n got %s\nwant %s", got, want)
		}
		for i, tx := range plan.Transmitters {
			b := back.Transmitters[i]
			if len(b.NextOn) != len(tx.NextOn) {
				t.Fatalf("%s: %d next-on times, want %d", tx.ID, len(b.NextOn), len(tx.NextOn))
			}
			for k := range tx.NextOn {
				if d := b.NextOn[k].Sub(tx.NextOn[k]); d > 50*time.Microsecond || d < -50*time.Microsecond { // written to 0.1 ms
					t.Errorf("%s next_on[%d] = %v, want %v", tx.ID, k, b.NextOn[k], tx.NextOn[k])
				}
			}
		}
		for i, c := range plan.Collisions {
			if d := back.Collisions[i].At.Sub(c.At); d > 50*time.Microsecond || d < -50*time.Microsecond {
				t.Errorf("collision %d at %v, want %v", i, back.Collisions[i].At, c.At)
			}
		}
	})
}

// Input that is not a plan gets one error saying what is wrong.
func TestReadPlanJSONRefusals(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{``, "EOF"},
		{`{"type":"schedule","order":["A"]}`, `"transmitters"`},
		{`{"order":["A"],"transmitters":[{"ident":"A"}]}`, `"type":"schedule"`},
		{`{"type":"schedule","order":["A"],"transmitters":[{"ident":"B"}]}`, `"A" is in "order"`},
		{`{"type":"schedule","order":[],"transmitters":[{"ident":"B"}]}`, `names 0 transmitters`},
		{`{"type":"schedule","order":["A","A"],"transmitters":[{"ident":"A"},{"ident":"A"}]}`, `twice`},
		{`{"type":"schedule","order":[],"transmitters":[]} {}`, "more than one"},
		{`{"type":"schedule","order":[],"transmitters":[],"capture_start":"yesterday"}`, "capture_start"},
		{`{"type":"schedule","order":["A"],"transmitters":[{"ident":"A","period_s":"x"}]}`, "period_s"},
	} {
		_, err := ReadPlanJSON(strings.NewReader(c.in))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: error %v, want one containing %q", c.in, err, c.want)
		}
	}
}
