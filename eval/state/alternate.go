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
			num, w := condTW(st, j, b, a, o, p.Bias[j])
			dstW[b*N+j] = w
			if w > 0 {
				dstT[b*N+j] = num / w
			} else {
				dstT[b*N+j] = 0
			}
		}
	}
}

// Method chooses how FitFree minimises the objective.
type Method uint8

const (
	// Joint (the default) takes a Gauss-Newton step in all parameters of a
	// neuron at once (tuning and state terms, the tuning eliminated through
	// the Schur complement so the step costs O(B K^2)), halved until the
	// objective falls, then the exact tuning update. Where the step cannot
	// be taken (singular system, no decrease) it falls back to an
	// alternating round. It reaches the joint optimum in a few rounds where
	// alternating crawls along the valley in which gain and offset trade
	// off.
	Joint Method = iota
	// Alternate alternates the two exact block minimisations: state terms
	// for fixed tuning, tuning for fixed state terms.
	Alternate
)

// FreeOptions control FitFree. Zero values pick the defaults.
type FreeOptions struct {
	Method  Method  // Joint (default) or Alternate
	Ridge   float64 // ridge of the state terms, as in FitAffine (default 0)
	Tol     float64 // a neuron stops when one round lowers its objective by less than Tol times it (default 1e-12)
	MaxIter int     // at most this many rounds (default 500)
}

// FreeFit is the result of FitFree.
type FreeFit struct {
	F      []float64 // B x N fitted tuning at the average training state
	Params *Params   // state terms (HasBias false: F absorbs the bias)
	// History holds the total objective (sum over fitted neurons of
	// Objective) after the first state-term fit and then after every
	// half-step (Joint: joint step, tuning update; Alternate: state terms,
	// tuning). It never increases (up to rounding).
	History []float64
	Rounds  int   // rounds run (the slowest neuron's)
	Stopped []int // per neuron, the round at which it met Tol (0-based); -1 if it never did
}

// Converged reports whether every fitted neuron met the tolerance.
func (a *FreeFit) Converged() bool {
	for j, r := range a.Stopped {
		if r < 0 && a.Params.Status[j] == Fitted {
			return false
		}
	}
	return true
}

// FitFree fits the state model with a free per-condition tuning,
//
//	y_tn = (1 + a_n.z_t) f_bn + o_n.z_t,   b = condition of trial t,
//
// minimising each neuron's penalised objective (Objective) jointly over its
// tuning f_.n and its state terms a_n, o_n. Both methods (see Method) only
// accept steps that do not raise the objective: the alternating half-steps
// are exact minimisations over one block (state terms by FitAffine's normal
// equations without the bias column; tuning by f_bn = T_bn of
// ConditionTargets), and the joint step is halved until the objective
// falls, so the objective never increases and, being bounded below,
// converges [derived: block coordinate descent; Gauss-Newton with
// backtracking]. The ridge's penalty weights are computed once, from f0, and
// kept fixed, so that every step minimises the same function.
//
// The bias is left out because a free tuning absorbs it: (f + d, o + d a,
// b - d) fits exactly as well as (f, o, b) for any d, so with a bias the
// objective would have a flat direction [derived]. With standardised
// covariates f is then the tuning at the average training state.
//
// f0 (B x N) starts the tuning; the training condition means (st.Mean), the
// stimulus-only least-squares fit, are the natural start. Conditions without
// training trials keep their f0 values. A neuron whose state-term normal
// equations are singular at the start gets status Confounded and NaN state
// terms, keeps f0 and is left out of the total objective. Neurons are
// independent, so the result does not depend on the order of the columns.
// It panics if len(f0) != B*N or opt.Ridge < 0.
func FitFree(st *Stats, f0 []float64, opt FreeOptions) *FreeFit {
	B, K, N := st.B, st.K, st.N
	if len(f0) != B*N {
		panic("state: FitFree: len(f0) != B*N")
	}
	if opt.Tol <= 0 {
		opt.Tol = 1e-12
	}
	if opt.MaxIter <= 0 {
		opt.MaxIter = 500
	}
	if !(opt.Ridge >= 0) {
		panic("state: FitFree: ridge must be >= 0")
	}
	f := append([]float64(nil), f0...)
	p := newParams(N, K, false)
	sv := newSolver(K, false)
	fit := &FreeFit{F: f, Params: p, Stopped: make([]int, N)}
	J := make([]float64, N)
	v := make([]float64, K)
	gn := newGaussNewton(B, K)
	// Penalty weights from f0, then the first state-term fit.
	for j := 0; j < N; j++ {
		fit.Stopped[j] = -1
		sv.normal(st, f, j)
		pen := p.Penalty[j*2*K : (j+1)*2*K]
		for i := range pen {
			pen[i] = opt.Ridge * sv.A[i*sv.P+i]
		}
		sv.store(p, j, sv.solve(pen))
	}
	total := func() float64 {
		var s float64
		for j := 0; j < N; j++ {
			if p.Status[j] == Fitted {
				J[j] = objectiveOne(st, f, j, p.Gain[j*K:j*K+K], p.Offset[j*K:j*K+K], 0, p.Penalty[j*2*K:(j+1)*2*K], v)
				s += J[j]
			}
		}
		return s
	}
	fit.History = append(fit.History, total())
	active := func(j int) bool { return p.Status[j] == Fitted && fit.Stopped[j] < 0 }
	prev := append([]float64(nil), J...)
	for r := 0; r < opt.MaxIter; r++ {
		any := false
		for j := 0; j < N; j++ {
			if !active(j) {
				continue
			}
			any = true
			if opt.Method == Joint && gn.step(st, f, p, j, J[j], v) {
				continue
			}
			sv.normal(st, f, j)
			sv.solveKeep(p, j)
		}
		if !any {
			break
		}
		fit.Rounds = r + 1
		fit.History = append(fit.History, total())
		for j := 0; j < N; j++ {
			if active(j) {
				tuningStep(st, f, p, j)
			}
		}
		fit.History = append(fit.History, total())
		for j := 0; j < N; j++ {
			if active(j) {
				if prev[j]-J[j] <= opt.Tol*math.Abs(J[j]) {
					fit.Stopped[j] = r
				}
				prev[j] = J[j]
			}
		}
	}
	return fit
}

