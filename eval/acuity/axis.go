package acuity

import (
	"fmt"
	"math"
)

// Conditions are the stimulus values of the conditions on their axis: Values[b] is the stimulus value
// of condition b in axis units (degrees, cm, Hz, ...), strictly increasing.
// Period > 0 marks a periodic axis (360 for direction, 180 for orientation)
// whose values lie within one period (Values[B-1] - Values[0] < Period);
// Period 0 marks a bounded axis.
type Conditions struct {
	Values []float64
	Period float64
}

// Periodic reports whether the axis wraps around.
func (ax Conditions) Periodic() bool { return ax.Period > 0 }

// NBins returns the number of conditions B.
func (ax Conditions) NBins() int { return len(ax.Values) }

// check validates the axis. It returns an error naming the offending value.
func (ax Conditions) check() error {
	B := len(ax.Values)
	if B < 2 {
		return fmt.Errorf("acuity: axis has %d conditions, need at least 2", B)
	}
	if math.IsNaN(ax.Period) || math.IsInf(ax.Period, 0) || ax.Period < 0 {
		return fmt.Errorf("acuity: axis period %v must be 0 (bounded) or positive and finite", ax.Period)
	}
	for b, v := range ax.Values {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("acuity: axis value of condition %d is %v", b, v)
		}
		if b > 0 && !(v > ax.Values[b-1]) {
			return fmt.Errorf("acuity: axis values must increase strictly: condition %d has %v after %v", b, v, ax.Values[b-1])
		}
	}
	if ax.Periodic() && !(ax.Values[B-1]-ax.Values[0] < ax.Period) {
		return fmt.Errorf("acuity: axis values span %v, not less than the period %v", ax.Values[B-1]-ax.Values[0], ax.Period)
	}
	return nil
}

// Diff returns the signed difference x - y in axis units. On a periodic axis
// it is the shortest signed difference, in [-Period/2, Period/2).
func (ax Conditions) Diff(x, y float64) float64 {
	d := x - y
	if !ax.Periodic() {
		return d
	}
	P := ax.Period
	d = math.Mod(d+P/2, P)
	if d < 0 {
		d += P
	}
	return d - P/2
}

// Pair is a pair of neighbouring conditions A and B: B = A+1, or on a
// periodic axis the wrap pair A = NBins-1, B = 0. Ds is the stimulus step from
// A to B (positive, axis units) and Stim the midpoint, on a periodic axis
// wrapped into [Values[0], Values[0]+Period).
type Pair struct {
	A, B     int
	Stim, Ds float64
}

// Pairs returns the neighbouring pairs of the axis in order: (0,1), (1,2),
// ..., (B-2,B-1), and on a periodic axis last the wrap pair (B-1,0). The axis
// must be valid (see the package documentation); Pairs returns nil otherwise.
func (ax Conditions) Pairs() []Pair {
	if ax.check() != nil {
		return nil
	}
	v := ax.Values
	B := len(v)
	ps := make([]Pair, 0, B)
	for b := 0; b+1 < B; b++ {
		ps = append(ps, Pair{A: b, B: b + 1, Ds: v[b+1] - v[b], Stim: (v[b] + v[b+1]) / 2})
	}
	if ax.Periodic() {
		ds := v[0] + ax.Period - v[B-1]
		mid := v[B-1] + ds/2
		if mid >= v[0]+ax.Period {
			mid -= ax.Period
		}
		ps = append(ps, Pair{A: B - 1, B: 0, Ds: ds, Stim: mid})
	}
	return ps
}

// groupTrials returns the trial indices of each condition in trial order. It
// checks cond against nbins and len(y) = trials*n.
func groupTrials(y []float32, n int, cond []int, nbins int) ([][]int, error) {
	if n <= 0 {
		panic("acuity: number of neurons must be positive")
	}
	if len(y) != len(cond)*n {
		panic(fmt.Sprintf("acuity: len(y) = %d, want trials*neurons = %d*%d", len(y), len(cond), n))
	}
	counts := make([]int, nbins)
	for t, c := range cond {
		if c < 0 || c >= nbins {
			return nil, fmt.Errorf("acuity: trial %d has condition %d, want 0..%d", t, c, nbins-1)
		}
		counts[c]++
	}
	g := make([][]int, nbins)
	flat := make([]int, len(cond))
	off := 0
	for b, k := range counts {
		g[b] = flat[off : off : off+k]
		off += k
	}
	for t, c := range cond {
		g[c] = append(g[c], t)
	}
	return g, nil
}
