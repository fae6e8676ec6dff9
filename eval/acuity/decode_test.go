package acuity

import (
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"testing"
)

// poisson draws a Poisson count with mean lam by inversion (small lam).
func poisson(rng *rand.Rand, lam float64) float64 {
	u := rng.Float64()
	p := math.Exp(-lam)
	k, c := 0.0, p
	for u > c && k < 1000 {
		k++
		p *= lam / k
		c += p
	}
	return k
}

// vmPop is a population of independent Poisson neurons with von Mises
// direction tuning f_i(s) = base + amp exp(kappa (cos(s - pref_i) - 1)), s in
// degrees, preferred directions evenly spaced.
type vmPop struct {
	n                int
	base, amp, kappa float64
	pref             []float64
}

func newVMPop(n int, base, amp, kappa float64) *vmPop {
	p := &vmPop{n: n, base: base, amp: amp, kappa: kappa, pref: make([]float64, n)}
	for i := range p.pref {
		p.pref[i] = 360 * (float64(i) + 0.5) / float64(n)
	}
	return p
}

func (p *vmPop) rate(i int, s float64) float64 {
	d := (s - p.pref[i]) * math.Pi / 180
	return p.base + p.amp*math.Exp(p.kappa*(math.Cos(d)-1))
}

// info returns the Fisher information of the independent Poisson population,
// sum_i f_i'(s)^2 / f_i(s) in 1/deg^2 (the standard result for independent
// Poisson neurons [pub: textbook; e.g. Dayan & Abbott 2001, ch. 3 [mem]]).
func (p *vmPop) info(s float64) float64 {
	I := 0.0
	for i := 0; i < p.n; i++ {
		d := (s - p.pref[i]) * math.Pi / 180
		e := p.amp * math.Exp(p.kappa*(math.Cos(d)-1))
		f := p.base + e
		fp := -e * p.kappa * math.Sin(d) * math.Pi / 180 // per degree
		I += fp * fp / f
	}
	return I
}

// TestPoissonDecoderCramerRao: the maximum-likelihood decoder (PoissonModel
// with the true tuning as predictions) on a fine grid has an error variance
// close to the Cramer-Rao bound 1/I (asymptotic efficiency of the maximum-
// likelihood estimate [pub: textbook statistics]).
//
// Tolerance: with M test trials the variance has relative s.e. about
// sqrt(2/M) (2.6% at M = 3000, 1.1% at 16000) for Gaussian errors; the
// grid (1 degree against an error sd near 4 degrees) adds 1/12 deg^2, 0.5%;
// the finite-information bias of the ML estimate is a few percent at this
// I. The short test allows 10%, the long one 5%.
func TestPoissonDecoderCramerRao(t *testing.T) {
	M, tol := 3000, 0.10
	if !testing.Short() {
		M, tol = 16000, 0.05
	}
	const B = 360
	pop := newVMPop(200, 0.5, 8, 2)
	ax := Conditions{Values: make([]float64, B), Period: 360}
	for b := range ax.Values {
		ax.Values[b] = float64(b)
	}
	pred := make([]float64, B*pop.n)
	for b := 0; b < B; b++ {
		for i := 0; i < pop.n; i++ {
			pred[b*pop.n+i] = pop.rate(i, ax.Values[b])
		}
	}
	rng := rand.New(rand.NewPCG(42, 1))
	y := make([]float32, M*pop.n)
	cond := make([]int, M)
	test := make([]int, M)
	crb := 0.0
	for t := 0; t < M; t++ {
		b := rng.IntN(B)
		cond[t], test[t] = b, t
		for i := 0; i < pop.n; i++ {
			y[t*pop.n+i] = float32(poisson(rng, pred[b*pop.n+i]))
		}
		crb += 1 / pop.info(ax.Values[b])
	}
	crb /= float64(M)
	d := Decoder{Kind: PoissonModel, Pred: [][]float64{pred}}
	dec := make([]int, M)
	if _, err := d.Decode(dec, y, pop.n, cond, B, []Fold{{Test: test}}, nil); err != nil {
		t.Fatal(err)
	}
	sum, err := Summarize(ax, cond, dec)
	if err != nil {
		t.Fatal(err)
	}
	v, mean := 0.0, 0.0
	for _, e := range sum.Err {
		v += e * e
		mean += e
	}
	v /= float64(M)
	mean /= float64(M)
	ratio := v / crb
	t.Logf("M=%d: error variance %.4f deg^2, Cramer-Rao bound %.4f (sd %.3f deg), ratio %.4f, mean error %.4f, MAE %.4f +- %.4f",
		M, v, crb, math.Sqrt(crb), ratio, mean, sum.MAE, sum.SEM)
	if math.Abs(ratio-1) > tol {
		t.Errorf("error variance / CRB = %v, want 1 +- %v", ratio, tol)
	}
}

