package state

import (
	"fmt"
	"math"
)

// Status tells whether a neuron's state terms could be fitted.
type Status uint8

const (
	// Fitted: the normal equations were solved.
	Fitted Status = iota
	// Confounded: the normal equations are singular to working precision,
	// so gain and offset cannot be told apart (typically a neuron whose
	// tuning f is flat or zero over the training trials, fitted without a
	// ridge). Its coefficients are NaN.
	Confounded
)

func (s Status) String() string {
	switch s {
	case Fitted:
		return "fitted"
	case Confounded:
		return "gain_offset_confounded"
	}
	return fmt.Sprintf("Status(%d)", uint8(s))
}

// Params are the fitted state terms of N neurons on K standardised
// covariates (see Standardizer):
//
//	y_tn = (1 + sum_k Gain[n*K+k] z_tk) f_n(s_t) + sum_k Offset[n*K+k] z_tk + Bias[n].
//
// Penalty (N x 2K) holds the ridge weights the fit used, for a_1..a_K then
// o_1..o_K (see FitAffine); Status[n] says whether neuron n was fitted
// (coefficients NaN otherwise). HasBias is false for fits whose tuning
// absorbs the bias (FitAlternating); Bias is then 0.
type Params struct {
	N, K               int
	Gain, Offset, Bias []float64
	Penalty            []float64
	Status             []Status
	HasBias            bool
}

func newParams(n, k int, bias bool) *Params {
	return &Params{N: n, K: k, Gain: make([]float64, n*k), Offset: make([]float64, n*k),
		Bias: make([]float64, n), Penalty: make([]float64, n*2*k), Status: make([]Status, n), HasBias: bias}
}

// Failed returns the 0-based neurons whose status is not Fitted, in order.
func (p *Params) Failed() []int {
	var out []int
	for n, s := range p.Status {
		if s != Fitted {
			out = append(out, n)
		}
	}
	return out
}

// pivotTol is the relative size below which a Cholesky pivot counts as zero:
// the normal matrix is then treated as singular (condition number beyond
// about 1e10).
const pivotTol = 1e-10

// solver holds the scratch of one neuron's normal equations.
type solver struct {
	K, P      int
	bias      bool
	A, L, rhs []float64
	x         []float64
}

func newSolver(k int, bias bool) *solver {
	p := 2 * k
	if bias {
		p++
	}
	return &solver{K: k, P: p, bias: bias, A: make([]float64, p*p), L: make([]float64, p*p),
		rhs: make([]float64, p), x: make([]float64, p)}
}

// normal builds X^T X and X^T r for neuron j, regressors
// [f_b z_t (K), z_t (K), 1 (if bias)] and target r_t = y_tj - f_b(t),
// from the condition sums of st.
func (sv *solver) normal(st *Stats, f []float64, j int) {
	K, P, N := sv.K, sv.P, st.N
	A, rhs := sv.A, sv.rhs
	clear(A)
	clear(rhs)
	for b := 0; b < st.B; b++ {
		nb := st.Count[b]
		if nb == 0 {
			continue
		}
		fb := f[b*N+j]
		u0 := st.Mean[b*N+j] - fb
		s1 := st.S1[b*K : b*K+K]
		s2 := st.S2[b*K*K : (b+1)*K*K]
		for k := 0; k < K; k++ {
			q := u0*s1[k] + st.Cross[(b*K+k)*N+j]
			rhs[k] += fb * q
			rhs[K+k] += q
			for l := 0; l < K; l++ {
				v := s2[k*K+l]
				A[k*P+l] += fb * fb * v
				A[k*P+K+l] += fb * v
				A[(K+k)*P+K+l] += v
			}
			if sv.bias {
				A[k*P+2*K] += fb * s1[k]
				A[(K+k)*P+2*K] += s1[k]
			}
		}
		if sv.bias {
			A[2*K*P+2*K] += nb
			rhs[2*K] += nb * u0
		}
	}
	// Mirror the upper triangle.
	for r := 0; r < P; r++ {
		for c := r + 1; c < P; c++ {
			A[c*P+r] = A[r*P+c]
		}
	}
}

