package projection

import (
	"math"

	"github.com/strialab/stria/nn"
)

// MSEQN is the projected MSE solver (MSE) with the filters trained by the
// quasi-Newton iteration lbfgs instead of Adam: the projected objective
// and its gradient are exact B x B computations (the readout is in closed
// form), so a line search on them is cheap, and L-BFGS reaches in tens of
// iterations what Adam reaches in hundreds of epochs. One Epoch of the
// loop is one iteration (a direction and its line search; about one to
// two evaluations of the objective). Validate gives the validation loss
// of the accepted point, computed with it.
type MSEQN struct {
	*MSE
	qn lbfgs
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

// NewMSEQN is NewMSE for the quasi-Newton filter training.
func NewMSEQN(pr Problem, net *nn.Net) (*MSEQN, error) {
	s, err := NewMSE(pr, net)
	if err != nil {
		return nil, err
	}
	q := &MSEQN{MSE: s, qn: newLBFGS(s.pj.nconv)}
	q.evalAtFn = q.evalAt
	return q, nil
}

// Begin evaluates the starting filters: their objective and gradient
// start the first iteration.
func (q *MSEQN) Begin() error {
	q.Evals++
	if err := q.pj.eval(q.net, true, false); err != nil {
		return err
	}
	q.obj = q.pj.obj + weightDecay(q.WeightDecay, q.Trainable(), q.net.Grads)
	return nil
}

// evalAt moves the filters to x0 + t d and evaluates the projected
// objective there (gradient in net.Grads); it returns +Inf where the
// features are not finite.
func (q *MSEQN) evalAt(t float64) float64 {
	x := q.Trainable()
	for i := range x {
		x[i] = q.qn.x0[i] + t*q.qn.d[i]
	}
	q.Evals++
	if err := q.pj.eval(q.net, true, false); err != nil || math.IsNaN(q.pj.obj) {
		q.obj = math.Inf(1)
	} else {
		q.obj = q.pj.obj + weightDecay(q.WeightDecay, x, q.net.Grads)
	}
	return q.obj
}

// Epoch runs one L-BFGS iteration and returns the training data loss
// before it (EpochLog.TrainLoss). The optimiser argument is unused.
func (q *MSEQN) Epoch(_ *nn.Adam) float64 {
	loss := q.pj.loss
	q.qn.step(q.Trainable(), q.net.Grads[:q.pj.nconv], q.obj, q.evalAtFn)
	return loss
}

// Validate returns the validation loss of the accepted point (the
// training objective when there are no validation trials, as MSE's) and,
// on the epochs the solver computes it, the median validation R^2.
func (q *MSEQN) Validate(epoch int) (float64, float64, error) {
	pj := q.pj
	if pj.Bv == 0 {
		return pj.obj, math.NaN(), nil
	}
	vr2 := math.NaN()
	if pj.r2Every > 0 && (epoch == 1 || epoch%pj.r2Every == 0) {
		vr2 = pj.valR2()
	}
	return pj.val, vr2, nil
}

// State returns the quasi-Newton memory, for a checkpoint.
func (q *MSEQN) State() []float64 { return q.qn.state() }

// SetState restores the quasi-Newton memory of a checkpoint.
func (q *MSEQN) SetState(v []float64) error { return q.qn.setState(v) }