// TestGaussianDecoderCramerRao: the Gaussian model decoder with the true
// means and Gaussian noise of known variance reaches 1/I, I = sum f'^2 /
// sigma^2 (independent Gaussian neurons with fixed variance [pub: textbook]).
func TestGaussianDecoderCramerRao(t *testing.T) {
	M, tol := 3000, 0.10
	if !testing.Short() {
		M, tol = 16000, 0.05
	}
	const B = 360
	pop := newVMPop(150, 0, 6, 2)
	ax := Conditions{Values: make([]float64, B), Period: 360}
	for b := range ax.Values {
		ax.Values[b] = float64(b)
	}
	const sd = 1.5
	pred := make([]float64, B*pop.n)
	for b := 0; b < B; b++ {
		for i := 0; i < pop.n; i++ {
			pred[b*pop.n+i] = pop.rate(i, ax.Values[b])
		}
	}
	infoAt := func(s float64) float64 {
		I := 0.0
		for i := 0; i < pop.n; i++ {
			d := (s - pop.pref[i]) * math.Pi / 180
			fp := -pop.amp * math.Exp(pop.kappa*(math.Cos(d)-1)) * pop.kappa * math.Sin(d) * math.Pi / 180
			I += fp * fp / (sd * sd)
		}
		return I
	}
	rng := rand.New(rand.NewPCG(43, 1))
	T := M + 2000 // 2000 training trials for the noise variance
	y := make([]float32, T*pop.n)
	cond := make([]int, T)
	var train, test []int
	crb := 0.0
	for t := 0; t < T; t++ {
		b := rng.IntN(B)
		cond[t] = b
		for i := 0; i < pop.n; i++ {
			y[t*pop.n+i] = float32(pred[b*pop.n+i] + sd*rng.NormFloat64())
		}
		if t < 2000 {
			train = append(train, t)
		} else {
			test = append(test, t)
			crb += 1 / infoAt(ax.Values[b])
		}
	}
	crb /= float64(M)
	d := Decoder{Kind: GaussianModel, Pred: [][]float64{pred}}
	dec := make([]int, T)
	if _, err := d.Decode(dec, y, pop.n, cond, B, []Fold{{Train: train, Test: test}}, nil); err != nil {
		t.Fatal(err)
	}
	sum, err := Summarize(ax, cond, dec)
	if err != nil {
		t.Fatal(err)
	}
	v := 0.0
	for _, e := range sum.Err {
		v += e * e
	}
	v /= float64(len(sum.Err))
	t.Logf("M=%d: error variance %.4f deg^2, bound %.4f, ratio %.4f", M, v, crb, v/crb)
	if math.Abs(v/crb-1) > tol {
		t.Errorf("error variance / CRB = %v, want 1 +- %v", v/crb, tol)
	}
}