// solve adds pen (length 2K) to the diagonal of the gain and offset rows and
// solves by Cholesky into sv.x. It reports false when a pivot falls below
// pivotTol times its diagonal entry.
func (sv *solver) solve(pen []float64) bool {
	P := sv.P
	A, L := sv.A, sv.L
	for i := 0; i < 2*sv.K; i++ {
		A[i*P+i] += pen[i]
	}
	copy(L, A)
	for c := 0; c < P; c++ {
		d := L[c*P+c]
		for k := 0; k < c; k++ {
			d -= L[c*P+k] * L[c*P+k]
		}
		if !(d > pivotTol*A[c*P+c]) || !(A[c*P+c] > 0) {
			return false
		}
		d = math.Sqrt(d)
		L[c*P+c] = d
		for r := c + 1; r < P; r++ {
			v := L[r*P+c]
			for k := 0; k < c; k++ {
				v -= L[r*P+k] * L[c*P+k]
			}
			L[r*P+c] = v / d
		}
	}
	x := sv.x
	for r := 0; r < P; r++ {
		v := sv.rhs[r]
		for k := 0; k < r; k++ {
			v -= L[r*P+k] * x[k]
		}
		x[r] = v / L[r*P+r]
	}
	for r := P - 1; r >= 0; r-- {
		v := x[r]
		for k := r + 1; k < P; k++ {
			v -= L[k*P+r] * x[k]
		}
		x[r] = v / L[r*P+r]
	}
	return true
}

// store writes sv.x (or NaN when !ok) into p for neuron j.
func (sv *solver) store(p *Params, j int, ok bool) {
	K := sv.K
	if !ok {
		p.Status[j] = Confounded
		for k := 0; k < K; k++ {
			p.Gain[j*K+k], p.Offset[j*K+k] = math.NaN(), math.NaN()
		}
		if sv.bias {
			p.Bias[j] = math.NaN()
		}
		return
	}
	p.Status[j] = Fitted
	copy(p.Gain[j*K:j*K+K], sv.x[:K])
	copy(p.Offset[j*K:j*K+K], sv.x[K:2*K])
	if sv.bias {
		p.Bias[j] = sv.x[2*K]
	}
}

// FitAffine fits every neuron's state terms with its stimulus tuning held
// fixed: for neuron n, least squares over the training trials of
//
//	y_tn - f_n(s_t)  on  [z_tk f_n(s_t) (k = 1..K), z_tk (k = 1..K), 1],
//
// f_n(s_t) entering as a known offset with coefficient 1. f is B x N, row b
// the tuning of every neuron at condition b (for example the training
// condition means, a von Mises fit, or the encoder's prediction); st holds
// the standardised covariates' statistics (NewStats).
//
// Closed form per neuron: (X^T X + Lambda) beta = X^T r, a system of 2K + 1
// unknowns assembled from the condition sums in O(B K^2) and solved by
// Cholesky [derived: the normal equations of least squares].
//
// Ridge (ridge >= 0, dimensionless; 0 is plain least squares): Lambda is
// diagonal with ridge times the diagonal of X^T X on the gain and offset
// rows and 0 for the bias, so each coefficient is penalised in proportion to
// the mean square of its own regressor. This is ordinary ridge regression on
// regressors scaled to unit root mean square, with penalty ridge W (W
// training trials), an unpenalised intercept, and the coefficients mapped
// back [derived]; it is invariant to the units of y and of f, and a value of
// 1e-3 shrinks a coefficient whose regressor is uncorrelated with the others
// by about 0.1%. A small ridge keeps gain and offset apart for neurons whose
// tuning is nearly flat, where the two regressors are nearly collinear.
//
// A neuron whose normal matrix is singular to working precision gets status
// Confounded and NaN coefficients; nothing panics on data. FitAffine panics
// if len(f) != B*N or ridge < 0.
func FitAffine(st *Stats, f []float64, ridge float64) *Params {
	if len(f) != st.B*st.N {
		panic("state: FitAffine: len(f) != B*N")
	}
	if !(ridge >= 0) {
		panic("state: FitAffine: ridge must be >= 0")
	}
	K := st.K
	p := newParams(st.N, K, true)
	sv := newSolver(K, true)
	for j := 0; j < st.N; j++ {
		sv.normal(st, f, j)
		pen := p.Penalty[j*2*K : (j+1)*2*K]
		for i := range pen {
			pen[i] = ridge * sv.A[i*sv.P+i]
		}
		sv.store(p, j, sv.solve(pen))
	}
	return p
}

