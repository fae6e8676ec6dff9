package state

import (
	"math"
)

// ConditionTargets writes, for fixed state terms p, the weighted
// per-condition targets and weights that turn the stimulus part of the fit
// into a condition-level problem. dstT and dstW are B x N. With
// g_tn = 1 + a_n.z_t and h_tn = o_n.z_t + b_n,
//
//	W_bn = sum_{t in b} g_tn^2,
//	T_bn = sum_{t in b} g_tn (y_tn - h_tn) / W_bn,
//
// and for any tuning f [derived: expand the square around T_bn]
//
//	sum_t (y_tn - g_tn f_n(s_t) - h_tn)^2 = sum_b W_bn (T_bn - f_bn)^2 + a term free of f.
//
// So a free per-condition tuning is best at f_bn = T_bn, and the shared
// encoder fits the state model's stimulus part exactly by weighted least
// squares on the B rows (T_bn) with per-neuron weights W_bn, as it fits the
// condition means with weights N_b when there is no state
// (eval/methods.md §8); with a = o = b = 0 the two coincide. A condition
// without training trials gets T = 0 and W = 0. Both sums come from the
// condition sums of st in O(B K^2) per neuron:
//
//	W_b = N_b + 2 a.S1_b + a^T S2_b a,
//	W_b T_b = (ybar_b - b)(N_b + a.S1_b) - o.S1_b + a.Cross_b - a^T S2_b o.
//
// Neurons that were not fitted (Status) get NaN targets and weight 0. It
// panics on shape mismatches.
func ConditionTargets(dstT, dstW []float64, st *Stats, p *Params) {
	B, K, N := st.B, st.K, st.N
	if len(dstT) != B*N || len(dstW) != B*N || p.N != N || p.K != K {
		panic("state: ConditionTargets: shape mismatch")
	}
	for j := 0; j < N; j++ {
		if p.Status[j] != Fitted {
			for b := 0; b < B; b++ {
				dstT[b*N+j], dstW[b*N+j] = math.NaN(), 0
			}
			continue
		}
		a, o := p.Gain[j*K:j*K+K], p.Offset[j*K:j*K+K]
		for b := 0; b < B; b++ {
			nb := st.Count[b]
			if nb == 0 {
				dstT[b*N+j], dstW[b*N+j] = 0, 0
				continue
			}
			s1 := st.S1[b*K : b*K+K]
			s2 := st.S2[b*K*K : (b+1)*K*K]
			yb := st.Mean[b*N+j] - p.Bias[j]
			w, r := nb, yb*nb
			for k := 0; k < K; k++ {
				var sa, so float64
				for l := 0; l < K; l++ {
					sa += s2[k*K+l] * a[l]
					so += s2[k*K+l] * o[l]
				}
				w += 2*a[k]*s1[k] + a[k]*sa
				r += yb*a[k]*s1[k] - o[k]*s1[k] + a[k]*st.Cross[(b*K+k)*N+j] - a[k]*so
			}
			dstW[b*N+j] = w
			if w > 0 {
				dstT[b*N+j] = r / w
			} else {
				dstT[b*N+j] = 0
			}
		}
	}
}

// AltOptions control FitAlternating. Zero values pick the defaults.
type AltOptions struct {
	Ridge   float64 // ridge of the state terms, as in FitAffine (default 0)
	Tol     float64 // stop when one round lowers the total objective by less than Tol times it (default 1e-10)
	MaxIter int     // at most this many rounds (default 500)
}

// AltFit is the result of FitAlternating.
type AltFit struct {
	F      []float64 // B x N fitted tuning at the average training state
	Params *Params   // state terms (HasBias false: F absorbs the bias)
	// History holds the total objective (sum over fitted neurons of
	// Objective) after every half-step: regression, tuning, regression, ...
	// It never increases (up to rounding).
	History   []float64
	Rounds    int
	Converged bool
}

// FitAlternating fits the state model with a free per-condition tuning,
//
//	y_tn = (1 + a_n.z_t) f_bn + o_n.z_t,   b = condition of trial t,
//
// by alternating two exact minimisations of the same penalised objective:
// (1) the state terms a, o for fixed f (FitAffine's normal equations without
// the bias column), (2) the tuning f for fixed a, o, which is
// f_bn = T_bn of ConditionTargets. Each half-step minimises the objective
// over its block, so the objective never increases [derived: block
// coordinate descent]; it is bounded below, so it converges. The penalty
// weights of the ridge are computed once, from f0, and kept fixed, so that
// both steps minimise the same function.
//
// The bias is left out because a free tuning absorbs it: (f + d, o + d a,
// b - d) fits exactly as well as (f, o, b) for any d, so with a bias the
// objective would have a flat direction [derived]. With standardised
// covariates f is then the tuning at the average training state.
//
// f0 (B x N) starts the tuning; the training condition means (st.Mean) are
// the natural start, and the stimulus-only least-squares fit. Conditions
// without training trials keep their f0 values. A neuron whose normal
// equations become singular keeps status Confounded, NaN state terms and its
// last tuning, and leaves the total objective. It panics if len(f0) != B*N.
func FitAlternating(st *Stats, f0 []float64, opt AltOptions) *AltFit {
	B, K, N := st.B, st.K, st.N
	if len(f0) != B*N {
		panic("state: FitAlternating: len(f0) != B*N")
	}
	if opt.Tol <= 0 {
		opt.Tol = 1e-10
	}
	if opt.MaxIter <= 0 {
		opt.MaxIter = 500
	}
	if !(opt.Ridge >= 0) {
		panic("state: FitAlternating: ridge must be >= 0")
	}
	f := append([]float64(nil), f0...)
	p := newParams(N, K, false)
	sv := newSolver(K, false)
	// Penalty weights from f0.
	for j := 0; j < N; j++ {
		sv.normal(st, f, j)
		pen := p.Penalty[j*2*K : (j+1)*2*K]
		for i := range pen {
			pen[i] = opt.Ridge * sv.A[i*sv.P+i]
		}
	}
	fit := &AltFit{F: f, Params: p}
	J := make([]float64, N)
	tgt := make([]float64, B*N)
	wt := make([]float64, B*N)
	total := func() float64 {
		Objective(J, st, f, p)
		var s float64
		for _, v := range J {
			if !math.IsNaN(v) {
				s += v
			}
		}
		return s
	}
	prev := math.Inf(1)
	for r := 0; r < opt.MaxIter; r++ {
		for j := 0; j < N; j++ {
			if r > 0 && p.Status[j] != Fitted {
				continue
			}
			sv.normal(st, f, j)
			sv.store(p, j, sv.solve(p.Penalty[j*2*K:(j+1)*2*K]))
		}
		fit.History = append(fit.History, total())
		ConditionTargets(tgt, wt, st, p)
		for i := range f {
			if wt[i] > 0 && !math.IsNaN(tgt[i]) {
				f[i] = tgt[i]
			}
		}
		cur := total()
		fit.History = append(fit.History, cur)
		fit.Rounds = r + 1
		if prev-cur <= opt.Tol*math.Abs(cur) {
			fit.Converged = true
			break
		}
		prev = cur
	}
	return fit
}