// TestSummarize checks the error conventions on a hand-made case: a periodic
// axis of 8 directions (45 degree steps) and a bounded one (values computed
// by hand).
func TestSummarize(t *testing.T) {
	cond := []int{0, 0, 7, 3, 4}
	dec := []int{1, 7, 0, -1, 4}
	per := Conditions{Values: []float64{0, 45, 90, 135, 180, 225, 270, 315}, Period: 360}
	s, err := Summarize(per, cond, dec)
	if err != nil {
		t.Fatal(err)
	}
	// Errors: +45, -45 (shortest), +45 (315 -> 0 wraps), trial 3 skipped, 0.
	want := []float64{45, -45, 45, 0}
	for i, e := range want {
		if s.Err[i] != e {
			t.Errorf("err[%d]: got %v want %v", i, s.Err[i], e)
		}
	}
	if s.MAE != 33.75 || s.Accuracy != 0.25 || s.Confusion[0*8+1] != 1 || s.Confusion[7*8+0] != 1 {
		t.Errorf("got MAE %v accuracy %v, want 33.75 0.25", s.MAE, s.Accuracy)
	}
	// SEM: |err| = 45,45,45,0: sd (n-1) = 22.5, /2 = 11.25.
	if math.Abs(s.SEM-11.25) > 1e-12 {
		t.Errorf("got SEM %v want 11.25", s.SEM)
	}
	bnd := Conditions{Values: per.Values}
	s, _ = Summarize(bnd, cond, dec)
	if s.Err[1] != 315 || s.Err[2] != -315 {
		t.Errorf("bounded axis: got %v want 315, -315", s.Err[1:3])
	}
}

func TestAxisPairs(t *testing.T) {
	ax := Conditions{Values: []float64{-170, -90, 0, 90}, Period: 360}
	ps := ax.Pairs()
	if len(ps) != 4 {
		t.Fatalf("got %d pairs want 4", len(ps))
	}
	// Wrap pair: 90 -> -170 + 360 = 190, step 100, midpoint 140.
	if w := ps[3]; w.A != 3 || w.B != 0 || w.Ds != 100 || w.Stim != 140 {
		t.Errorf("got wrap pair %+v want A 3 B 0 Ds 100 Stim 140", w)
	}
	ax = Conditions{Values: []float64{0, 60, 120, 300}, Period: 360}
	if w := ax.Pairs()[3]; w.Ds != 60 || w.Stim != 330 {
		t.Errorf("got wrap pair %+v want Ds 60 Stim 330", w)
	}
	ax = Conditions{Values: []float64{10, 100, 350}, Period: 360}
	// 350 -> 370: midpoint 360 wraps to 0... Values[0] is 10, so 360 stays in [10, 370).
	if w := ax.Pairs()[2]; w.Ds != 20 || w.Stim != 360 {
		t.Errorf("got wrap pair %+v want Ds 20 Stim 360", w)
	}
}

