package state

import (
	"fmt"
	"strings"
	"testing"
)

// TestSplitHalves: balanced halves that follow the ids, not the column
// order; bad ids are refused by neuron.
func TestSplitHalves(t *testing.T) {
	ids := neuronIDs(101)
	h, err := SplitHalves(ids, 5)
	if err != nil {
		t.Fatal(err)
	}
	a := 0
	for _, v := range h {
		if v {
			a++
		}
	}
	if a != 51 {
		t.Errorf("got %d neurons in half A, want 51 of 101", a)
	}
	// Reverse the columns: every id keeps its half.
	rev := make([]string, len(ids))
	for i, id := range ids {
		rev[len(ids)-1-i] = id
	}
	hr, err := SplitHalves(rev, 5)
	if err != nil {
		t.Fatal(err)
	}
	for i := range ids {
		if hr[len(ids)-1-i] != h[i] {
			t.Fatalf("id %s changes half when the columns are reversed", ids[i])
		}
	}
	h2, _ := SplitHalves(ids, 6)
	same := 0
	for i := range h {
		if h[i] == h2[i] {
			same++
		}
	}
	if same == len(h) {
		t.Error("seeds 5 and 6 give the same split")
	}
	for _, tc := range []struct {
		name string
		ids  []string
		want string
	}{
		{"empty", []string{"a", ""}, "neuron 1 (0-based) has an empty id"},
		{"repeated", []string{"a", "b", "a"}, `neurons 0 and 2 (0-based) share the id "a"`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if _, err := SplitHalves(tc.ids, 1); err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("got %v, want %q", err, tc.want)
			}
		})
	}
}

func TestPopulationStateErrors(t *testing.T) {
	// Two neurons, two conditions; condition 1 has zero tuning for both.
	y := []float32{1, 2, 3, 4}
	f := []float64{1, 2, 0, 0}
	w := []float64{1, 1, 1, 1}
	use := []bool{true, true}
	dst := make([]float64, 2)
	err := PopulationState(dst, y, 2, f, []int{0, 1}, use, w, false)
	if err == nil || !strings.Contains(err.Error(), "trial 1 (0-based)") {
		t.Errorf("gain only: got %v, want an error naming trial 1", err)
	}
	// Equal tuning values: gain and offset cannot be told apart.
	f = []float64{2, 2, 1, 3}
	dst = make([]float64, 4)
	err = PopulationState(dst, y, 2, f, []int{0, 1}, use, w, true)
	if err == nil || !strings.Contains(err.Error(), "trial 0 (0-based): gain and offset cannot be separated") {
		t.Errorf("with offset: got %v, want an error naming trial 0", err)
	}
}

// TestCrossGainNoLeak: changing one neuron's test responses leaves its own
// prediction unchanged (its state comes from the other half, its coupling
// from training trials) and changes the predictions of the other half.
func TestCrossGainNoLeak(t *testing.T) {
	for _, additive := range []bool{false, true} {
		t.Run(fmt.Sprint("additive ", additive), func(t *testing.T) {
			cfg := DefaultSim()
			cfg.Neurons, cfg.Seed = 40, 9
			s := Simulate(cfg)
			opt := CrossOptions{Additive: additive}
			r0, _, test := crossSim(t, s, opt)
			const j = 3
			for _, tt := range test {
				s.Y[tt*cfg.Neurons+j] += 5
			}
			r1, _, _ := crossSim(t, s, opt)
			N := cfg.Neurons
			otherChanged := false
			for i := range test {
				for n := 0; n < N; n++ {
					d := r1.Pred[i*N+n] != r0.Pred[i*N+n]
					switch {
					case n == j && d:
						t.Fatalf("neuron %d's own prediction changed with its test responses", j)
					case r0.Half[n] == r0.Half[j] && d:
						t.Fatalf("neuron %d (same half as %d) changed", n, j)
					case r0.Half[n] != r0.Half[j] && d:
						otherChanged = true
					}
				}
			}
			if !otherChanged {
				t.Error("the other half's predictions did not change; the shared state ignores neuron 3")
			}
		})
	}
}
