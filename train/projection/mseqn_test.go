package projection

import (
	"fmt"
	"math"
	"slices"
	"testing"

	"gonum.org/v1/gonum/floats"

	"github.com/strialab/stria/nn"
)

// TestMSEQN checks the quasi-Newton filter training of the projected MSE
// solver on a small population: no iteration raises the objective (the
// line search's Armijo condition); Validate reports the validation loss
// of the exact closed-form readout at the accepted filters (to 1e-12: the
// same arithmetic); the method reaches a stationary point (filter
// gradient a thousandfold below its start); and it ends at an objective
// no higher (to 1e-6) than gonum's BFGS reaches from the same start (an
// optimiser written independently of this one, given Evaluate's objective
// and gradient; the gradient itself is checked against finite differences
// in train's projected tests). With weight decay the objective and
// gradient gain (wd / 2) ||theta||^2 and wd theta.
func TestMSEQN(t *testing.T) {
	for _, tc := range []struct {
		border nn.Border
		wd     float64
	}{{nn.Circular, 0}, {nn.Zero, 0}, {nn.Circular, 1e-3}} {
		t.Run(fmt.Sprintf("%v/weight_decay=%g", tc.border, tc.wd), func(t *testing.T) {
			c, net := synthCase(t, tc.border, 0.7)
			start := slices.Clone(net.Params)
			q, err := NewMSEQN(c.pr, net)
			if err != nil {
				t.Fatal(err)
			}
			q.WeightDecay = tc.wd
			if err := q.Begin(); err != nil {
				t.Fatal(err)
			}
			nc := q.pj.nconv
			g0 := maxAbs(net.Grads[:nc])
			prev := q.obj
			it := 1
			for ; it <= 500 && !q.qn.done; it++ {
				q.Epoch(nil)
				if q.obj > prev {
					t.Fatalf("iteration %d: objective %.15g above the previous %.15g", it, q.obj, prev)
				}
				prev = q.obj
				vl, _, err := q.Validate(it)
				if err != nil {
					t.Fatal(err)
				}
				if it%10 == 1 {
					ev, err := q.Evaluate(true, false)
					if err != nil {
						t.Fatal(err)
					}
					if math.Abs(ev.ValLoss-vl) > 1e-12*math.Abs(ev.ValLoss) {
						t.Errorf("iteration %d: validation loss %.15g, exact readout gives %.15g", it, vl, ev.ValLoss)
					}
					weightDecay(tc.wd, net.Params[:nc], net.Grads)
				}
			}
			got := q.obj
			if _, err := q.Evaluate(true, false); err != nil {
				t.Fatal(err)
			}
			floats.AddScaled(net.Grads[:nc], tc.wd, net.Params[:nc])
			if g := maxAbs(net.Grads[:nc]); !(g < 1e-3*g0) {
				t.Errorf("filter gradient %.3g at the end (%d iterations), %.3g at the start: not stationary", g, it-1, g0)
			}
			t.Logf("%d iterations, %d evaluations, objective %.12g", it-1, q.Evals, got)

			ref, err := NewMSE(c.pr, net)
			if err != nil {
				t.Fatal(err)
			}
			checkAgainstBFGS(t, net, start, nc, tc.wd, got, 1e-6, ref.Evaluate)
		})
	}
}