// solveKeep solves the state-term normal equations of neuron j (built by
// normal) with p's penalty and stores the result; if the system has become
// singular the previous coefficients are kept, which cannot raise the
// objective.
func (sv *solver) solveKeep(p *Params, j int) {
	K := sv.K
	if sv.solve(p.Penalty[j*2*K : (j+1)*2*K]) {
		copy(p.Gain[j*K:j*K+K], sv.x[:K])
		copy(p.Offset[j*K:j*K+K], sv.x[K:2*K])
	}
}

// tuningStep sets neuron j's tuning to its exact minimiser for fixed state
// terms, f_bj = T_bj (ConditionTargets); conditions with W_b <= 0 keep f.
func tuningStep(st *Stats, f []float64, p *Params, j int) {
	K, N := st.K, st.N
	a, o := p.Gain[j*K:j*K+K], p.Offset[j*K:j*K+K]
	for b := 0; b < st.B; b++ {
		if num, w := condTW(st, j, b, a, o, p.Bias[j]); w > 0 {
			f[b*N+j] = num / w
		}
	}
}

// condTW returns W_b T_b and W_b of ConditionTargets for neuron j.
func condTW(st *Stats, j, b int, a, o []float64, bias float64) (num, w float64) {
	K, N := st.K, st.N
	nb := st.Count[b]
	if nb == 0 {
		return 0, 0
	}
	s1 := st.S1[b*K : b*K+K]
	s2 := st.S2[b*K*K : (b+1)*K*K]
	yb := st.Mean[b*N+j] - bias
	w, num = nb, yb*nb
	for k := 0; k < K; k++ {
		var sa, so float64
		for l := 0; l < K; l++ {
			sa += s2[k*K+l] * a[l]
			so += s2[k*K+l] * o[l]
		}
		w += 2*a[k]*s1[k] + a[k]*sa
		num += yb*a[k]*s1[k] - o[k]*s1[k] + a[k]*st.Cross[(b*K+k)*N+j] - a[k]*so
	}
	return num, w
}

// gaussNewton holds the scratch of one neuron's joint step.
type gaussNewton struct {
	sv              *solver
	c               []float64 // B x 2K: coupling of f_b to the state terms
	G, rf, df, fold []float64 // B
	a, o, zero      []float64 // K, K, 2K
}

func newGaussNewton(B, K int) *gaussNewton {
	return &gaussNewton{sv: newSolver(K, false), c: make([]float64, B*2*K), G: make([]float64, B),
		rf: make([]float64, B), df: make([]float64, B), fold: make([]float64, B),
		a: make([]float64, K), o: make([]float64, K), zero: make([]float64, 2*K)}
}

