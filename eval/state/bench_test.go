package state

import (
	"testing"
)

func benchSim(b testing.TB, neurons, repeats int) (*Sim, *Stats, []float64) {
	cfg := DefaultSim()
	cfg.Neurons, cfg.Repeats, cfg.Seed = neurons, repeats, 1
	s := Simulate(cfg)
	T := len(s.Cond)
	cov := &Covariates{Names: []string{"speed"}, T: T, K: 1, Values: s.Speed}
	train, _ := simSplit(s)
	sc, err := NewStandardizer(cov, train)
	if err != nil {
		b.Fatal(err)
	}
	z := make([]float64, T)
	sc.Apply(z, cov)
	st, err := NewStats(s.Y, neurons, z, 1, s.Cond, cfg.Conditions, train)
	if err != nil {
		b.Fatal(err)
	}
	return s, st, z
}

// BenchmarkNewStats: the one pass over the training trials (512 trials x
// 2,000 neurons, one covariate).
func BenchmarkNewStats(b *testing.B) {
	s, _, z := benchSim(b, 2000, 40)
	train, _ := simSplit(s)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := NewStats(s.Y, 2000, z, 1, s.Cond, 16, train); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkFitAffine: 2,000 neurons from condition sums.
func BenchmarkFitAffine(b *testing.B) {
	_, st, _ := benchSim(b, 2000, 40)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		FitAffine(st, st.Mean, 1e-3)
	}
}

// BenchmarkFitFree: 2,000 neurons, free tuning, joint steps.
func BenchmarkFitFree(b *testing.B) {
	_, st, _ := benchSim(b, 2000, 40)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		FitFree(st, st.Mean, FreeOptions{Tol: 1e-10})
	}
}

// BenchmarkCrossGain: 2,000 neurons, 640 trials.
func BenchmarkCrossGain(b *testing.B) {
	s, st0, _ := benchSim(b, 2000, 40)
	train, test := simSplit(s)
	half, _ := SplitHalves(neuronIDs(2000), 1)
	f := st0.Mean
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := CrossGain(s.Y, 2000, f, s.Cond, 16, train, test, half, CrossOptions{}); err != nil {
			b.Fatal(err)
		}
	}
}

// TestAllocs: Predict allocates nothing, and FitAffine's allocations do not
// grow with the number of neurons (the per-neuron loop allocates nothing).
func TestAllocs(t *testing.T) {
	s, st, z := benchSim(t, 50, 10)
	_, test := simSplit(s)
	p := FitAffine(st, st.Mean, 0)
	pred := make([]float64, len(test)*50)
	if a := testing.AllocsPerRun(20, func() { Predict(pred, p, st.Mean, z, s.Cond, test) }); a != 0 {
		t.Errorf("Predict: got %v allocations, want 0", a)
	}
	_, st2, _ := benchSim(t, 500, 10)
	a1 := testing.AllocsPerRun(5, func() { FitAffine(st, st.Mean, 0) })
	a2 := testing.AllocsPerRun(5, func() { FitAffine(st2, st2.Mean, 0) })
	if a1 != a2 {
		t.Errorf("FitAffine: got %v allocations for 50 neurons and %v for 500, want equal", a1, a2)
	}
}
