package nn

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
)

// newRand returns the seeded generator used by the tests.
func newRand(seed uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, 0x5eed)) }

func randn(rng *rand.Rand, n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	return x
}

// numGrad returns the central finite-difference gradient of f at x
// (gonum diff/fd, step 6.055e-6 = cbrt(eps), truncation error O(step^2)).
// f may read x only during the call.
func numGrad(f func(x []float64) float64, x []float64) []float64 {
	g := make([]float64, len(x))
	fd.Gradient(g, f, x, &fd.Settings{Formula: fd.Central})
	return g
}

// closeTo reports whether got is within atol + rtol*|want| of want.
func closeTo(got, want, rtol, atol float64) bool {
	if math.IsNaN(got) || math.IsNaN(want) {
		return false
	}
	return math.Abs(got-want) <= atol+rtol*math.Abs(want)
}

func checkClose(t *testing.T, what string, got, want []float64, rtol, atol float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: got %d values, want %d", what, len(got), len(want))
	}
	bad := 0
	for i := range want {
		if !closeTo(got[i], want[i], rtol, atol) {
			if bad < 5 {
				t.Errorf("%s[%d]: got %.17g, want %.17g (diff %.3g)", what, i, got[i], want[i], got[i]-want[i])
			}
			bad++
		}
	}
	if bad > 5 {
		t.Errorf("%s: %d of %d values differ", what, bad, len(want))
	}
}

// wantPanic runs f and fails unless it panics with a message starting "nn: ".
func wantPanic(t *testing.T, name string, f func()) {
	t.Helper()
	defer func() {
		t.Helper()
		e := recover()
		if e == nil {
			t.Errorf("%s: no panic", name)
			return
		}
		s, ok := e.(string)
		if !ok || !strings.HasPrefix(s, "nn: ") {
			t.Errorf("%s: panic %v, want a string starting \"nn: \"", name, e)
		}
	}()
	f()
}

type fixtureVersions struct {
	Python, Torch, Numpy, Script string
}

func loadFixture(t *testing.T, name string, cases any) fixtureVersions {
	t.Helper()
	b, err := os.ReadFile("../testdata/nn/" + name)
	if err != nil {
		t.Fatal(err)
	}
	var f struct {
		Versions fixtureVersions
		Cases    json.RawMessage
	}
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	if err := json.Unmarshal(f.Cases, cases); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return f.Versions
}

func borderOf(t *testing.T, s string) Border {
	switch s {
	case "zero":
		return Zero
	case "circular":
		return Circular
	case "valid":
		return Valid
	}
	t.Fatalf("unknown border %q", s)
	return 0
}