// TestErrors: bad input gets an error naming what is wrong, never a panic.
func TestErrors(t *testing.T) {
	ax := Conditions{Values: []float64{0, 1, 2}}
	y := make([]float32, 9*2)
	for i := range y {
		y[i] = float32(i % 7)
	}
	cond := []int{0, 0, 0, 1, 1, 1, 2, 2, 2}
	nan := append([]float32(nil), y...)
	nan[5] = float32(math.NaN())
	cases := []struct {
		name string
		run  func() error
		want string
	}{
		{"too_many_neurons", func() error {
			_, err := LinearInfo(y, 2, []int{0, 0, 1, 1, 2, 2, 2, 2, 2}, ax, []int{1})
			return err
		}, "pair (0,1) has 2+2 trials: the bias-corrected information needs fewer than 1 neurons, got 1"},
		{"bad_condition", func() error {
			_, err := LinearInfo(y, 2, []int{0, 0, 0, 1, 1, 1, 2, 2, 5}, ax, []int{0})
			return err
		}, "trial 8 has condition 5"},
		{"nan", func() error { _, err := LinearInfo(nan, 2, cond, ax, []int{1}); return err }, "trial 2, neuron 1 is NaN"},
		{"axis_order", func() error {
			_, err := LinearInfo(y, 2, cond, Conditions{Values: []float64{0, 2, 1}}, []int{0})
			return err
		}, "increase strictly"},
		{"axis_span", func() error {
			_, err := LinearInfo(y, 2, cond, Conditions{Values: []float64{0, 90, 180}, Period: 180}, []int{0})
			return err
		}, "not less than the period"},
		{"sizes", func() error {
			_, err := InfoVsSize(y, 2, cond, ax, []int{1, 1}, 2, rand.New(rand.NewPCG(1, 1)))
			return err
		}, "increase strictly"},
		{"fold_overlap", func() error {
			d := Decoder{Shrinkage: 1}
			_, err := d.Decode(make([]int, 9), y, 2, cond, 3, []Fold{{Train: []int{0, 1, 3}, Test: []int{3, 4}}}, nil)
			return err
		}, "trial 3 is both"},
		{"fold_twice", func() error {
			d := Decoder{Shrinkage: 1}
			_, err := d.Decode(make([]int, 9), y, 2, cond, 3, []Fold{{Train: []int{0}, Test: []int{3}}, {Train: []int{1}, Test: []int{3}}}, nil)
			return err
		}, "test trial of folds 0 and 1"},
		{"shrinkage", func() error {
			d := Decoder{Shrinkage: 1.5}
			_, err := d.Decode(make([]int, 9), y, 2, cond, 3, []Fold{{Train: []int{0}, Test: []int{3}}}, nil)
			return err
		}, "shrinkage 1.5"},
		{"full_cap", func() error {
			d := Decoder{Shrinkage: 0.5, MaxFull: 1}
			_, err := d.Decode(make([]int, 9), y, 2, cond, 3, []Fold{{Train: []int{0}, Test: []int{3}}}, nil)
			return err
		}, "exceed the cap of 1"},
		{"pred_shape", func() error {
			d := Decoder{Kind: PoissonModel, Pred: [][]float64{make([]float64, 5)}}
			_, err := d.Decode(make([]int, 9), y, 2, cond, 3, []Fold{{Test: []int{3}}}, nil)
			return err
		}, "want conditions x neurons = 3 x 2"},
		{"poisson_negative", func() error {
			neg := append([]float32(nil), y...)
			neg[7] = -1
			d := Decoder{Kind: PoissonModel, Pred: [][]float64{make([]float64, 6)}}
			_, err := d.Decode(make([]int, 9), neg, 2, cond, 3, []Fold{{Test: []int{3}}}, nil)
			return err
		}, "trial 3, neuron 1 is negative"},
		{"nan_test_trial", func() error {
			d := Decoder{Shrinkage: 1}
			_, err := d.Decode(make([]int, 9), nan, 2, cond, 3, []Fold{{Train: []int{0, 1, 3, 4, 6}, Test: []int{2}}}, nil)
			return err
		}, "trial 2, neuron 1 is NaN"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			err := c.run()
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("got error %v, want one containing %q", err, c.want)
			}
		})
	}
}

// TestDegenerateNeurons: a neuron constant in both conditions of a pair is
// left out (N drops by one, information unchanged); one that is constant but
// different between the conditions is refused; a duplicated neuron is refused
// as singular.
func TestDegenerateNeurons(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	const T, n = 20, 4
	y := make([]float32, 2*T*n)
	cond := make([]int, 2*T)
	for t := 0; t < 2*T; t++ {
		cond[t] = t / T
		for i := 0; i < 3; i++ {
			y[t*n+i] = float32(rng.NormFloat64() + float64(cond[t]*i))
		}
		y[t*n+3] = 2
	}
	ax := Conditions{Values: []float64{0, 1}}
	all, err := LinearInfo(y, n, cond, ax, nil)
	if err != nil {
		t.Fatal(err)
	}
	three, err := LinearInfo(y, n, cond, ax, []int{0, 1, 2})
	if err != nil {
		t.Fatal(err)
	}
	if all[0].N != 3 || all[0].Info != three[0].Info {
		t.Errorf("constant neuron: got N %d info %v, want N 3 info %v", all[0].N, all[0].Info, three[0].Info)
	}
	for t := T; t < 2*T; t++ {
		y[t*n+3] = 3
	}
	if _, err := LinearInfo(y, n, cond, ax, nil); err == nil || !strings.Contains(err.Error(), "neuron 3 is constant") {
		t.Errorf("got %v, want an error naming neuron 3 as constant", err)
	}
	for t := 0; t < 2*T; t++ {
		y[t*n+3] = 2 * y[t*n+1]
	}
	if _, err := LinearInfo(y, n, cond, ax, nil); err == nil || !strings.Contains(err.Error(), "neuron 3 is (numerically) a linear combination") {
		t.Errorf("got %v, want an error naming neuron 3 as collinear", err)
	}
}

