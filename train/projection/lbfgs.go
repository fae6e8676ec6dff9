package projection

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"
)

// lbfgs is the limited-memory quasi-Newton iteration (L-BFGS) that trains
// the filters of the quasi-Newton solvers (MSEQN, PoissonQN) [practice:
// Nocedal J, Wright SJ (2006) Numerical Optimization, 2nd ed., alg. 7.4
// (two-loop recursion) and 3.1 (backtracking) [mem]]. One call of step
// is one iteration: a direction from the last qnMemory steps, then a
// backtracking line search (Armijo) from the full step. Steps whose
// curvature s.y is not positive are not stored; a direction that is not a
// descent direction, or a line search that fails, restarts the memory
// with a steepest-descent step; a failure from steepest descent sets done
// (later iterations change nothing, so early stopping ends the loop).
//
// The solver owns the parameters x and their gradient g; step moves x
// only through the solver's evalAt(t), which must set x = x0 + t d, leave
// the objective's gradient there in g and return the objective (+Inf
// where it cannot be evaluated). It allocates nothing.
type lbfgs struct {
	sMem, yMem [][]float64 // qnMemory x n, ring buffer
	rho        []float64
	head, cnt  int
	x0, g0, d  []float64
	alpha      []float64
	done       bool
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

func newLBFGS(n int) lbfgs {
	q := lbfgs{rho: make([]float64, qnMemory), alpha: make([]float64, qnMemory),
		x0: make([]float64, n), g0: make([]float64, n), d: make([]float64, n)}
	for range qnMemory {
		q.sMem = append(q.sMem, make([]float64, n))
		q.yMem = append(q.yMem, make([]float64, n))
	}
	return q
}

// step runs one iteration from x (objective f0, gradient g). At its end x
// and g are those of the accepted point, or of x0 again when the search
// failed from steepest descent (done is then set).
func (q *lbfgs) step(x, g []float64, f0 float64, evalAt func(t float64) float64) {
	if q.done {
		return
	}
	copy(q.x0, x)
	copy(q.g0, g)
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
			f := evalAt(t)
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
				return
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
	evalAt(0)
}

// direction sets q.d = -H g0 by the two-loop recursion (with no pairs
// stored: a steepest-descent step whose largest component is
// qnFirstStep) and returns g0 . d.
func (q *lbfgs) direction() float64 {
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

// state packs the memory into one slice: head, cnt, done, then rho and
// the step pairs in ring order of storage.
func (q *lbfgs) state() []float64 {
	n := len(q.x0)
	v := make([]float64, 0, 3+qnMemory*(1+2*n))
	done := 0.0
	if q.done {
		done = 1
	}
	v = append(v, float64(q.head), float64(q.cnt), done)
	v = append(v, q.rho...)
	for k := range qnMemory {
		v = append(v, q.sMem[k]...)
		v = append(v, q.yMem[k]...)
	}
	return v
}

// setState restores a memory packed by state.
func (q *lbfgs) setState(v []float64) error {
	n := len(q.x0)
	if len(v) != 3+qnMemory*(1+2*n) {
		return fmt.Errorf("quasi-Newton state of %d values, want %d for %d parameters", len(v), 3+qnMemory*(1+2*n), n)
	}
	head, cnt := int(v[0]), int(v[1])
	if float64(head) != v[0] || float64(cnt) != v[1] || head < 0 || head >= qnMemory || cnt < 0 || cnt > qnMemory || (v[2] != 0 && v[2] != 1) {
		return fmt.Errorf("quasi-Newton state: bad header %v", v[:3])
	}
	q.head, q.cnt, q.done = head, cnt, v[2] == 1
	v = v[3:]
	copy(q.rho, v[:qnMemory])
	v = v[qnMemory:]
	for k := range qnMemory {
		copy(q.sMem[k], v[:n])
		copy(q.yMem[k], v[n:2*n])
		v = v[2*n:]
	}
	return nil
}
