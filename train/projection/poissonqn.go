package projection

import (
	"math"

	"gonum.org/v1/gonum/floats"

	"github.com/strialab/stria/nn"
)

// PoissonQN is the Poisson fast path with the filters trained by a
// limited-memory quasi-Newton method (L-BFGS) instead of Adam [practice:
// Nocedal J, Wright SJ (2006) Numerical Optimization, 2nd ed., alg. 7.4
// (two-loop recursion) and 3.1 (backtracking) [mem]]. Every evaluation of
// the projected objective solves the readouts tightly from the previous
// ones (inexact Newton steps until each neuron's Newton decrement is below
// psStartTol), so that the objective and its envelope gradient are
// accurate enough for a line search. One Epoch of the loop is one
// iteration: a direction from the last qnMemory steps, then a backtracking
// line search (Armijo) from the full step. Steps whose curvature s.y is
// not positive are not stored; a direction that is not a descent
// direction, or a line search that fails, restarts the memory with a
// steepest-descent step; a failure from steepest descent ends training
// (later epochs change nothing, so early stopping ends the loop).
type PoissonQN struct {
	*Poisson
	sMem, yMem [][]float64 // qnMemory x nconv, ring buffer
	rho        []float64
	head, cnt  int
	x0, g0, d  []float64
	alpha      []float64
	done       bool
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
}

// qnMemory is the number of step pairs L-BFGS keeps; qnFirstStep the
// largest change of one filter parameter in a steepest-descent step (the
// size of one Adam step at the default learning rate); qnMaxHalve the
// halvings one line search tries before it fails.
const (
	qnMemory    = 10
	qnFirstStep = 1e-2
	qnMaxHalve  = 30
)

// NewPoissonQN is NewPoisson for the quasi-Newton filter training.
func NewPoissonQN(pr Problem, net *nn.Net) (*PoissonQN, error) {
	s, err := NewPoisson(pr, net)
	if err != nil {
		return nil, err
	}
	n := s.pp.nconv
	q := &PoissonQN{Poisson: s, rho: make([]float64, qnMemory), alpha: make([]float64, qnMemory),
		x0: make([]float64, n), g0: make([]float64, n), d: make([]float64, n),
		beta0: make([]float64, len(s.pp.beta)), c0: make([]float64, len(s.pp.c)), qt0: make([]float64, len(s.pp.qt))}
	for range qnMemory {
		q.sMem = append(q.sMem, make([]float64, n))
		q.yMem = append(q.yMem, make([]float64, n))
	}
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
	q.obj = q.pp.obj + q.decay()
	return nil
}

// decay adds the weight decay's gradient to the filter gradient and
// returns its term of the objective.
func (q *PoissonQN) decay() float64 {
	if q.WeightDecay == 0 {
		return 0
	}
	x := q.Trainable()
	floats.AddScaled(q.net.Grads[:len(x)], q.WeightDecay, x)
	return q.WeightDecay / 2 * floats.Dot(x, x)
}

// evalAt moves the filters to x0 + t d and evaluates the projected
// objective there (readouts tightly solved, gradient in net.Grads); it
// returns +Inf where the features are not finite.
func (q *PoissonQN) evalAt(t float64) float64 {
	x := q.Trainable()
	for i := range x {
		x[i] = q.x0[i] + t*q.d[i]
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
		q.obj = q.pp.obj + q.decay()
	}
	return q.obj
}

// Epoch runs one L-BFGS iteration and returns the training data loss
// before it (EpochLog.TrainLoss). The optimiser argument is unused.
func (q *PoissonQN) Epoch(_ *nn.Adam) float64 {
	pp := q.pp
	loss := pp.loss
	if q.done {
		return loss
	}
	n := pp.nconv
	x, g := q.Trainable(), q.net.Grads[:n]
	copy(q.x0, x)
	copy(q.g0, g)
	f0 := q.obj
	copy(q.beta0, pp.beta)
	copy(q.c0, pp.c)
	q.r0 = pp.r
	copy(q.qt0[:q.r0*pp.F], pp.qt[:q.r0*pp.F])
	for attempt := 0; attempt < 2; attempt++ {
		gd := q.direction()
		if !(gd < 0) {
			q.cnt = 0
			gd = q.direction()
		}
		if !(gd < 0) {
			break
		}
		t := 1.0
		for range qnMaxHalve {
			f := q.evalAt(t)
			if f <= f0+1e-4*t*gd {
				// Store the pair if its curvature is positive.
				s, y := q.sMem[q.head], q.yMem[q.head]
				for i := range s {
					s[i] = t * q.d[i]
					y[i] = g[i] - q.g0[i]
				}
				if sy := floats.Dot(s, y); sy > 1e-12*math.Sqrt(floats.Dot(s, s)*floats.Dot(y, y)) && sy > 0 {
					q.rho[q.head] = 1 / sy
					q.head = (q.head + 1) % qnMemory
					q.cnt = min(q.cnt+1, qnMemory)
				}
				return loss
			}
			t /= 2
		}
		// The line search failed: back to x0; retry once from steepest
		// descent unless this was steepest descent already.
		if q.cnt == 0 {
			break
		}
		q.cnt = 0
	}
	q.done = true
	q.evalAt(0)
	return loss
}

// direction sets q.d = -H g0 by the two-loop recursion (with no pairs
// stored: a steepest-descent step whose largest component is
// qnFirstStep) and returns g0 . d.
func (q *PoissonQN) direction() float64 {
	d, g := q.d, q.g0
	if q.cnt == 0 {
		m := floats.Norm(g, math.Inf(1))
		if !(m > 0) || math.IsInf(m, 0) {
			return 0
		}
		for i, v := range g {
			d[i] = -v * qnFirstStep / m
		}
		return floats.Dot(g, d)
	}
	for i, v := range g {
		d[i] = -v
	}
	k := q.head
	for range q.cnt {
		k = (k + qnMemory - 1) % qnMemory
		q.alpha[k] = q.rho[k] * floats.Dot(q.sMem[k], d)
		floats.AddScaled(d, -q.alpha[k], q.yMem[k])
	}
	last := (q.head + qnMemory - 1) % qnMemory
	floats.Scale(1/(q.rho[last]*floats.Dot(q.yMem[last], q.yMem[last])), d)
	for range q.cnt {
		b := q.rho[k] * floats.Dot(q.yMem[k], d)
		floats.AddScaled(d, q.alpha[k]-b, q.sMem[k])
		k = (k + 1) % qnMemory
	}
	return floats.Dot(g, d)
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