// TestThreshold checks the documented rules.
func TestThreshold(t *testing.T) {
	cases := []struct {
		in, want float64
	}{{4, 0.5}, {0, math.Inf(1)}, {-1, math.Inf(1)}, {math.Inf(1), 0}}
	for _, c := range cases {
		if got := Threshold(c.in); got != c.want {
			t.Errorf("Threshold(%v): got %v want %v", c.in, got, c.want)
		}
	}
	if !math.IsNaN(Threshold(math.NaN())) {
		t.Errorf("Threshold(NaN) not NaN")
	}
}

// TestInfoVsSizeMatchesLinearInfo: the prefix read-out of one Cholesky gives
// the same numbers as a separate computation on each prefix subset.
func TestInfoVsSizeMatchesLinearInfo(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	y, cond := satPop(rng, 40, 4, 30, 0.2, 0.05, 1)
	ax := lineAxis(4, 1)
	ax.Period = 4
	sizes := []int{3, 10, 25}
	seed := rand.New(rand.NewPCG(77, 1))
	c, err := InfoVsSize(y, 40, cond, ax, sizes, 2, seed)
	if err != nil {
		t.Fatal(err)
	}
	again := rand.New(rand.NewPCG(77, 1))
	for r := 0; r < 2; r++ {
		ord := randomSubset(again, 40, 25)
		for s, k := range sizes {
			ref, err := LinearInfo(y, 40, cond, ax, ord[:k])
			if err != nil {
				t.Fatal(err)
			}
			for p := range ref {
				i := (r*len(sizes)+s)*len(c.Pairs) + p
				if d := math.Abs(c.Info[i] - ref[p].Info); d > 1e-9*math.Abs(ref[p].Info)+1e-12 {
					t.Errorf("r %d size %d pair %d: got %v want %v", r, k, p, c.Info[i], ref[p].Info)
				}
				if d := math.Abs(c.Shuffled[i] - ref[p].Shuffled); d > 1e-9*math.Abs(ref[p].Shuffled) {
					t.Errorf("shuffled r %d size %d pair %d: got %v want %v", r, k, p, c.Shuffled[i], ref[p].Shuffled)
				}
			}
		}
	}
}

// TestCoresIndependent: the same input gives bit-identical results with one
// and with two goroutines (column chunks, pair workers and the blocked
// matrix product all keep a fixed summation order).
func TestCoresIndependent(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 11))
	const n, B, T = 600, 10, 70
	y, cond := satPop(rng, n, B, T, 0.05, 0.02, 1)
	var folds []Fold
	for f := 0; f < 2; f++ {
		var fo Fold
		for tr := range cond {
			if tr%2 == f {
				fo.Test = append(fo.Test, tr)
			} else {
				fo.Train = append(fo.Train, tr)
			}
		}
		folds = append(folds, fo)
	}
	ax := lineAxis(B, 1)
	run := func() ([]int, []int, []float64) {
		d := Decoder{Shrinkage: 1}
		dec := make([]int, len(cond))
		if _, err := d.Decode(dec, y, n, cond, B, folds, nil); err != nil {
			t.Fatal(err)
		}
		d2 := Decoder{Shrinkage: 0.5}
		dec2 := make([]int, len(cond))
		if _, err := d2.Decode(dec2, y, n, cond, B, folds, rand.New(rand.NewPCG(1, 2)).Perm(n)[:300]); err != nil {
			t.Fatal(err)
		}
		c, err := InfoVsSize(y, n, cond, ax, []int{10, 60}, 2, rand.New(rand.NewPCG(3, 4)))
		if err != nil {
			t.Fatal(err)
		}
		return dec, dec2, c.Info
	}
	prev := runtime.GOMAXPROCS(1)
	a1, b1, c1 := run()
	runtime.GOMAXPROCS(max(prev, 2))
	a2, b2, c2 := run()
	runtime.GOMAXPROCS(prev)
	if !slices.Equal(a1, a2) || !slices.Equal(b1, b2) || !slices.Equal(c1, c2) {
		t.Errorf("results differ between 1 and 2 goroutines")
	}
}
