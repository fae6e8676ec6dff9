package tuning

import (
	"math"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/optimize"
)

// minimizer runs gonum's BFGS method (gonum.org/v1/gonum/optimize, with the
// bisection line search BFGS chooses by default) in the calling goroutine.
//
// run reproduces optimize.Minimize(prob, x0, settings, &optimize.BFGS{})
// with one evaluation task, no Recorder and no Problem.Status, step for
// step: the same evaluations in the same order, the same tests of the
// evaluation limits after each, of the gradient threshold, the converger
// and the iteration limit at each major iteration, and the method's own
// tests (a non-finite start, a gradient below 1e-12, the line search's
// errors), so it returns the same best location bit for bit
// (TestMinimizerMatchesGonum checks it on thousands of fits). Minimize
// runs the method, a distributor, a worker and a statistics combiner in
// goroutines of their own that pass every evaluation over channels; for
// the two-parameter problems here that machinery cost more than the
// evaluations (about 60 % of a von Mises fit on 60 bins).
//
// The method's state (BFGS, line search, converger) is reused from one run
// to the next, as Minimize reuses a BFGS value given to it; every run
// starts it afresh (Init), so the results do not depend on earlier runs.
type minimizer struct {
	bfgs optimize.BFGS
	ls   optimize.LinesearchMethod
	loc  optimize.Location
	opt  optimize.Location
	x    []float64
}

// run minimises prob from x0 with the given settings (only
// GradientThreshold, Converger, MajorIterations, FuncEvaluations and
// GradEvaluations are read; Converger must not be nil) and returns the
// best location's value and point (the last major iteration's, as
// optimize.Result reports; +Inf and zeros when there was none). The point
// is valid until the next run.
func (m *minimizer) run(prob optimize.Problem, x0 []float64, s *optimize.Settings) (float64, []float64) {
	dim := len(x0)
	m.x = resize(m.x, dim)
	m.opt.X = resize(m.opt.X, dim)
	clear(m.opt.X)
	m.opt.F = math.Inf(1)
	m.opt.Gradient = nil
	conv := s.Converger
	conv.Init(dim)
	var nf, ng, major int

	// evaluate evaluates op at loc.X and reports whether an evaluation
	// limit ends the run (minimize's worker and checkEvaluationLimits).
	loc := &m.loc
	evaluate := func(op optimize.Operation) (stop bool) {
		copy(m.x, loc.X)
		if op&optimize.FuncEvaluation != 0 {
			loc.F = prob.Func(m.x)
			nf++
		}
		if op&optimize.GradEvaluation != 0 {
			loc.Gradient = resize(loc.Gradient, dim)
			prob.Grad(loc.Gradient, m.x)
			ng++
		}
		return (s.FuncEvaluations > 0 && nf >= s.FuncEvaluations) ||
			(s.GradEvaluations > 0 && ng >= s.GradEvaluations)
	}
	// majorIteration records loc as the best location and reports whether
	// a convergence test or the iteration limit ends the run
	// (performMajorIteration).
	majorIteration := func() (stop bool) {
		m.opt.F = loc.F
		copy(m.opt.X, loc.X)
		m.opt.Gradient = resize(m.opt.Gradient, len(loc.Gradient))
		copy(m.opt.Gradient, loc.Gradient)
		major++
		switch {
		case math.IsInf(m.opt.F, -1):
			return true
		case s.GradientThreshold > 0 && floats.Norm(m.opt.Gradient, math.Inf(1)) < s.GradientThreshold:
			return true
		case conv.Converged(&m.opt) != optimize.NotTerminated:
			return true
		}
		return s.MajorIterations > 0 && major >= s.MajorIterations
	}

	// The initial location: value and gradient (localOptimizer.initialLocation).
	loc.X = resize(loc.X, dim)
	copy(loc.X, x0)
	loc.F = 0
	loc.Gradient = loc.Gradient[:0]
	loc.Hessian = nil
	if evaluate(optimize.FuncEvaluation | optimize.GradEvaluation) {
		return m.opt.F, m.opt.X
	}
	// checkStartingLocation: a non-finite start ends the method.
	if math.IsInf(loc.F, 1) || math.IsNaN(loc.F) {
		return m.opt.F, m.opt.X
	}
	for _, v := range loc.Gradient {
		if math.IsInf(v, 0) || math.IsNaN(v) {
			return m.opt.F, m.opt.X
		}
	}
	if majorIteration() {
		return m.opt.F, m.opt.X
	}
	// BFGS.initLocal: the default line search, then the method's loop
	// (localOptimizer.run).
	if m.bfgs.Linesearcher == nil {
		m.bfgs.Linesearcher = &optimize.Bisection{}
	}
	m.ls.Linesearcher = m.bfgs.Linesearcher
	m.ls.NextDirectioner = &m.bfgs
	op, err := m.ls.Init(loc)
	for err == nil {
		switch {
		case op == optimize.MajorIteration:
			if majorIteration() {
				return m.opt.F, m.opt.X
			}
			// The method's own gradient test (BFGS.GradStopThreshold 0:
			// gonum's default 1e-12).
			if floats.Norm(loc.Gradient, math.Inf(1)) < 1e-12 {
				return m.opt.F, m.opt.X
			}
		case op == optimize.NoOperation:
		case op&^(optimize.FuncEvaluation|optimize.GradEvaluation) == 0:
			if evaluate(op) {
				return m.opt.F, m.opt.X
			}
		default:
			panic("tuning: unexpected operation from the line search: " + op.String())
		}
		op, err = m.ls.Iterate(loc)
	}
	return m.opt.F, m.opt.X
}

// resize returns s with length n, reallocated only when its capacity is
// too small.
func resize(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}
