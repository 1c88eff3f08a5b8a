package ident

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"nullseek/ident/fingerprint"
	"nullseek/ident/idmatch"
	"nullseek/ident/morse"
)

// TestOptionsValidate: every field outside its documented range gets one
// error naming the flag; the defaults and the edges pass.
func TestOptionsValidate(t *testing.T) {
	for _, o := range []Options{
		{}, DefaultOptions(), {MinConfidence: 1}, {MinConfidence: 1e-9},
		{Mode: morse.ModeCW, IDs: []string{"N0CALL/1", "N0CALL/2"}},
	} {
		if err := o.Validate(); err != nil {
			t.Errorf("%+v: %v", o, err)
		}
	}
	many := make([]string, idmatch.MaxIDs+1)
	for i := range many {
		many[i] = "N0CALL/" + strings.Repeat("1", 1+i%20) + string(rune('A'+i/20%26)) + string(rune('A'+i/520))
	}
	for _, tc := range []struct {
		name string
		o    Options
		flag string
	}{
		{"confidence above 1", Options{MinConfidence: 7}, "--min-confidence"},
		{"negative confidence", Options{MinConfidence: -0.1}, "--min-confidence"},
		{"NaN confidence", Options{MinConfidence: math.NaN()}, "--min-confidence"},
		{"unknown mode", Options{Mode: morse.Mode(9)}, "--mode"},
		{"too many IDs", Options{IDs: many}, "--ids"},
		{"ID too long", Options{IDs: []string{strings.Repeat("N0CALL", 6)}}, "--ids"},
		{"duplicate IDs", Options{IDs: []string{"N0CALL/1", "n0call/1"}}, "--ids"},
	} {
		err := tc.o.Validate()
		if err == nil || !strings.HasPrefix(err.Error(), tc.flag) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: %v; want one line starting with %s", tc.name, err, tc.flag)
		}
		if _, nerr := New(tc.o); nerr == nil {
			t.Errorf("%s: New accepted what Validate refuses", tc.name)
		}
	}
	if err := (Options{MinConfidence: 2}).Validate(); !errors.Is(err, ErrBadOptions) {
		t.Errorf("want ErrBadOptions, got %v", err)
	}
	id, err := New(Options{})
	if err != nil || id.Options().MinConfidence != idmatch.DefaultMinConfidence {
		t.Errorf("zero options: %+v, %v; want the default minimum confidence", id.Options(), err)
	}
}

// TestNameDiscovery: without a list, the word that the bursts of one
// fingerprint repeat names the transmitter, each burst read once (a word
// read in one burst only names nothing), with the chance that one of its
// readings was right; with a list, listed IDs are counted heard or never
// heard.
func TestNameDiscovery(t *testing.T) {
	var obs []fingerprint.Observation
	var words [][]idmatch.Word
	for k := 0; k < 3; k++ {
		obs = append(obs, fingerprint.Observation{Index: k, StartS: float64(60 * k), EndS: float64(60*k + 10), OffsetHz: 300, ToneHz: 800, Ident: idmatch.Unknown})
		words = append(words, []idmatch.Word{{Text: "N0CALL/8", Confidence: 0.5}, {Text: "N0CALL/8", Confidence: 0.6}})
	}
	obs = append(obs, fingerprint.Observation{Index: 3, StartS: 200, EndS: 210, OffsetHz: -900, ToneHz: 650, Ident: idmatch.Unknown})
	words = append(words, []idmatch.Word{{Text: "QRV", Confidence: 0.9}})
	id, err := New(Options{})
	if err != nil {
		t.Fatal(err)
	}
	nm, err := id.Name(obs, words)
	if err != nil {
		t.Fatal(err)
	}
	want := 1 - 0.4*0.4*0.4 // the best reading of each burst: 0.6
	for i := 0; i < 3; i++ {
		a := nm.Bursts[i]
		if a.Ident != "N0CALL/8" || a.Method != "repeated-text" || math.Abs(a.Confidence-want) > 1e-9 {
			t.Errorf("burst %d: %+v, want N0CALL/8 by repeated text at %.3f", i, a, want)
		}
	}
	if a := nm.Bursts[3]; a.Ident != idmatch.Unknown {
		t.Errorf("a word read in one burst named it: %+v", a)
	}
	listed, _ := New(Options{IDs: []string{"N0CALL/1", "N0CALL/2"}})
	obs[0].Ident, obs[0].IdentConfidence = "N0CALL/2", 0.99
	nm, err = listed.Name(obs, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(nm.Heard, []string{"N0CALL/2"}) || !slices.Equal(nm.NotHeard, []string{"N0CALL/1"}) || nm.Listed[1].Bursts != 3 {
		t.Errorf("heard %v, never %v, listed %+v", nm.Heard, nm.NotHeard, nm.Listed)
	}
}
