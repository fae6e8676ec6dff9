package projection

import (
	"fmt"
	"math"
	"slices"
	"testing"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/optimize"

	"github.com/strialab/stria/nn"
)

// TestPoissonQN checks the quasi-Newton filter training on a small
// spike-count problem: no iteration raises the projected objective (the
// line search's Armijo condition; 1e-12 for the rounding of a re-solve
// where the search fails); the validation loss Validate
// reports is that of the exact readouts at the same filters (to 1e-5:
// training solves the readouts to a Newton decrement of 1e-6); the method
// reaches a stationary point (filter gradient a thousandfold below its
// start); and it ends at an objective no higher (to 1e-6) than gonum's
// BFGS reaches from the same start on the exact projected objective (an optimiser written
// independently of this one, given the objective and gradient of
// Evaluate; the gradient itself is checked against finite differences in
// train's TestPoissonProjGradient). With weight decay the objective and
// gradient gain its term, (wd / 2) ||theta||^2 and wd theta.
func TestPoissonQN(t *testing.T) {
	for _, tc := range []struct {
		output nn.Activation
		wd     float64
	}{{nn.Softplus, 0}, {nn.Exp, 0}, {nn.Softplus, 1e-3}} {
		t.Run(fmt.Sprintf("%v/weight_decay=%g", tc.output, tc.wd), func(t *testing.T) {
			c, net := poissonCase(t, tc.output, 0.05)
			start := slices.Clone(net.Params)
			q, err := NewPoissonQN(c.pr, net)
			if err != nil {
				t.Fatal(err)
			}
			q.WeightDecay = tc.wd
			if err := q.Begin(); err != nil {
				t.Fatal(err)
			}
			nc := q.pp.nconv
			g0 := maxAbs(net.Grads[:nc])
			prev := q.obj
			for it := 1; it <= 200 && !q.qn.done; it++ {
				q.Epoch(nil)
				if q.obj > prev+1e-12*math.Abs(prev) {
					t.Fatalf("iteration %d: objective %.12g above the previous %.12g", it, q.obj, prev)
				}
				prev = q.obj
				vl, _, err := q.Validate(it)
				if err != nil {
					t.Fatal(err)
				}
				if it%10 == 1 {
					ev, err := q.Evaluate(false, false)
					if err != nil {
						t.Fatal(err)
					}
					if math.Abs(ev.ValLoss-vl) > 1e-5*math.Abs(ev.ValLoss) {
						t.Errorf("iteration %d: validation loss %.12g, exact readouts give %.12g", it, vl, ev.ValLoss)
					}
				}
			}
			got := q.obj
			if _, err := q.Evaluate(true, false); err != nil {
				t.Fatal(err)
			}
			floats.AddScaled(net.Grads[:nc], tc.wd, net.Params[:nc])
			if g := maxAbs(net.Grads[:nc]); !(g < 1e-3*g0) {
				t.Errorf("filter gradient %.3g at the end, %.3g at the start: not stationary", g, g0)
			}
			t.Logf("%d evaluations, objective %.10g", q.Evals, got)

			// gonum's BFGS from the same start.
			ref, err := NewPoisson(c.pr, net)
			if err != nil {
				t.Fatal(err)
			}
			checkAgainstBFGS(t, net, start, nc, tc.wd, got, 1e-6, ref.Evaluate)
		})
	}
}

// checkAgainstBFGS runs gonum's BFGS (an optimiser written independently
// of lbfgs) from the filters start on the objective of evaluate plus
// (wd / 2) ||theta||^2 over the first nc parameters of net, and fails
// unless got, the quasi-Newton solver's end objective, is no higher than
// BFGS's to tol relative.
func checkAgainstBFGS(t *testing.T, net *nn.Net, start []float64, nc int, wd, got, tol float64, evaluate func(grad, r2 bool) (Eval, error)) {
	t.Helper()
	copy(net.Params, start)
	eval := func(x []float64, grad []float64) float64 {
		copy(net.Params[:nc], x)
		ev, err := evaluate(grad != nil, false)
		if err != nil {
			return math.Inf(1)
		}
		if grad != nil {
			copy(grad, net.Grads[:nc])
			floats.AddScaled(grad, wd, x)
		}
		return ev.Objective + wd/2*floats.Dot(x, x)
	}
	res, err := optimize.Minimize(optimize.Problem{
		Func: func(x []float64) float64 { return eval(x, nil) },
		Grad: func(grad, x []float64) { eval(x, grad) },
	}, slices.Clone(start[:nc]), &optimize.Settings{GradientThreshold: 1e-10, MajorIterations: 2000}, &optimize.BFGS{})
	if err != nil && res == nil {
		t.Fatal(err)
	}
	t.Logf("BFGS: %v, %d evaluations, objective %.12g", res.Status, res.FuncEvaluations, res.F)
	if got > res.F+tol*math.Abs(res.F) {
		t.Errorf("objective %.12g, BFGS reaches %.12g", got, res.F)
	}
}
