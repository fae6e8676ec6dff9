package state

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

// stateRef is testdata/state/state_ref.json, written by
// testdata/state/gen_state.py (numpy lstsq, scikit-learn LinearRegression,
// Ridge and r2_score, scipy least_squares).
type stateRef struct {
	T, N, B, K int
	Names      []string
	Y          []float64
	Cond       []int
	Cov        []float64
	Train      []int
	Test       []int
	F          []float64
	StdMean    []float64 `json:"std_mean"`
	StdScale   []float64 `json:"std_scale"`
	Affine     struct {
		Gain, Offset, Bias, Sse []float64
	}
	Ridge struct {
		Lambda                        float64
		Gain, Offset, Bias, Objective []float64
	}
	Heldout struct {
		R2Stim  []float64 `json:"r2_stim"`
		R2State []float64 `json:"r2_state"`
	}
	Eta2             []float64
	Alternating      refFree
	AlternatingRidge refFree `json:"alternating_ridge"`
	Population       struct {
		Half          []bool
		GainOnlyFromA []float64 `json:"gain_only_from_a"`
		FromA         []float64 `json:"from_a"`
		FromB         []float64 `json:"from_b"`
		R2Stim        []float64 `json:"r2_stim"`
		R2State       []float64 `json:"r2_state"`
	}
}

type refFree struct {
	F, Gain, Offset, Objective []float64
}

func loadStateRef(t *testing.T) *stateRef {
	t.Helper()
	b, err := os.ReadFile("../../testdata/state/state_ref.json")
	if err != nil {
		t.Fatal(err)
	}
	var r stateRef
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return &r
}

// refSetup builds the covariates, z-scores and training statistics of the
// reference recording.
func refSetup(t *testing.T, r *stateRef) (y []float32, cov *Covariates, sc *Standardizer, z []float64, st *Stats) {
	t.Helper()
	y = make([]float32, len(r.Y))
	for i, v := range r.Y {
		y[i] = float32(v)
	}
	cols := make([][]float64, r.K)
	for k := range cols {
		cols[k] = make([]float64, r.T)
		for tt := 0; tt < r.T; tt++ {
			cols[k][tt] = r.Cov[tt*r.K+k]
		}
	}
	cov, err := NewCovariates(r.Names, cols, r.T)
	if err != nil {
		t.Fatal(err)
	}
	sc, err = NewStandardizer(cov, r.Train)
	if err != nil {
		t.Fatal(err)
	}
	z = make([]float64, r.T*r.K)
	sc.Apply(z, cov)
	st, err = NewStats(y, r.N, z, r.K, r.Cond, r.B, r.Train)
	if err != nil {
		t.Fatal(err)
	}
	return y, cov, sc, z, st
}

func closeTo(got, want, rel, abs float64) bool {
	return math.Abs(got-want) <= abs+rel*math.Abs(want)
}

func checkSlice(t *testing.T, what string, got, want []float64, rel, abs float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: got %d values, want %d", what, len(got), len(want))
	}
	for i := range got {
		if !closeTo(got[i], want[i], rel, abs) {
			t.Errorf("%s[%d]: got %.12g want %.12g", what, i, got[i], want[i])
		}
	}
}

// TestAffineReference checks the standardisation, the fixed-tuning
// regression with and without ridge, the objective, the held-out scores and
// the condition share against the generator's numpy / scikit-learn values.
func TestAffineReference(t *testing.T) {
	r := loadStateRef(t)
	y, cov, sc, z, st := refSetup(t, r)
	checkSlice(t, "standardizer mean (numpy mean)", sc.Mean, r.StdMean, 1e-13, 0)
	checkSlice(t, "standardizer scale (numpy std ddof 0)", sc.Scale, r.StdScale, 1e-12, 0)

	p := FitAffine(st, r.F, 0)
	if f := p.Failed(); len(f) > 0 {
		t.Fatalf("neurons %v not fitted", f)
	}
	checkSlice(t, "gain (numpy lstsq)", p.Gain, r.Affine.Gain, 1e-9, 1e-11)
	checkSlice(t, "offset (numpy lstsq)", p.Offset, r.Affine.Offset, 1e-9, 1e-11)
	checkSlice(t, "bias (numpy lstsq)", p.Bias, r.Affine.Bias, 1e-9, 1e-11)
	J := make([]float64, r.N)
	Objective(J, st, r.F, p)
	checkSlice(t, "residual sum of squares (numpy)", J, r.Affine.Sse, 1e-10, 0)

	pr := FitAffine(st, r.F, r.Ridge.Lambda)
	checkSlice(t, "ridge gain (sklearn Ridge)", pr.Gain, r.Ridge.Gain, 1e-8, 1e-11)
	checkSlice(t, "ridge offset (sklearn Ridge)", pr.Offset, r.Ridge.Offset, 1e-8, 1e-11)
	checkSlice(t, "ridge bias (sklearn Ridge)", pr.Bias, r.Ridge.Bias, 1e-8, 1e-11)
	Objective(J, st, r.F, pr)
	checkSlice(t, "ridge objective (numpy)", J, r.Ridge.Objective, 1e-10, 0)

	pred := make([]float64, len(r.Test)*r.N)
	Predict(pred, p, r.F, z, r.Cond, r.Test)
	h := make([]HeldOut, r.N)
	ScoreHeldOut(h, y, r.N, r.Cond, r.Test, r.F, pred)
	for j := range h {
		if !closeTo(h[j].R2Stim, r.Heldout.R2Stim[j], 1e-10, 1e-12) || !closeTo(h[j].R2State, r.Heldout.R2State[j], 1e-9, 1e-11) {
			t.Errorf("neuron %d: got R2 stim %.12g state %.12g, want %.12g %.12g (sklearn r2_score)",
				j, h[j].R2Stim, h[j].R2State, r.Heldout.R2Stim[j], r.Heldout.R2State[j])
		}
	}

	eta := make([]float64, r.K)
	ConditionShare(eta, cov, r.Cond, r.B, r.Train)
	checkSlice(t, "condition share (numpy eta squared)", eta, r.Eta2, 1e-12, 1e-15)
}

