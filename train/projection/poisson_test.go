package projection

import (
	"math"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"

	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/nn"
)

// poissonCase is a small spike-count recording (30 conditions, 3 channels,
// stride 2: F 45 > Bt 30, the full-size situation) with random filters.
func poissonCase(t *testing.T, output nn.Activation, l2 float64) (*testCase, *nn.Net) {
	t.Helper()
	c, _ := popCase(t, synth.DiscreteConfig{Neurons: 9, Trials: 900, Bins: 30, Poisson: true, GainSD: 0.2, UntunedFrac: 0.2, RareBins: 3, Seed: 5},
		caseOptions{output: output, penalty: l2, convs: []nn.ConvSpec{{Out: 3, K: 5, Stride: 2, Border: nn.Circular}}})
	return c, c.net(3, 4)
}

func maxAbs(x []float64) float64 {
	var m float64
	for _, v := range x {
		m = math.Max(m, math.Abs(v))
	}
	return m
}

// TestPoissonReadoutBFGS checks the per-neuron Newton solve in the
// representer basis against gonum's BFGS on the full (F+1)-dimensional
// problem of each neuron (an optimiser that knows nothing of the
// reduction). train's TestPoissonObjectiveMatchesAdam checks the
// objective against the adam path's.
func TestPoissonReadoutBFGS(t *testing.T) {
	for _, tc := range []struct {
		output nn.Activation
		l2     float64
	}{{nn.Softplus, 0.05}, {nn.Exp, 0.05}, {nn.Softplus, 2}} {
		t.Run(tc.output.String(), func(t *testing.T) {
			c, net := poissonCase(t, tc.output, tc.l2)
			pp, err := newPoissonProj(&c.pr, net)
			if err != nil {
				t.Fatal(err)
			}
			if err := pp.eval(net, false, false); err != nil {
				t.Fatal(err)
			}
			pp.readout(net)
			F, Bt := pp.F, pp.Bt
			for n := 0; n < pp.N; n++ {
				sum := pp.sum[n*Bt : (n+1)*Bt]
				obj := func(x []float64) float64 {
					var s float64
					for i, b := range pp.rows {
						u := x[F]
						for f, v := range pp.h[b*F : (b+1)*F] {
							u += v * x[f]
						}
						fu, _, _ := linkTerms(pp.act, u)
						s += pp.cnt[i]*fu - sum[i]*math.Log(fu+nn.PoissonEps)
					}
					for _, v := range x[:F] {
						s += pp.mu * v * v
					}
					return s
				}
				grad := func(g, x []float64) {
					clear(g)
					for i, b := range pp.rows {
						h := pp.h[b*F : (b+1)*F]
						u := x[F]
						for f, v := range h {
							u += v * x[f]
						}
						fu, d1, _ := linkTerms(pp.act, u)
						gi := d1 * (pp.cnt[i] - sum[i]/(fu+nn.PoissonEps))
						for f, v := range h {
							g[f] += gi * v
						}
						g[F] += gi
					}
					for f, v := range x[:F] {
						g[f] += 2 * pp.mu * v
					}
				}
				x0 := make([]float64, F+1)
				x0[F] = invLink(pp.act, 1)
				hess := func(hm *mat.SymDense, x []float64) {
					for i := 0; i <= F; i++ {
						for j := i; j <= F; j++ {
							hm.SetSym(i, j, 0)
						}
					}
					row := make([]float64, F+1)
					for i, b := range pp.rows {
						copy(row, pp.h[b*F:(b+1)*F])
						row[F] = 1
						u := x[F]
						for f, v := range row[:F] {
							u += v * x[f]
						}
						fu, d1, d2 := linkTerms(pp.act, u)
						fe := fu + nn.PoissonEps
						om := d2*(pp.cnt[i]-sum[i]/fe) + sum[i]*d1*d1/(fe*fe)
						for a := 0; a <= F; a++ {
							for c := a; c <= F; c++ {
								hm.SetSym(a, c, hm.At(a, c)+om*row[a]*row[c])
							}
						}
					}
					for f := 0; f < F; f++ {
						hm.SetSym(f, f, hm.At(f, f)+2*pp.mu)
					}
				}
				// BFGS from the mean-rate start; it stalls at a gradient of
				// ~1e-6 (its line search cannot resolve smaller decreases of
				// an objective of ~600 in float64), so full Newton steps on
				// the (F+1)-dimensional problem, with the Hessian written out
				// above and no line search, finish from there (quadratic
				// convergence: two steps reach rounding).
				prob := optimize.Problem{Func: obj, Grad: grad}
				res, err := optimize.Minimize(prob, x0, &optimize.Settings{GradientThreshold: 1e-10}, &optimize.BFGS{})
				if res == nil {
					t.Fatalf("neuron %d: BFGS: %v", n, err)
				}
				x := res.X
				g := make([]float64, F+1)
				hm := mat.NewSymDense(F+1, nil)
				for range 3 {
					grad(g, x)
					hess(hm, x)
					var ch mat.Cholesky
					if !ch.Factorize(hm) {
						t.Fatalf("neuron %d: the full Hessian is not positive definite", n)
					}
					var d mat.VecDense
					if err := ch.SolveVecTo(&d, mat.NewVecDense(F+1, slices.Clone(g))); err != nil {
						t.Fatal(err)
					}
					for i := range x {
						x[i] -= d.AtVec(i)
					}
				}
				grad(g, x)
				if maxAbs(g) > 1e-9 {
					t.Fatalf("neuron %d: the direct optimisers stop at gradient %g", n, maxAbs(g))
				}
				got := append(slices.Clone(net.ReadW()[n*F:(n+1)*F]), net.ReadB()[n])
				var scale, diff float64
				for i, v := range x {
					scale = math.Max(scale, math.Abs(v))
					diff = math.Max(diff, math.Abs(v-got[i]))
				}
				// Tolerance 1e-8 relative (the task's bar; measured: <= 3e-14):
				// both solutions have a full-space gradient ~1e-12 or below.
				if diff > 1e-8*math.Max(1, scale) {
					t.Errorf("neuron %d: readout differs from BFGS's by %g (largest parameter %g)", n, diff, scale)
				}
				if o := obj(got); math.Abs(o-pp.objN[n]) > 1e-10*math.Abs(o) {
					t.Errorf("neuron %d: objective %.15g, direct evaluation %.15g", n, pp.objN[n], o)
				}
			}

		})
	}
}

// TestPoissonCores checks that the readouts and the gradient do not depend
// on how many goroutines share the neurons (bit for bit).
func TestPoissonCores(t *testing.T) {
	var ref []float64
	for _, workers := range []int{1, 2, 5} {
		c, net := poissonCase(t, nn.Softplus, 0.05)
		pp, err := newPoissonProj(&c.pr, net)
		if err != nil {
			t.Fatal(err)
		}
		pp.workers = pp.workers[:0]
		for range workers {
			pp.workers = append(pp.workers, newPSWorker(pp.Bt))
		}
		for range 3 { // the later evals start from the earlier readouts
			if err := pp.eval(net, true, false); err != nil {
				t.Fatal(err)
			}
			pp.chord = true
			net.Params[0] += 0.01
		}
		pp.readout(net)
		got := append(slices.Clone(net.Params), net.Grads[:pp.nconv]...)
		if ref == nil {
			ref = got
		} else if !slices.Equal(got, ref) {
			t.Errorf("%d goroutines: parameters or gradient differ from one goroutine's", workers)
		}
	}
}
