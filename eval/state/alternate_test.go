package state

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// simTwo fits statistics for a simulation with two covariates: running
// speed and a "pupil" trace that follows speed loosely and has no effect.
func simTwo(t testing.TB, neurons int, seed uint64) (*Sim, *Stats) {
	t.Helper()
	cfg := DefaultSim()
	cfg.Neurons, cfg.Seed = neurons, seed
	s := Simulate(cfg)
	T := len(s.Cond)
	rng := rand.New(rand.NewPCG(seed, 99))
	pupil := make([]float64, T)
	for i := range pupil {
		pupil[i] = 2 + 0.02*s.Speed[i] + 0.3*rng.NormFloat64()
	}
	cov, err := NewCovariates([]string{"speed", "pupil"}, [][]float64{s.Speed, pupil}, T)
	if err != nil {
		t.Fatal(err)
	}
	train, _ := simSplit(s)
	sc, err := NewStandardizer(cov, train)
	if err != nil {
		t.Fatal(err)
	}
	z := make([]float64, 2*T)
	sc.Apply(z, cov)
	st, err := NewStats(s.Y, neurons, z, 2, s.Cond, cfg.Conditions, train)
	if err != nil {
		t.Fatal(err)
	}
	return s, st
}

// TestConditionTargets: for fixed state terms the objective differs from
// sum_b W_b (T_b - f_b)^2 by a constant, whatever the tuning [derived, see
// ConditionTargets]; with no state terms the targets are the condition
// means and the weights the trial counts (eval/methods.md §8).
func TestConditionTargets(t *testing.T) {
	_, st := simTwo(t, 5, 3)
	B, N, K := st.B, st.N, st.K
	p := newParams(N, K, true)
	rng := rand.New(rand.NewPCG(1, 2))
	for i := range p.Gain {
		p.Gain[i], p.Offset[i] = 0.2*rng.NormFloat64(), rng.NormFloat64()
	}
	for i := range p.Bias {
		p.Bias[i] = rng.NormFloat64()
	}
	tg, w := make([]float64, B*N), make([]float64, B*N)
	ConditionTargets(tg, w, st, p)
	J := make([]float64, N)
	rest := func(f []float64) []float64 {
		Objective(J, st, f, p)
		out := make([]float64, N)
		for j := range out {
			out[j] = J[j]
			for b := 0; b < B; b++ {
				d := tg[b*N+j] - f[b*N+j]
				out[j] -= w[b*N+j] * d * d
			}
		}
		return out
	}
	f1, f2 := make([]float64, B*N), make([]float64, B*N)
	for i := range f1 {
		f1[i], f2[i] = 10*rng.Float64(), -5+20*rng.Float64()
	}
	r1, r2 := rest(f1), rest(f2)
	for j := range r1 {
		if math.Abs(r1[j]-r2[j]) > 1e-9*math.Abs(r1[j]) {
			t.Errorf("neuron %d: objective minus the weighted target term is %v for one tuning and %v for another, want equal", j, r1[j], r2[j])
		}
	}
	ConditionTargets(tg, w, st, newParams(N, K, true))
	for i := range tg {
		if c := st.Count[i/N]; w[i] != c || math.Abs(tg[i]-st.Mean[i]) > 1e-12*math.Abs(st.Mean[i]) {
			t.Fatalf("row %d: got target %v weight %v, want the condition mean %v and count %v", i, tg[i], w[i], st.Mean[i], c)
		}
	}
}

// TestFreeMonotone: both methods of FitFree never raise the objective, reach
// the same optimum, and the joint step needs fewer rounds.
func TestFreeMonotone(t *testing.T) {
	_, st := simTwo(t, 60, 4)
	for _, ridge := range []float64{0, 1e-3} {
		t.Run(fmt.Sprint("ridge ", ridge), func(t *testing.T) {
			fits := map[Method]*FreeFit{}
			for _, m := range []Method{Joint, Alternate} {
				fit := FitFree(st, st.Mean, FreeOptions{Method: m, Ridge: ridge, Tol: 1e-13, MaxIter: 5000})
				if !fit.Converged() {
					t.Fatalf("method %d: not converged in %d rounds", m, fit.Rounds)
				}
				h := fit.History
				for i := 1; i < len(h); i++ {
					if h[i] > h[i-1]*(1+1e-13) {
						t.Errorf("method %d: objective rose from %.15g to %.15g at half-step %d", m, h[i-1], h[i], i)
					}
				}
				fits[m] = fit
			}
			j, a := fits[Joint], fits[Alternate]
			jo, ao := j.History[len(j.History)-1], a.History[len(a.History)-1]
			t.Logf("rounds: joint %d, alternating %d; objective %.10g vs %.10g (start %.10g)", j.Rounds, a.Rounds, jo, ao, j.History[0])
			if math.Abs(jo-ao) > 1e-9*jo {
				t.Errorf("got final objectives %.15g (joint) and %.15g (alternating), want equal", jo, ao)
			}
			if j.Rounds >= a.Rounds {
				t.Errorf("joint took %d rounds, alternating %d; want fewer", j.Rounds, a.Rounds)
			}
		})
	}
}