// TestAlternatingReference checks the alternating fit with a free tuning
// against scipy's Levenberg-Marquardt solution of the joint problem.
func TestAlternatingReference(t *testing.T) {
	r := loadStateRef(t)
	_, _, _, _, st := refSetup(t, r)
	for _, tc := range []struct {
		name   string
		method Method
		ridge  float64
		want   refFree
	}{
		{"joint no ridge", Joint, 0, r.Alternating},
		{"joint ridge", Joint, r.Ridge.Lambda, r.AlternatingRidge},
		{"alternate no ridge", Alternate, 0, r.Alternating},
		{"alternate ridge", Alternate, r.Ridge.Lambda, r.AlternatingRidge},
	} {
		t.Run(tc.name, func(t *testing.T) {
			fit := FitFree(st, st.Mean, FreeOptions{Method: tc.method, Ridge: tc.ridge, Tol: 1e-15, MaxIter: 100000})
			if !fit.Converged() {
				t.Fatalf("not converged after %d rounds", fit.Rounds)
			}
			t.Logf("%d rounds", fit.Rounds)
			checkSlice(t, "tuning (scipy least_squares)", fit.F, tc.want.F, 1e-6, 1e-8)
			checkSlice(t, "gain (scipy least_squares)", fit.Params.Gain, tc.want.Gain, 1e-5, 1e-7)
			checkSlice(t, "offset (scipy least_squares)", fit.Params.Offset, tc.want.Offset, 1e-5, 1e-7)
			J := make([]float64, r.N)
			Objective(J, st, fit.F, fit.Params)
			checkSlice(t, "objective (scipy least_squares)", J, tc.want.Objective, 1e-9, 0)
		})
	}
}

// TestPopulationReference checks the per-trial shared terms and the
// cross-half scores against numpy lstsq and scikit-learn.
func TestPopulationReference(t *testing.T) {
	r := loadStateRef(t)
	y, _, _, _, st := refSetup(t, r)
	f := st.Mean
	w := make([]float64, r.B*r.N)
	if lo := Weights(w, st, f, WeightRate); len(lo) != 0 {
		t.Fatalf("left out %v", lo)
	}
	g := make([]float64, r.T)
	if err := PopulationState(g, y, r.N, f, r.Cond, r.Population.Half, w, false); err != nil {
		t.Fatal(err)
	}
	checkSlice(t, "gain from half A (numpy lstsq)", g, r.Population.GainOnlyFromA, 1e-10, 1e-12)
	res, err := CrossGain(y, r.N, f, r.Cond, r.B, r.Train, r.Test, r.Population.Half, CrossOptions{Additive: true})
	if err != nil {
		t.Fatal(err)
	}
	checkSlice(t, "gain and offset from half A (numpy lstsq)", res.FromA, r.Population.FromA, 1e-10, 1e-12)
	checkSlice(t, "gain and offset from half B (numpy lstsq)", res.FromB, r.Population.FromB, 1e-10, 1e-12)
	for j, h := range res.Scores {
		if !closeTo(h.R2Stim, r.Population.R2Stim[j], 1e-10, 1e-12) || !closeTo(h.R2State, r.Population.R2State[j], 1e-9, 1e-11) {
			t.Errorf("neuron %d: got R2 stim %.12g state %.12g, want %.12g %.12g (sklearn LinearRegression, r2_score)",
				j, h.R2Stim, h.R2State, r.Population.R2Stim[j], r.Population.R2State[j])
		}
	}
}