// Objective writes into dst (length N) each neuron's penalised training
// objective
//
//	J_n = sum_t (y_tn - (1 + a_n.z_t) f_n(s_t) - o_n.z_t - b_n)^2 + sum_i Penalty[n,i] beta_i^2,
//
// computed from the condition sums [derived: with u_b = ybar_b - f_b - b and
// v_b = f_b a + o, the trials of condition b contribute
// N_b u_b^2 + SSW_b + v_b^T S2_b v_b - 2 u_b v_b.S1_b - 2 v_b.Cross_b].
// Neurons that were not fitted get NaN. It panics on shape mismatches.
func Objective(dst []float64, st *Stats, f []float64, p *Params) {
	if len(dst) != st.N || len(f) != st.B*st.N || p.N != st.N || p.K != st.K {
		panic("state: Objective: shape mismatch")
	}
	K := st.K
	v := make([]float64, K)
	for j := range dst {
		if p.Status[j] != Fitted {
			dst[j] = math.NaN()
			continue
		}
		dst[j] = objectiveOne(st, f, j, p.Gain[j*K:j*K+K], p.Offset[j*K:j*K+K], p.Bias[j],
			p.Penalty[j*2*K:(j+1)*2*K], v)
	}
}

// objectiveOne is Objective for neuron j with state terms a, o, bias and
// penalty weights pen; v is scratch of length K.
func objectiveOne(st *Stats, f []float64, j int, a, o []float64, bias float64, pen, v []float64) float64 {
	K, N := st.K, st.N
	var J float64
	for b := 0; b < st.B; b++ {
		nb := st.Count[b]
		if nb == 0 {
			continue
		}
		fb := f[b*N+j]
		u := st.Mean[b*N+j] - fb - bias
		s1 := st.S1[b*K : b*K+K]
		s2 := st.S2[b*K*K : (b+1)*K*K]
		for k := range v {
			v[k] = fb*a[k] + o[k]
		}
		J += nb*u*u + st.SSW[b*N+j]
		for k := 0; k < K; k++ {
			var q float64
			for l := 0; l < K; l++ {
				q += s2[k*K+l] * v[l]
			}
			J += v[k]*q - 2*u*v[k]*s1[k] - 2*v[k]*st.Cross[(b*K+k)*N+j]
		}
	}
	for k := 0; k < K; k++ {
		J += pen[k]*a[k]*a[k] + pen[K+k]*o[k]*o[k]
	}
	return J
}

// Predict writes the state model's prediction for the given trials into dst
// (M x N row-major, row i for trial trials[i]):
//
//	yhat_in = (1 + a_n.z_t) f_n(s_t) + o_n.z_t + b_n,   t = trials[i],
//
// with f B x N, z T x K standardised covariates (the same Standardizer as
// the fit) and cond[t] the condition of row t. It allocates nothing and
// panics on shape mismatches or a condition outside [0, B).
func Predict(dst []float64, p *Params, f []float64, z []float64, cond []int, trials []int) {
	N, K := p.N, p.K
	if len(f)%N != 0 || len(dst) != len(trials)*N {
		panic("state: Predict: shape mismatch")
	}
	if K > 0 && len(z)%K != 0 {
		panic("state: Predict: len(z) is not a multiple of K")
	}
	B := len(f) / N
	for i, t := range trials {
		b := cond[t]
		if b < 0 || b >= B {
			panic(fmt.Sprintf("state: Predict: trial %d (0-based) has condition %d outside [0, %d)", t, b, B))
		}
		zt := z[t*K : t*K+K]
		fb := f[b*N : b*N+N]
		row := dst[i*N : i*N+N]
		for n := range row {
			g, h := 1.0, p.Bias[n]
			for k, zk := range zt {
				g += p.Gain[n*K+k] * zk
				h += p.Offset[n*K+k] * zk
			}
			row[n] = g*fb[n] + h
		}
	}
}
