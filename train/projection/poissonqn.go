package projection

import (
	"math"

	"gonum.org/v1/gonum/floats"

	"github.com/strialab/stria/nn"
)

// PoissonQN is the Poisson fast path with the filters trained by a
// limited-memory quasi-Newton method (lbfgs) instead of Adam. Every
// evaluation of the projected objective solves the readouts tightly from
// the previous ones (inexact Newton steps until each neuron's Newton
// decrement is below psStartTol), so that the objective and its envelope
// gradient are accurate enough for a line search. One Epoch of the loop is
// one iteration (lbfgs.step).
type PoissonQN struct {
	*Poisson
	qn lbfgs
	// The readouts at the line search's start (beta N x Bt, c N, their
	// basis Qt r0 x F): every trial starts its readout solves from them,
	// not from a rejected trial's.
	beta0, c0, qt0 []float64
	r0             int
	// Evals counts the objective evaluations of all iterations so far.
	Evals int
	// WeightDecay adds (WeightDecay / 2) ||theta||^2 over the filter
	// parameters theta to the objective (train.weight_decay: what Adam's
	// coupled weight decay adds to the gradient); obj is the objective
	// with it.
	WeightDecay float64
	obj         float64
	evalAtFn    func(float64) float64
}

// NewPoissonQN is NewPoisson for the quasi-Newton filter training.
func NewPoissonQN(pr Problem, net *nn.Net) (*PoissonQN, error) {
	s, err := NewPoisson(pr, net)
	if err != nil {
		return nil, err
	}
	q := &PoissonQN{Poisson: s, qn: newLBFGS(s.pp.nconv),
		beta0: make([]float64, len(s.pp.beta)), c0: make([]float64, len(s.pp.c)), qt0: make([]float64, len(s.pp.qt))}
	q.evalAtFn = q.evalAt
	return q, nil
}

// Begin solves the readouts of the starting filters tightly and takes the
// objective's gradient there.
func (q *PoissonQN) Begin() error {
	q.pp.mode = psStart
	q.Evals++
	if err := q.pp.eval(q.net, true, false); err != nil {
		return err
	}
	q.obj = q.pp.obj + weightDecay(q.WeightDecay, q.Trainable(), q.net.Grads)
	return nil
}

// weightDecay adds the weight decay wd's gradient over the filter
// parameters x to grads (a prefix of it) and returns its term of the
// objective, (wd / 2) ||x||^2.
func weightDecay(wd float64, x, grads []float64) float64 {
	if wd == 0 {
		return 0
	}
	floats.AddScaled(grads[:len(x)], wd, x)
	return wd / 2 * floats.Dot(x, x)
}

// evalAt moves the filters to x0 + t d and evaluates the projected
// objective there (readouts tightly solved from those at x0, gradient in
// net.Grads); it returns +Inf where the features are not finite.
func (q *PoissonQN) evalAt(t float64) float64 {
	x := q.Trainable()
	for i := range x {
		x[i] = q.qn.x0[i] + t*q.qn.d[i]
	}
	pp := q.pp
	copy(pp.beta, q.beta0)
	copy(pp.c, q.c0)
	pp.r = q.r0
	copy(pp.qt[:q.r0*pp.F], q.qt0[:q.r0*pp.F])
	pp.mode = psStart
	q.Evals++
	if err := q.pp.eval(q.net, true, false); err != nil || math.IsNaN(q.pp.obj) {
		q.obj = math.Inf(1)
	} else {
		q.obj = q.pp.obj + weightDecay(q.WeightDecay, x, q.net.Grads)
	}
	return q.obj
}

// Epoch runs one L-BFGS iteration and returns the training data loss
// before it (EpochLog.TrainLoss). The optimiser argument is unused.
func (q *PoissonQN) Epoch(_ *nn.Adam) float64 {
	pp := q.pp
	loss := pp.loss
	if q.qn.done {
		return loss
	}
	copy(q.beta0, pp.beta)
	copy(q.c0, pp.c)
	q.r0 = pp.r
	copy(q.qt0[:q.r0*pp.F], pp.qt[:q.r0*pp.F])
	q.qn.step(q.Trainable(), q.net.Grads[:pp.nconv], q.obj, q.evalAtFn)
	return loss
}

// Validate returns the validation loss of the last evaluation (the
// accepted point) and, on the epochs the solver computes it, the median
// validation R^2.
func (q *PoissonQN) Validate(epoch int) (float64, float64, error) {
	pp := q.pp
	r2 := epoch == 1 || (pp.r2Every > 0 && epoch%pp.r2Every == 0)
	if pp.Bv == 0 {
		return q.obj, math.NaN(), nil
	}
	pp.valLoss(pp.h, r2)
	return pp.val, pp.vr2, nil
}

// State returns the quasi-Newton memory, for a checkpoint.
func (q *PoissonQN) State() []float64 { return q.qn.state() }

// SetState restores the quasi-Newton memory of a checkpoint.
func (q *PoissonQN) SetState(v []float64) error { return q.qn.setState(v) }
