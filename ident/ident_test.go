package ident

import (
	"errors"
	"math"
	"strings"
	"testing"

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
