package geo

import (
	"bytes"
	"math"
	"os/exec"
	"strconv"
	"strings"
	"testing"
)

// runToolRaw feeds text to a program and returns its whole standard output.
func runToolRaw(t *testing.T, in string, prog string, args ...string) string {
	t.Helper()
	cmd := exec.Command(prog, args...)
	cmd.Stdin = strings.NewReader(in)
	var out, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &stderr
	if err := cmd.Run(); err != nil {
		t.Fatalf("%s %v: %v (%s)", prog, args, err, stderr.String())
	}
	return out.String()
}

func parseFloats(t *testing.T, s string) []float64 {
	t.Helper()
	var r []float64
	for _, f := range strings.Fields(s) {
		v, err := strconv.ParseFloat(f, 64)
		if err != nil {
			t.Fatalf("parse %q: %v", s, err)
		}
		r = append(r, v)
	}
	return r
}

// angErr is |a − b| in degrees modulo 360.
func angErr(a, b float64) float64 { return math.Abs(math.Remainder(a-b, 360)) }
