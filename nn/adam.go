package nn

import (
	"fmt"
	"math"
)

// Adam is the Adam optimiser (Kingma & Ba 2015, arXiv:1412.6980; eval/methods.md
// §6), with optional weight decay. One Step with gradient g does, for every
// parameter theta:
//
//	g     += WeightDecay * theta               (Decoupled false: L2 inside Adam)
//	theta -= LR * WeightDecay * theta          (Decoupled true: AdamW, Loshchilov & Hutter 2019)
//	m      = Beta1 m + (1-Beta1) g
//	v      = Beta2 v + (1-Beta2) g^2
//	theta -= LR/(1-Beta1^t) * m / (sqrt(v)/sqrt(1-Beta2^t) + Eps)
//
// The last line is the form torch.optim.Adam and AdamW compute (equal to
// LR * mhat/(sqrt(vhat)+Eps)); the decoupled decay is multiplied by LR as in
// torch's AdamW. The state (M, V, T) is exported so that a checkpoint can
// save and restore it.
type Adam struct {
	LR, Beta1, Beta2, Eps float64
	WeightDecay           float64
	Decoupled             bool
	M, V                  []float64
	T                     int // steps taken
}

// NewAdam returns an Adam for nparams parameters with torch's defaults:
// LR 1e-3, Beta1 0.9, Beta2 0.999, Eps 1e-8, no weight decay.
func NewAdam(nparams int) *Adam {
	if nparams < 0 {
		panic(fmt.Sprintf("nn: NewAdam with %d parameters", nparams))
	}
	return &Adam{LR: 1e-3, Beta1: 0.9, Beta2: 0.999, Eps: 1e-8,
		M: make([]float64, nparams), V: make([]float64, nparams)}
}

// Step takes one Adam step, updating params, a.M, a.V and a.T. grads is not
// modified. It panics if params, grads, a.M and a.V differ in length.
func (a *Adam) Step(params, grads []float64) {
	n := len(params)
	if len(grads) != n || len(a.M) != n || len(a.V) != n {
		panic(fmt.Sprintf("nn: Adam step lengths params %d, grads %d, M %d, V %d", n, len(grads), len(a.M), len(a.V)))
	}
	a.T++
	t := float64(a.T)
	b1, b2 := a.Beta1, a.Beta2
	step := a.LR / (1 - math.Pow(b1, t))
	rbc2 := 1 / math.Sqrt(1-math.Pow(b2, t))
	eps, wd := a.Eps, a.WeightDecay
	decay := 1 - a.LR*wd
	m, v, g := a.M[:n], a.V[:n], grads[:n]
	switch {
	case wd == 0:
		for i, gi := range g {
			mi := b1*m[i] + (1-b1)*gi
			vi := b2*v[i] + (1-b2)*gi*gi
			m[i], v[i] = mi, vi
			params[i] -= step * mi / (math.Sqrt(vi)*rbc2 + eps)
		}
	case a.Decoupled:
		for i, gi := range g {
			p := params[i] * decay
			mi := b1*m[i] + (1-b1)*gi
			vi := b2*v[i] + (1-b2)*gi*gi
			m[i], v[i] = mi, vi
			params[i] = p - step*mi/(math.Sqrt(vi)*rbc2+eps)
		}
	default:
		for i, gi := range g {
			gi += wd * params[i]
			mi := b1*m[i] + (1-b1)*gi
			vi := b2*v[i] + (1-b2)*gi*gi
			m[i], v[i] = mi, vi
			params[i] -= step * mi / (math.Sqrt(vi)*rbc2 + eps)
		}
	}
}
