package state

import (
	"math"
	"testing"
)

// TestConfounded: a neuron whose tuning is flat has regressors z f and z
// that are proportional, so without a ridge its gain and offset cannot be
// told apart: status Confounded, NaN coefficients. A small ridge separates
// them; a neuron with zero tuning has an all-zero gain column and stays
// Confounded even then.
func TestConfounded(t *testing.T) {
	cfg := DefaultSim()
	cfg.Neurons, cfg.Seed = 3, 2
	s := Simulate(cfg)
	train, _ := simSplit(s)
	T, B := len(s.Cond), cfg.Conditions
	cov, _ := NewCovariates([]string{"speed"}, [][]float64{s.Speed}, T)
	sc, _ := NewStandardizer(cov, train)
	z := make([]float64, T)
	sc.Apply(z, cov)
	st, err := NewStats(s.Y, 3, z, 1, s.Cond, B, train)
	if err != nil {
		t.Fatal(err)
	}
	f := append([]float64(nil), st.Mean...)
	for b := 0; b < B; b++ {
		f[b*3+1] = 7 // neuron 1: flat tuning
		f[b*3+2] = 0 // neuron 2: zero tuning
	}
	for _, tc := range []struct {
		ridge float64
		want  []Status
	}{
		{0, []Status{Fitted, Confounded, Confounded}},
		{1e-3, []Status{Fitted, Fitted, Confounded}},
	} {
		p := FitAffine(st, f, tc.ridge)
		for n, w := range tc.want {
			if p.Status[n] != w {
				t.Errorf("ridge %v neuron %d: got status %v, want %v", tc.ridge, n, p.Status[n], w)
			}
			if nan := math.IsNaN(p.Gain[n]) && math.IsNaN(p.Offset[n]) && math.IsNaN(p.Bias[n]); nan != (w == Confounded) {
				t.Errorf("ridge %v neuron %d: got coefficients %v %v %v", tc.ridge, n, p.Gain[n], p.Offset[n], p.Bias[n])
			}
		}
	}
}