// step takes one Gauss-Newton step for neuron j from objective value J0 and
// reports whether it lowered the objective. The residual is
// e_t = y_t - (1 + a.z_t) f_b - o.z_t; with g_t = 1 + a.z_t the model's
// derivatives are g_t (f_b), f_b z_t (a) and z_t (o), so the Gauss-Newton
// matrix has a diagonal tuning block G_b = sum_{t in b} g_t^2, couplings
// c_b = (f_b P_b, P_b) with P_b = sum_{t in b} g_t z_t = S1_b + S2_b a, and
// the state-term block of FitAffine; the tuning is eliminated by the Schur
// complement [derived].
func (gn *gaussNewton) step(st *Stats, f []float64, p *Params, j int, J0 float64, v []float64) bool {
	K, N, B := st.K, st.N, st.B
	sv := gn.sv
	P := sv.P
	a, o := p.Gain[j*K:j*K+K], p.Offset[j*K:j*K+K]
	pen := p.Penalty[j*2*K : (j+1)*2*K]
	A, rhs := sv.A, sv.rhs
	clear(A)
	clear(rhs)
	for b := 0; b < B; b++ {
		gn.G[b] = 0
		nb := st.Count[b]
		if nb == 0 {
			continue
		}
		fb := f[b*N+j]
		u := st.Mean[b*N+j] - fb
		s1 := st.S1[b*K : b*K+K]
		s2 := st.S2[b*K*K : (b+1)*K*K]
		c := gn.c[b*2*K : (b+1)*2*K]
		G := nb
		var se, ae float64
		for k := 0; k < K; k++ {
			v[k] = fb*a[k] + o[k]
		}
		for k := 0; k < K; k++ {
			var sa, sv2 float64
			for l := 0; l < K; l++ {
				sa += s2[k*K+l] * a[l]
				sv2 += s2[k*K+l] * v[l]
				A[k*P+l] += fb * fb * s2[k*K+l]
				A[k*P+K+l] += fb * s2[k*K+l]
				A[(K+k)*P+K+l] += s2[k*K+l]
			}
			G += 2*a[k]*s1[k] + a[k]*sa
			Pk := s1[k] + sa
			c[k], c[K+k] = fb*Pk, Pk
			ze := u*s1[k] + st.Cross[(b*K+k)*N+j] - sv2
			rhs[k] += fb * ze
			rhs[K+k] += ze
			se -= v[k] * s1[k]
			ae += a[k] * ze
		}
		se += nb * u
		gn.G[b] = G
		gn.rf[b] = se + ae
	}
	for r := 0; r < P; r++ {
		for cc := r + 1; cc < P; cc++ {
			A[cc*P+r] = A[r*P+cc]
		}
	}
	for k := 0; k < K; k++ {
		A[k*P+k] += pen[k]
		A[(K+k)*P+K+k] += pen[K+k]
		rhs[k] -= pen[k] * a[k]
		rhs[K+k] -= pen[K+k] * o[k]
	}
	for b := 0; b < B; b++ {
		G := gn.G[b]
		if !(G > 0) {
			continue
		}
		c := gn.c[b*2*K : (b+1)*2*K]
		for r := 0; r < P; r++ {
			rhs[r] -= c[r] * gn.rf[b] / G
			for cc := 0; cc < P; cc++ {
				A[r*P+cc] -= c[r] * c[cc] / G
			}
		}
	}
	if !sv.solve(gn.zero) {
		return false
	}
	dx := sv.x
	for b := 0; b < B; b++ {
		gn.fold[b] = f[b*N+j]
		gn.df[b] = 0
		if G := gn.G[b]; G > 0 {
			c := gn.c[b*2*K : (b+1)*2*K]
			d := gn.rf[b]
			for r := 0; r < P; r++ {
				d -= c[r] * dx[r]
			}
			gn.df[b] = d / G
		}
	}
	s := 1.0
	for h := 0; h < 40; h++ {
		for k := 0; k < K; k++ {
			gn.a[k] = a[k] + s*dx[k]
			gn.o[k] = o[k] + s*dx[K+k]
		}
		for b := 0; b < B; b++ {
			f[b*N+j] = gn.fold[b] + s*gn.df[b]
		}
		if Jn := objectiveOne(st, f, j, gn.a, gn.o, 0, pen, v); Jn < J0 {
			copy(a, gn.a)
			copy(o, gn.o)
			return true
		}
		s /= 2
	}
	for b := 0; b < B; b++ {
		f[b*N+j] = gn.fold[b]
	}
	return false
}
