package projection

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/lapack"
	"gonum.org/v1/gonum/lapack/lapack64"

	"github.com/strialab/stria/nn"
)

// The Poisson fast path: the projected solver for loss poisson with a
// softplus or exp output on one-hot input, full batch, raw counts. It
// minimises exactly the adam path's objective,
//
//	J = 1/(W N) sum_n [ sum_b (N_b f(u_bn) - S_bn log(f(u_bn) + eps)) + mu ||w_n||^2 ],
//	u_bn = h_b . w_n + c_n,  mu = lambda W / 2,  eps = nn.PoissonEps,
//
// (S_bn the spike sum of neuron n over the N_b training trials of bin b;
// eval/methods.md §8), by optimising each neuron's readout for fixed
// filters and the filters on the resulting projected loss [derived]:
//
//   - Representer: the data term reads w_n only through H_t w_n (H_t the
//     Bt x F features of the training rows), so the optimal w_n lies in the
//     row space of H_t. With the eigendecomposition H_t H_t^T = V diag(s) V^T
//     (eigenvalues below psRankTol s_max dropped, r kept), Qt = diag(s)^-1/2
//     V^T H_t (r x F) has orthonormal rows and w_n = Qt^T beta_n,
//     ||w_n|| = ||beta_n||, H_t w_n = Phi beta_n with Phi = V diag(s)^1/2
//     (Bt x r). Each neuron is then an (r+1)-dimensional convex problem in
//     (beta_n, c_n), r <= Bt.
//
//   - Newton's method with a backtracking line search solves it, with the
//     exact Hessian X^T diag(omega) X + 2 mu diag(1,..,1,0), X = [Phi 1],
//     omega_b = f”(u) (N_b - S_b/(f+eps)) + S_b f'(u)^2/(f+eps)^2 (clipped at
//     0), warm-started from the previous epoch's readout projected on the new
//     basis (beta <- Qt_new Qt_old^T beta: the old w_n projected on the new
//     row space). Neurons are solved in parallel; the work of each neuron
//     does not depend on the partition, so results do not depend on the
//     number of cores.
//
//   - Envelope theorem: at the per-neuron optima, dJ/dh_b = 1/(W N) sum_n
//     g_bn w_n with g_bn = f'(u_bn) (N_b - S_bn/(f(u_bn)+eps)), i.e.
//     dJ/dH_t = G^T Beta Qt / (W N) (G N x Bt, Beta N x r).
//
//   - Training epochs do not solve the readouts to convergence: the filters
//     move little per epoch, so each neuron takes inexact Newton steps from
//     its previous readout (conjugate gradients on the Newton system,
//     preconditioned by its diagonal; stepNeuron) until one lands in the
//     region of quadratic convergence, usually the first. The readouts, and
//     with them the envelope gradient, trail the exact ones by a small
//     fraction of one epoch's change, and a point where training stops
//     moving is one of the exact projected objective. The final readout,
//     Evaluate and the penalty choice solve exactly (eval/methods.md §13).
//
// Cost per epoch: one eigendecomposition of a Bt x Bt matrix and products
// of Bt x F and r x F matrices (independent of N), and per neuron O(Bt r)
// per conjugate-gradient iteration (about three per epoch) instead of the
// O(Bt r^2 + r^3) of forming and factoring its Hessian; an exact solve
// costs the latter per Newton iteration.
type poissonProj struct {
	B, Bt, Bv, F, N int
	rows, vrows     []int
	cnt, vcnt       []float64 // Bt, Bv: trials of each row
	sum             []float64 // N x Bt: training spike sums S_bn, neuron-major
	vsum            []float64 // N x Bv: validation spike sums
	vsq             []float64 // N: sum of squares over the validation trials
	valTot          []float64 // N: total sum of squares about the validation mean
	W, Wv, mu       float64
	// skip marks the excluded neurons (N); nTrained is the number of the
	// others, by which the losses are means.
	skip     []bool
	nTrained int
	// muN, when not nil, is each neuron's penalty in place of mu (N).
	muN   []float64
	act   nn.Activation
	nconv int

	work   *nn.Work
	eye    []float64
	oneHot *oneHotConv

	// Basis of the current features.
	r          int
	kmat, evec []float64 // Bt x Bt
	eigval     []float64 // Bt eigenvalues (ascending)
	syevWork   []float64
	phi        []float64 // Bt x (Bt+1), X = [Phi 1], first r+1 columns used (stride Bt+1)
	phi2       []float64 // Bt x (Bt+1): X o X, element-wise (diag(H) = phi2^T omega + 2 mu)
	qt, qtOld  []float64 // r x F (capacity Bt x F)
	rOld       int
	transfer   []float64 // r x rOld
	phiV       []float64 // Bv x r (capacity Bv x Bt)
	hasOld     bool
	h          []float64 // B x F features of the last eval
	dH         []float64 // B x F
	dHt        []float64 // Bt x F: dJ/dH_t
	vs         []float64 // Bt x Bt: diag(s)^-1/2 V^T
	hv         []float64 // Bv x F: features of the validation rows
	gb         []float64 // Bt x r
	betaTmp    []float64 // N x Bt

	// Per-neuron state: beta (N x Bt, first r used), c (N), gradient rows
	// g (N x Bt), the neuron's objective and data loss.
	beta, c, g  []float64
	objN, dataN []float64
	iters       []int     // Newton iterations of each neuron in the last solve (0: an inexact step)
	cgIters     []int     // conjugate-gradient iterations of each neuron's last inexact step
	uv          []float64 // N x Bv
	r2          []float64
	valN        []float64 // N: each neuron's validation loss (sum over trials)
	// The validation rows of bins with training rows share their u with
	// those: vOfRow (Bt) is the validation row of training row i (-1:
	// none), vOnly the validation rows of bins without training rows.
	// Each solve leaves, per neuron, the validation loss and the sums
	// f.S and N f^2 of the R^2 over the shared rows in valS, crossS,
	// quadS (N each), from the f and log f of its final readout.
	vOfRow, vOnly       []int
	valS, crossS, quadS []float64
	workers             []*psWorker

	obj, loss, val, vr2 float64
	r2Every             int
	// mode: how solveAll moves the readouts (psExact, psStart, psStep).
	mode int
}

// psRankTol drops eigen-directions of H_t H_t^T below this fraction of the
// largest eigenvalue: their contribution to H_t w is below 1e-5 of the
// largest direction's, and the ridge keeps their coefficients small.
const psRankTol = 1e-10

// Newton's stopping rule: stop after the step whose Newton decrement
// grad . H^-1 grad is below psNewtonTol (1 + |objective|); the step taken
// leaves an error of the order of the decrement squared. Steps with a
// decrement below psNewtonFull (1 + |objective|) are taken in full, without
// a line search: there the method converges quadratically, and a decrease
// that small is below the rounding of the objective. psMaxNewton bounds the
// iterations of one solve.
const (
	psNewtonTol  = 1e-13
	psNewtonFull = 1e-8
	psMaxNewton  = 100
)

// The inexact steps (stepNeuron): conjugate gradients preconditioned by
// the Hessian's diagonal stop once the preconditioned residual r.M^-1 r
// has fallen below psCGTol times its start (the residual norm about ten
// times smaller) or after psCGMax iterations. A full step is taken when
// its Newton decrement is at most psStepMaxDec (in units of the neuron's
// log-likelihood: about the region where Newton's method converges
// quadratically), a shortened one otherwise.
const (
	psCGTol      = 1e-2
	psCGMax      = 12
	psStepMaxDec = 1
)

// Modes of solveAll: exact readouts (Evaluate, the final readout, the
// penalty choice: solveNeuron to psNewtonTol); the start of training and
// the penalty grid (inexact steps from the mean-rate start or the previous
// grid value until the decrement is below psStartTol, at most
// psStartSteps); a training epoch (inexact steps from the previous epoch's
// readout until one with a decrement at most psStepMaxDec has been taken
// in full). A neuron whose inexact steps cannot be taken is solved
// exactly.
const (
	psExact = iota
	psStart
	psStep

	psStartSteps = 50
	psStartTol   = 1e-6
)

// newPoissonProj reduces a prepared recording to the per-condition spike
// sums of the Poisson fast path. The config must ask for loss poisson with
// a softplus or exp output on raw (not z-scored) one-hot data.
func newPoissonProj(pr *Problem, net *nn.Net) (*poissonProj, error) {
	if pr.Norm != nil {
		return nil, fmt.Errorf("train: the Poisson fast path needs model.loss poisson, split.zscore false and axis.encoding onehot")
	}
	if net.Output != nn.Softplus && net.Output != nn.Exp {
		return nil, fmt.Errorf("train: the Poisson fast path needs model.output softplus or exp")
	}
	if !(pr.Penalty > 0) {
		return nil, fmt.Errorf("train: the Poisson fast path needs model.readout_l2 > 0 (it is %v)", pr.Penalty)
	}
	B, N, F := pr.Train.B, pr.Train.N, net.Features()
	pp := &poissonProj{B: B, N: N, F: F, act: net.Output}
	st := pr.Train
	for b, c := range st.Count {
		if c > 0 {
			pp.rows = append(pp.rows, b)
		}
	}
	Bt := len(pp.rows)
	if Bt == 0 {
		return nil, fmt.Errorf("train: no training trials")
	}
	pp.Bt = Bt
	pp.W = float64(trials(pr.Train))
	pp.mu = pr.Penalty * pp.W / 2
	pp.cnt = make([]float64, Bt)
	pp.sum = make([]float64, N*Bt)
	for r, b := range pp.rows {
		pp.cnt[r] = float64(st.Count[b])
		for n, s := range st.Sum[b*N : (b+1)*N] {
			if s < 0 || math.IsNaN(s) {
				return nil, fmt.Errorf("train: %s has a negative response sum in %s: the Poisson loss needs counts >= 0", pr.neuronName(n), pr.binLabel(b))
			}
			pp.sum[n*Bt+r] = s
		}
	}
	if pr.hasVal() {
		sv := pr.Val
		for b, c := range sv.Count {
			if c > 0 {
				pp.vrows = append(pp.vrows, b)
			}
		}
		Bv := len(pp.vrows)
		pp.Bv = Bv
		pp.Wv = float64(trials(pr.Val))
		pp.vcnt = make([]float64, Bv)
		pp.vsum = make([]float64, N*Bv)
		pp.vsq = make([]float64, N)
		pp.valTot = make([]float64, N)
		grand := make([]float64, N)
		for r, b := range pp.vrows {
			pp.vcnt[r] = float64(sv.Count[b])
			for n, s := range sv.Sum[b*N : (b+1)*N] {
				pp.vsum[n*Bv+r] = s
				pp.vsq[n] += sv.SumSq[b*N+n]
				grand[n] += s
			}
		}
		for n := range pp.valTot {
			pp.valTot[n] = pp.vsq[n] - grand[n]*grand[n]/pp.Wv
		}
		pp.phiV = make([]float64, Bv*Bt)
		pp.uv = make([]float64, N*Bv)
		pp.r2 = make([]float64, N)
		pp.valN = make([]float64, N)
		pp.valS, pp.crossS, pp.quadS = make([]float64, N), make([]float64, N), make([]float64, N)
		vOf := make(map[int]int, Bv)
		for j, b := range pp.vrows {
			vOf[b] = j
		}
		pp.vOfRow = make([]int, Bt)
		for i, b := range pp.rows {
			pp.vOfRow[i] = -1
			if j, ok := vOf[b]; ok {
				pp.vOfRow[i] = j
				delete(vOf, b)
			}
		}
		for j, b := range pp.vrows {
			if _, ok := vOf[b]; ok {
				pp.vOnly = append(pp.vOnly, j)
			}
		}
		pp.r2Every = 1
	}
	pp.work = net.NewWork(B)
	pp.eye = make([]float64, B*B)
	for b := 0; b < B; b++ {
		pp.eye[b*B+b] = 1
	}
	if usableOneHot(net) {
		pp.oneHot = newOneHotConv(net)
	}
	pp.kmat = make([]float64, Bt*Bt)
	pp.evec = make([]float64, Bt*Bt)
	pp.eigval = make([]float64, Bt)
	var q [1]float64
	lapack64.Syev(lapack.EVCompute, blas64.Symmetric{Uplo: blas.Upper, N: Bt, Stride: Bt, Data: pp.evec}, pp.eigval, q[:], -1)
	pp.syevWork = make([]float64, int(q[0]))
	pp.phi = make([]float64, Bt*(Bt+1))
	pp.phi2 = make([]float64, Bt*(Bt+1))
	pp.qt = make([]float64, Bt*F)
	pp.qtOld = make([]float64, Bt*F)
	pp.transfer = make([]float64, Bt*Bt)
	pp.dH = make([]float64, B*F)
	pp.dHt = make([]float64, Bt*F)
	pp.vs = make([]float64, Bt*Bt)
	pp.hv = make([]float64, pp.Bv*F)
	pp.gb = make([]float64, Bt*Bt)
	pp.beta = make([]float64, N*Bt)
	pp.betaTmp = make([]float64, N*Bt)
	pp.c = make([]float64, N)
	pp.g = make([]float64, N*Bt)
	pp.objN = make([]float64, N)
	pp.dataN = make([]float64, N)
	pp.iters = make([]int, N)
	pp.cgIters = make([]int, N)
	// Start every neuron at its mean rate (as initReadout does).
	for n := range pp.c {
		var s float64
		for _, v := range pp.sum[n*Bt : (n+1)*Bt] {
			s += v
		}
		pp.c[n] = invLink(net.Output, s/pp.W)
	}
	pp.skip = make([]bool, N)
	for _, n := range pr.Excluded {
		if n < 0 || n >= N {
			panic(fmt.Sprintf("projection: excluded neuron %d of %d", n, N))
		}
		pp.skip[n] = true
	}
	pp.nTrained = N - len(pr.Excluded)
	pp.nconv = len(net.Params) - N*F - N
	nw := max(1, min(runtime.GOMAXPROCS(0), (N+63)/64))
	for range nw {
		pp.workers = append(pp.workers, newPSWorker(Bt))
	}
	return pp, nil
}

// muOf is neuron n's penalty mu.
func (pp *poissonProj) muOf(n int) float64 {
	if pp.muN != nil {
		return pp.muN[n]
	}
	return pp.mu
}

// invLink returns u with f(u) = max(m, 1e-3).
func invLink(a nn.Activation, m float64) float64 {
	m = math.Max(m, 1e-3)
	if a == nn.Exp {
		return math.Log(m)
	}
	return m + math.Log(-math.Expm1(-m))
}

// features runs the conv stack on every bin.
func (pp *poissonProj) features(net *nn.Net) []float64 {
	if pp.oneHot != nil {
		pp.h = pp.oneHot.forward(net)
	} else {
		pp.h = net.ForwardFeatures(pp.work, pp.eye, pp.B)
	}
	return pp.h
}

// basis forms Phi and Qt for the features h (see the type comment) and
// moves the readouts of the previous basis onto the new one.
func (pp *poissonProj) basis(h []float64) error {
	Bt, F := pp.Bt, pp.F
	ht := pp.dH[:Bt*F] // scratch: training rows of h
	for r, b := range pp.rows {
		copy(ht[r*F:(r+1)*F], h[b*F:(b+1)*F])
	}
	blas64.Gemm(blas.NoTrans, blas.Trans, 1,
		blas64.General{Rows: Bt, Cols: F, Stride: F, Data: ht},
		blas64.General{Rows: Bt, Cols: F, Stride: F, Data: ht},
		0, blas64.General{Rows: Bt, Cols: Bt, Stride: Bt, Data: pp.kmat})
	for _, v := range pp.kmat {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("train: Poisson fast path: the features are not finite")
		}
	}
	copy(pp.evec, pp.kmat)
	if !lapack64.Syev(lapack.EVCompute, blas64.Symmetric{Uplo: blas.Upper, N: Bt, Stride: Bt, Data: pp.evec}, pp.eigval, pp.syevWork, len(pp.syevWork)) {
		return fmt.Errorf("train: Poisson fast path: the eigendecomposition of the feature kernel did not converge")
	}
	smax := pp.eigval[Bt-1]
	// Kept directions: the r largest eigenvalues, in descending order.
	r := 0
	for j := Bt - 1; j >= 0 && pp.eigval[j] > psRankTol*smax && smax > 0; j-- {
		r++
	}
	pp.qt, pp.qtOld = pp.qtOld, pp.qt
	pp.rOld = pp.r
	pp.r = r
	p1 := Bt + 1
	for i := 0; i < Bt; i++ {
		row := pp.phi[i*p1 : (i+1)*p1]
		clear(row)
		for k := 0; k < r; k++ {
			j := Bt - 1 - k
			row[k] = pp.evec[i*Bt+j] * math.Sqrt(pp.eigval[j])
		}
		row[r] = 1
		for k, v := range row {
			pp.phi2[i*p1+k] = v * v
		}
	}
	// Qt = diag(s)^-1/2 V^T H_t, one product of (r x Bt) and (Bt x F).
	if r > 0 {
		vs := pp.vs[:r*Bt]
		for k := 0; k < r; k++ {
			j := Bt - 1 - k
			s := 1 / math.Sqrt(pp.eigval[j])
			for i := 0; i < Bt; i++ {
				vs[k*Bt+i] = pp.evec[i*Bt+j] * s
			}
		}
		blas64.Gemm(blas.NoTrans, blas.NoTrans, 1,
			blas64.General{Rows: r, Cols: Bt, Stride: Bt, Data: vs},
			blas64.General{Rows: Bt, Cols: F, Stride: F, Data: ht},
			0, blas64.General{Rows: r, Cols: F, Stride: F, Data: pp.qt[:r*F]})
	}
	if pp.hasOld && pp.rOld > 0 && r > 0 {
		// beta_new = (Qt_new Qt_old^T) beta_old for every neuron.
		ro := pp.rOld
		blas64.Gemm(blas.NoTrans, blas.Trans, 1,
			blas64.General{Rows: r, Cols: F, Stride: F, Data: pp.qt[:r*F]},
			blas64.General{Rows: ro, Cols: F, Stride: F, Data: pp.qtOld[:ro*F]},
			0, blas64.General{Rows: r, Cols: ro, Stride: ro, Data: pp.transfer[:r*ro]})
		N := pp.N
		copy(pp.betaTmp, pp.beta)
		blas64.Gemm(blas.NoTrans, blas.Trans, 1,
			blas64.General{Rows: N, Cols: ro, Stride: Bt, Data: pp.betaTmp},
			blas64.General{Rows: r, Cols: ro, Stride: ro, Data: pp.transfer},
			0, blas64.General{Rows: N, Cols: r, Stride: Bt, Data: pp.beta})
		for n := 0; n < N; n++ {
			clear(pp.beta[n*Bt+r : (n+1)*Bt])
		}
	} else if !pp.hasOld {
		clear(pp.beta)
	}
	pp.hasOld = true
	return nil
}

// psWorker is the scratch space of one goroutine of the per-neuron solve.
type psWorker struct {
	u, xs, hess, step, grad, trial, try []float64
	// The inexact step's conjugate gradients: omega (Bt), the diagonal,
	// residual, preconditioned residual, direction and Hessian times
	// direction (p each).
	om, diag, res, z, dir, hd []float64
	// g, xd, xv, un, gn (Bt each): gradient rows, X d, X dir, the trial
	// point's u (and scratch), its gradient rows.
	g, xd, xv, un, gn []float64
	// f, lf: f(u) and log(f(u) + eps) of the final readout's rows; fn,
	// lfn: those of the trial point (Bt each).
	f, lf, fn, lfn []float64
}

func newPSWorker(Bt int) *psWorker {
	p := Bt + 1
	return &psWorker{
		om: make([]float64, Bt), diag: make([]float64, p), res: make([]float64, p),
		z: make([]float64, p), dir: make([]float64, p), hd: make([]float64, p),
		g: make([]float64, Bt), xd: make([]float64, Bt), xv: make([]float64, Bt), un: make([]float64, Bt), gn: make([]float64, Bt),
		f: make([]float64, Bt), lf: make([]float64, Bt), fn: make([]float64, Bt), lfn: make([]float64, Bt),
		u:  make([]float64, Bt),
		xs: make([]float64, Bt*p), hess: make([]float64, p*p), step: make([]float64, p),
		grad: make([]float64, p), trial: make([]float64, p), try: make([]float64, p),
	}
}

// linkTerms returns f(u), f'(u) and f”(u) of the output nonlinearity.
func linkTerms(a nn.Activation, u float64) (f, d1, d2 float64) {
	if a == nn.Exp {
		e := math.Exp(u)
		return e, e, e
	}
	// One exponential: e = exp(-|u|), softplus = max(u, 0) + log1p(e),
	// sigmoid = 1/(1+e) for u >= 0 and e/(1+e) below.
	e := math.Exp(-math.Abs(u))
	sp := math.Log1p(e)
	s := 1 / (1 + e)
	if u > 0 {
		sp += u
	} else if u < 0 {
		s = e / (1 + e)
	}
	return sp, s, s * (1 - s)
}

// objective returns the neuron's objective and data loss at theta =
// (beta[:r], c), with u = X theta written into w.u.
func (pp *poissonProj) objective(w *psWorker, theta []float64, sum []float64, mu float64) (obj, data float64) {
	Bt, r, p1 := pp.Bt, pp.r, pp.Bt+1
	c := theta[r]
	for i := 0; i < Bt; i++ {
		row := pp.phi[i*p1 : i*p1+r]
		u := c
		for k, v := range row {
			u += v * theta[k]
		}
		w.u[i] = u
		var f float64
		if pp.act == nn.Exp {
			f = math.Exp(u)
		} else if u > 0 {
			f = u + math.Log1p(math.Exp(-u))
		} else {
			f = math.Log1p(math.Exp(u))
		}
		data += pp.cnt[i]*f - sum[i]*math.Log(f+nn.PoissonEps)
	}
	var pen float64
	for _, v := range theta[:r] {
		pen += v * v
	}
	return data + mu*pen, data
}

// solveNeuron runs Newton's method on neuron n from its stored readout
// until the Newton decrement is below psNewtonTol (1 + |objective|): the
// exact readout. In the modes psStart and psStep (training) it takes
// inexact steps instead (stepNeuron) and solves exactly only when they
// cannot be taken.
func (pp *poissonProj) solveNeuron(w *psWorker, n int) {
	switch pp.mode {
	case psStep:
		if pp.stepNeuron(w, n, psStartSteps, psStepMaxDec, true) {
			return
		}
	case psStart:
		if pp.stepNeuron(w, n, psStartSteps, psStartTol, true) {
			return
		}
	}
	Bt, r, p1 := pp.Bt, pp.r, pp.Bt+1
	p := r + 1
	sum := pp.sum[n*Bt : (n+1)*Bt]
	mu := pp.muOf(n)
	// x: current parameters (beta[:r], c); step: Newton step; try: the
	// line search's trial point; xs: sqrt(omega) X, transposed (p x Bt).
	x := w.trial[:p]
	copy(x, pp.beta[n*Bt:n*Bt+r])
	x[r] = pp.c[n]
	obj, data := pp.objective(w, x, sum, mu)
	hs := w.hess[:p*p]
	it := 0
	for ; it < psMaxNewton; it++ {
		// Gradient and Hessian at x; w.u holds X x.
		grad := w.grad[:p]
		clear(grad)
		for i := 0; i < Bt; i++ {
			f, d1, d2 := linkTerms(pp.act, w.u[i])
			fe := f + nn.PoissonEps
			ratio := sum[i] / fe
			gi := d1 * (pp.cnt[i] - ratio)
			row := pp.phi[i*p1 : i*p1+p]
			for k, v := range row {
				grad[k] += gi * v
			}
			om := d2*(pp.cnt[i]-ratio) + ratio*d1*d1/fe
			if !(om > 0) {
				om = 0
			}
			sq := math.Sqrt(om)
			for k, v := range row {
				w.xs[k*Bt+i] = sq * v
			}
		}
		for k := 0; k < r; k++ {
			grad[k] += 2 * mu * x[k]
		}
		// Upper triangle of X^T diag(omega) X + 2 mu diag(1..1, 0).
		var tr float64
		for k := 0; k < p; k++ {
			xk := w.xs[k*Bt : (k+1)*Bt]
			for l := k; l < p; l++ {
				hs[k*p+l] = floats.Dot(xk, w.xs[l*Bt:(l+1)*Bt])
			}
			tr += hs[k*p+k]
		}
		damp := 1e-14 * (tr/float64(p) + 2*mu)
		for k := 0; k < p; k++ {
			hs[k*p+k] += damp
			if k < r {
				hs[k*p+k] += 2 * mu
			}
		}
		if _, ok := lapack64.Potrf(blas64.Symmetric{Uplo: blas.Upper, N: p, Stride: p, Data: hs}); !ok {
			break
		}
		step := w.step[:p]
		for k := range step {
			step[k] = -grad[k]
		}
		cholSolve(hs, p, step)
		var dec float64
		for k, v := range step {
			dec -= v * grad[k]
		}
		if !(dec > 0) {
			break
		}
		if dec <= psNewtonFull*(1+math.Abs(obj)) {
			// Close to the optimum: the full step, without a line search
			// (whose test cannot resolve decreases this small in float64).
			for k := range step {
				x[k] += step[k]
			}
			obj, data = pp.objective(w, x, sum, mu)
			if dec <= psNewtonTol*(1+math.Abs(obj)) {
				it++
				break
			}
			continue
		}
		// Backtracking line search (Armijo, factor 1/2).
		t := 1.0
		var newObj, newData float64
		accepted := false
		for ls := 0; ls < 60; ls++ {
			try := w.try[:p]
			for k := range step {
				try[k] = x[k] + t*step[k]
			}
			newObj, newData = pp.objective(w, try, sum, mu)
			if newObj <= obj-1e-4*t*dec {
				accepted = true
				break
			}
			t /= 2
		}
		if !accepted {
			// Restore u at x and stop: no descent at machine precision.
			pp.objective(w, x, sum, mu)
			break
		}
		copy(x, w.try[:p])
		obj, data = newObj, newData
	}
	// Gradient rows g_bn at the final x for the envelope gradient.
	g := pp.g[n*Bt : (n+1)*Bt]
	for i := 0; i < Bt; i++ {
		f, d1, _ := linkTerms(pp.act, w.u[i])
		fe := f + nn.PoissonEps
		g[i] = d1 * (pp.cnt[i] - sum[i]/fe)
		w.f[i], w.lf[i] = f, math.Log(fe)
	}
	pp.valShared(n, w.f[:Bt], w.lf[:Bt])
	copy(pp.beta[n*Bt:n*Bt+r], x[:r])
	pp.c[n] = x[r]
	pp.objN[n], pp.dataN[n] = obj, data
	pp.iters[n] = it
}

// stepNeuron moves neuron n's readout from its stored value by inexact
// Newton steps and reports whether it did; if not, nothing is changed. It
// takes at most maxSteps steps and stops after one whose Newton decrement
// is at most tol. Each step solves H d = -grad (the exact gradient and
// Hessian of solveNeuron) approximately by conjugate gradients
// preconditioned with diag(H), from d = 0, until the preconditioned
// residual has fallen by psCGTol or after psCGMax iterations; an
// iteration costs two products with X (O(Bt r)) instead of forming and
// factoring H (O(Bt r^2 + r^3)). A step whose decrement -grad.d exceeds
// psStepMaxDec is refused when lineSearch is false (the start is too far
// from the optimum for a full step) and shortened by backtracking
// otherwise; a step that does not lower the objective is refused, and so
// is a first step that cannot be taken. The objective, data loss and
// gradient rows g of the envelope gradient are those at the final readout
// (eval/methods.md §13).
//
// Between epochs the filters move little, so the warm start is close to
// the new optimum and one step shrinks the distance to it by a large
// factor: the readouts, and with them the envelope gradient, trail the
// exact ones by a small fraction of one epoch's change, and a stationary
// point of training is one of the exact projected objective. The fit's
// final readout, the penalty choice and Evaluate always solve exactly.
func (pp *poissonProj) stepNeuron(w *psWorker, n, maxSteps int, tol float64, lineSearch bool) bool {
	Bt, r, p1 := pp.Bt, pp.r, pp.Bt+1
	p := r + 1
	sum := pp.sum[n*Bt : (n+1)*Bt]
	mu := pp.muOf(n)
	X := blas64.General{Rows: Bt, Cols: p, Stride: p1, Data: pp.phi}
	X2 := blas64.General{Rows: Bt, Cols: p, Stride: p1, Data: pp.phi2}
	x := w.trial[:p]
	copy(x, pp.beta[n*Bt:n*Bt+r])
	x[r] = pp.c[n]
	grad, diag, om, g := w.grad[:p], w.diag[:p], w.om[:Bt], w.g[:Bt]
	u, xd, xv, un := w.u[:Bt], w.xd[:Bt], w.xv[:Bt], w.un[:Bt]
	d, res, z, dir, hd := w.step[:p], w.res[:p], w.z[:p], w.dir[:p], w.hd[:p]
	var obj, data float64
	cg, taken := 0, 0
	for s := 0; s < maxSteps; s++ {
		// Gradient, omega and diag(H) at x.
		blas64.Gemv(blas.NoTrans, 1, X, psVec(x), 0, psVec(u))
		for i, ui := range u {
			f, d1, d2 := linkTerms(pp.act, ui)
			fe := f + nn.PoissonEps
			ratio := sum[i] / fe
			g[i] = d1 * (pp.cnt[i] - ratio)
			o := d2*(pp.cnt[i]-ratio) + ratio*d1*d1/fe
			if !(o > 0) {
				o = 0
			}
			om[i] = o
		}
		blas64.Gemv(blas.Trans, 1, X, psVec(g), 0, psVec(grad))
		blas64.Gemv(blas.Trans, 1, X2, psVec(om), 0, psVec(diag))
		for k := 0; k < r; k++ {
			grad[k] += 2 * mu * x[k]
			diag[k] += 2 * mu
		}
		ok := true
		for _, v := range diag {
			if !(v > 0) || math.IsInf(v, 0) {
				ok = false
			}
		}
		if !ok {
			break
		}
		// Preconditioned conjugate gradients on H d = -grad from d = 0;
		// xd accumulates X d.
		clear(d)
		clear(xd)
		for k, gk := range grad {
			res[k] = -gk
			z[k] = -gk / diag[k]
		}
		copy(dir, z)
		rz := floats.Dot(res, z)
		rz0 := rz
		for it := 0; it < psCGMax && rz > psCGTol*rz0; it++ {
			// hd = X^T (omega o (X dir)) + 2 mu (dir[:r], 0).
			blas64.Gemv(blas.NoTrans, 1, X, psVec(dir), 0, psVec(xv))
			for i, v := range xv {
				un[i] = om[i] * v
			}
			blas64.Gemv(blas.Trans, 1, X, psVec(un), 0, psVec(hd))
			for k := 0; k < r; k++ {
				hd[k] += 2 * mu * dir[k]
			}
			dHd := floats.Dot(dir, hd)
			if !(dHd > 0) {
				break
			}
			alpha := rz / dHd
			floats.AddScaled(d, alpha, dir)
			floats.AddScaled(xd, alpha, xv)
			floats.AddScaled(res, -alpha, hd)
			for k, v := range res {
				z[k] = v / diag[k]
			}
			rzNew := floats.Dot(res, z)
			b := rzNew / rz
			rz = rzNew
			for k := range dir {
				dir[k] = z[k] + b*dir[k]
			}
			cg++
		}
		dec := -floats.Dot(d, grad)
		if !(dec > 0) || (dec > psStepMaxDec && !lineSearch) {
			break
		}
		// The full step is taken when the slope along it at its end,
		// phi'(1) with phi(t) = J(x + t d) and phi'(0) = -dec, is at most
		// dec/2: in the quadratic model phi'(1) = 0, and the trapezoid
		// estimate of the change, (phi'(1) - dec)/2, is then a decrease of
		// at least dec/4. Otherwise (and when dec > psStepMaxDec), with
		// lineSearch, backtracking on the objective (Armijo, factor 1/2).
		t := 1.0
		accepted := false
		var newData, newPen float64
		if dec <= psStepMaxDec {
			newData, newPen = pp.trialPoint(w, sum, 1, x, d, r)
			slope := floats.Dot(w.gn[:Bt], xd)
			for k := 0; k < r; k++ {
				slope += 2 * mu * (x[k] + d[k]) * d[k]
			}
			accepted = slope <= dec/2
		}
		if !accepted && lineSearch {
			var obj0 float64
			for i, ui := range u {
				f, _, _ := linkTerms(pp.act, ui)
				obj0 += pp.cnt[i]*f - sum[i]*math.Log(f+nn.PoissonEps)
			}
			obj0 += mu * floats.Dot(x[:r], x[:r])
			for ls := 0; ls < 60; ls++ {
				newData, newPen = pp.trialPoint(w, sum, t, x, d, r)
				if newData+mu*newPen <= obj0-1e-4*t*dec {
					accepted = true
					break
				}
				t /= 2
			}
		}
		if !accepted {
			break
		}
		floats.AddScaled(x, t, d)
		obj, data = newData+mu*newPen, newData
		copy(u, un)
		copy(g, w.gn[:Bt])
		copy(w.f[:Bt], w.fn[:Bt])
		copy(w.lf[:Bt], w.lfn[:Bt])
		taken++
		if dec <= tol {
			break
		}
	}
	if taken == 0 {
		return false
	}
	copy(pp.g[n*Bt:(n+1)*Bt], g)
	copy(pp.beta[n*Bt:n*Bt+r], x[:r])
	pp.c[n] = x[r]
	pp.objN[n], pp.dataN[n] = obj, data
	pp.iters[n], pp.cgIters[n] = 0, cg
	pp.valShared(n, w.f[:Bt], w.lf[:Bt])
	return true
}

// trialPoint evaluates the point x + t d of stepNeuron from u = X x and
// w.xd = X d: it writes u + t X d into w.un and the gradient rows there
// into w.gn, and returns the data loss and ||beta||^2 of the point.
func (pp *poissonProj) trialPoint(w *psWorker, sum []float64, t float64, x, d []float64, r int) (data, pen float64) {
	un, gn, fn, lfn := w.un[:pp.Bt], w.gn[:pp.Bt], w.fn[:pp.Bt], w.lfn[:pp.Bt]
	for i, ui := range w.u[:pp.Bt] {
		v := ui + t*w.xd[i]
		un[i] = v
		f, d1, _ := linkTerms(pp.act, v)
		fe := f + nn.PoissonEps
		lf := math.Log(fe)
		fn[i], lfn[i] = f, lf
		data += pp.cnt[i]*f - sum[i]*lf
		gn[i] = d1 * (pp.cnt[i] - sum[i]/fe)
	}
	for k := 0; k < r; k++ {
		v := x[k] + t*d[k]
		pen += v * v
	}
	return data, pen
}

// psVec is v as a blas64.Vector.
func psVec(v []float64) blas64.Vector { return blas64.Vector{N: len(v), Inc: 1, Data: v} }

// cholSolve overwrites b with A^-1 b, where the upper triangle of u
// (p x p, row-major) holds the Cholesky factor U of A = U^T U.
func cholSolve(u []float64, p int, b []float64) {
	for i := 0; i < p; i++ { // U^T y = b
		s := b[i]
		for k := 0; k < i; k++ {
			s -= u[k*p+i] * b[k]
		}
		b[i] = s / u[i*p+i]
	}
	for i := p - 1; i >= 0; i-- { // U x = y
		row := u[i*p : (i+1)*p]
		s := b[i] - floats.Dot(row[i+1:], b[i+1:p])
		b[i] = s / row[i]
	}
}

// solveAll solves every neuron's readout for the current basis, in
// parallel over fixed contiguous ranges of neurons.
func (pp *poissonProj) solveAll() {
	nw := len(pp.workers)
	var wg sync.WaitGroup
	for k := 0; k < nw; k++ {
		lo, hi := k*pp.N/nw, (k+1)*pp.N/nw
		wg.Add(1)
		go func(w *psWorker) {
			defer wg.Done()
			for n := lo; n < hi; n++ {
				if !pp.skip[n] {
					pp.solveNeuron(w, n)
				}
			}
		}(pp.workers[k])
	}
	wg.Wait()
}

// eval computes, at the net's current filters, the optimal readout of every
// neuron, the projected objective (pp.obj, penalty included) and training
// data loss (pp.loss), both per trial and neuron as in EpochLog, the
// validation loss (pp.val) and, if r2, the median validation R^2 (pp.vr2;
// NaN otherwise). With grad it overwrites the conv gradients in net.Grads
// with dJ/dtheta.
func (pp *poissonProj) eval(net *nn.Net, grad, r2 bool) error {
	Bt, F, N := pp.Bt, pp.F, pp.N
	h := pp.features(net)
	if err := pp.basis(h); err != nil {
		return err
	}
	pp.solveAll()
	var obj, data float64
	for n := 0; n < N; n++ {
		obj += pp.objN[n]
		data += pp.dataN[n]
	}
	scale := 1 / (pp.W * float64(max(pp.nTrained, 1)))
	pp.obj, pp.loss = obj*scale, data*scale
	r := pp.r
	if grad {
		// GB = G^T Beta (Bt x r), dH_t = GB Qt / (W N).
		blas64.Gemm(blas.Trans, blas.NoTrans, 1,
			blas64.General{Rows: N, Cols: Bt, Stride: Bt, Data: pp.g},
			blas64.General{Rows: N, Cols: r, Stride: Bt, Data: pp.beta},
			0, blas64.General{Rows: Bt, Cols: r, Stride: r, Data: pp.gb[:Bt*r]})
		clear(pp.dH)
		if r > 0 {
			dht := pp.dHt[:Bt*F]
			blas64.Gemm(blas.NoTrans, blas.NoTrans, scale,
				blas64.General{Rows: Bt, Cols: r, Stride: r, Data: pp.gb[:Bt*r]},
				blas64.General{Rows: r, Cols: F, Stride: F, Data: pp.qt[:r*F]},
				0, blas64.General{Rows: Bt, Cols: F, Stride: F, Data: dht})
			for i, b := range pp.rows {
				copy(pp.dH[b*F:(b+1)*F], dht[i*F:(i+1)*F])
			}
		}
		clear(net.Grads[:pp.nconv])
		if pp.oneHot != nil {
			pp.oneHot.backward(net, pp.dH)
		} else {
			net.BackwardFeatures(pp.work, pp.dH, pp.B)
		}
	}
	pp.val, pp.vr2 = math.NaN(), math.NaN()
	if pp.Bv == 0 {
		return nil
	}
	pp.valLoss(h, r2)
	return nil
}

// valShared sets neuron n's validation sums over the validation rows that
// share their bin with a training row, from f(u) and log(f(u) + eps) of
// its training rows (f, lf, Bt each).
func (pp *poissonProj) valShared(n int, f, lf []float64) {
	if pp.Bv == 0 {
		return
	}
	vs := pp.vsum[n*pp.Bv : (n+1)*pp.Bv]
	var l, cross, quad float64
	for i, j := range pp.vOfRow {
		if j >= 0 {
			l += pp.vcnt[j]*f[i] - vs[j]*lf[i]
			cross += f[i] * vs[j]
			quad += pp.vcnt[j] * f[i] * f[i]
		}
	}
	pp.valS[n], pp.crossS[n], pp.quadS[n] = l, cross, quad
}

// valLoss computes the validation loss and, if r2, the median R^2 of the
// readouts of the last solve (h: features of every bin): the sums over
// validation rows shared with training rows come from the solve
// (valShared); the other validation rows (bins without training trials)
// are predicted here.
func (pp *poissonProj) valLoss(h []float64, r2 bool) {
	Bt, Bv, F, N, r := pp.Bt, pp.Bv, pp.F, pp.N, pp.r
	nv := len(pp.vOnly)
	if nv > 0 {
		// PhiV = H_v Qt^T (nv x r) for those rows, one product.
		hv := pp.hv[:nv*F]
		for i, j := range pp.vOnly {
			b := pp.vrows[j]
			copy(hv[i*F:(i+1)*F], h[b*F:(b+1)*F])
		}
		if r > 0 {
			blas64.Gemm(blas.NoTrans, blas.Trans, 1,
				blas64.General{Rows: nv, Cols: F, Stride: F, Data: hv},
				blas64.General{Rows: r, Cols: F, Stride: F, Data: pp.qt[:r*F]},
				0, blas64.General{Rows: nv, Cols: r, Stride: r, Data: pp.phiV[:nv*r]})
			blas64.Gemm(blas.NoTrans, blas.Trans, 1,
				blas64.General{Rows: N, Cols: r, Stride: Bt, Data: pp.beta},
				blas64.General{Rows: nv, Cols: r, Stride: r, Data: pp.phiV[:nv*r]},
				0, blas64.General{Rows: N, Cols: nv, Stride: nv, Data: pp.uv[:N*nv]})
		} else {
			clear(pp.uv[:N*nv])
		}
	}
	var loss float64
	k := 0
	for n := 0; n < N; n++ {
		if pp.skip[n] {
			continue
		}
		l, cross, quad := pp.valS[n], pp.crossS[n], pp.quadS[n]
		if nv > 0 {
			vs := pp.vsum[n*Bv : (n+1)*Bv]
			for i, j := range pp.vOnly {
				f, _, _ := linkTerms(pp.act, pp.uv[n*nv+i]+pp.c[n])
				l += pp.vcnt[j]*f - vs[j]*math.Log(f+nn.PoissonEps)
				cross += f * vs[j]
				quad += pp.vcnt[j] * f * f
			}
		}
		pp.valN[n] = l
		loss += l
		if r2 && pp.valTot[n] > 0 {
			pp.r2[k] = 1 - (pp.vsq[n]-2*cross+quad)/pp.valTot[n]
			k++
		}
	}
	pp.val = loss / (pp.Wv * float64(max(pp.nTrained, 1)))
	if r2 {
		pp.vr2 = median(pp.r2[:k])
	}
}

// readout writes the readout of the last eval into the net: w_n = Qt^T
// beta_n (all neurons in one product), c_n.
func (pp *poissonProj) readout(net *nn.Net) {
	Bt, F, N, r := pp.Bt, pp.F, pp.N, pp.r
	blas64.Gemm(blas.NoTrans, blas.NoTrans, 1,
		blas64.General{Rows: N, Cols: r, Stride: Bt, Data: pp.beta},
		blas64.General{Rows: r, Cols: F, Stride: F, Data: pp.qt[:r*F]},
		0, blas64.General{Rows: N, Cols: F, Stride: F, Data: net.ReadW()})
	copy(net.ReadB(), pp.c)
}

// curves returns the predicted rate of every bin (B x N) for the readout
// of the last eval: f(h_b Qt^T beta_n + c_n), a B x r x N product.
func (pp *poissonProj) curves() []float64 {
	B, Bt, F, N, r := pp.B, pp.Bt, pp.F, pp.N, pp.r
	phiAll := make([]float64, B*r)
	mulABt(phiAll, pp.h, pp.qt[:r*F], B, r, F, false)
	out := make([]float64, B*N)
	blas64.Gemm(blas.NoTrans, blas.Trans, 1,
		blas64.General{Rows: B, Cols: r, Stride: r, Data: phiAll},
		blas64.General{Rows: N, Cols: r, Stride: Bt, Data: pp.beta},
		0, blas64.General{Rows: B, Cols: N, Stride: N, Data: out})
	for b := 0; b < B; b++ {
		row := out[b*N : (b+1)*N]
		for n, u := range row {
			f, _, _ := linkTerms(pp.act, u+pp.c[n])
			row[n] = f
		}
	}
	return out
}

// NewPoisson reduces a problem (raw counts, no z-scoring) to the
// per-condition spike sums of the Poisson fast path for the filters of
// net, whose output must be softplus or exp.
func NewPoisson(pr Problem, net *nn.Net) (*Poisson, error) {
	pp, err := newPoissonProj(&pr, net)
	if err != nil {
		return nil, err
	}
	return &Poisson{pp: pp, net: net}, nil
}

// Readout solves the readouts of the net's current filters exactly,
// writes them into the net and returns the predictions of every bin (B x
// N, counts) and the median validation R^2 (NaN without validation
// trials).
func (s *Poisson) Readout() (curves []float64, valR2 float64, err error) {
	s.pp.mode = psExact
	if err := s.pp.eval(s.net, false, s.pp.Bv > 0); err != nil {
		return nil, 0, err
	}
	valR2 = math.NaN()
	if s.pp.Bv > 0 {
		valR2 = s.pp.vr2
	}
	s.pp.readout(s.net)
	return s.pp.curves(), valR2, nil
}

// AutoReadout chooses the readout penalty at the net's current filters on
// the validation trials (eval/methods.md §12; one for all neurons, or one
// per neuron), solves the readouts at it exactly, writes them into the net
// and returns the predictions of every bin (B x N, counts), each neuron's
// penalty in model.readout_l2 units and the median validation R^2.
func (s *Poisson) AutoReadout(perNeuron bool) (curves, l2 []float64, valR2 float64, err error) {
	l2, _, err = s.pp.choosePenalty(s.net, nil, perNeuron)
	if err != nil {
		return nil, nil, 0, err
	}
	s.pp.readout(s.net)
	return s.pp.curves(), l2, s.pp.vr2, nil
}

// Evaluate solves every neuron's readout exactly at the net's current
// filters and returns the projected objective (as MSE.Evaluate); with
// grad it writes the filter gradient into the conv part of net.Grads. For
// checks against other paths to the same numbers.
func (s *Poisson) Evaluate(grad, r2 bool) (Eval, error) {
	prev := s.pp.mode
	s.pp.mode = psExact
	err := s.pp.eval(s.net, grad, r2)
	s.pp.mode = prev
	if err != nil {
		return Eval{}, err
	}
	return Eval{Objective: s.pp.obj, Loss: s.pp.loss, ValLoss: s.pp.val, ValR2: s.pp.vr2}, nil
}

// WriteReadout writes the readouts of the last Evaluate into the net and
// returns the predictions of every bin (B x N, counts).
func (s *Poisson) WriteReadout() []float64 {
	s.pp.readout(s.net)
	return s.pp.curves()
}

// Poisson is the projected solver for the Poisson loss with a softplus or
// exp output: each neuron's readout is solved by Newton's method on the
// condition rows for the current filters, and the filters follow Adam on
// the resulting loss (eval/methods.md §13). Its loop methods are those of
// MSE. After training, ValR2 re-solves the readouts exactly and Readout
// writes them into the net.
type Poisson struct {
	pp     *poissonProj
	net    *nn.Net
	loaded bool // LoadState ran: begin keeps the restored state
}

func (s *Poisson) Name() string         { return "projected" }
func (s *Poisson) Trainable() []float64 { return s.net.Params[:s.pp.nconv] }
func (s *Poisson) Random() *rand.PCG    { return nil }

// begin solves the readouts of the starting filters exactly; their loss
// and gradient feed the first step. After LoadState it restores them
// instead, so that a resumed fit continues bit for bit.
func (s *Poisson) Begin() error {
	if s.loaded {
		s.loaded = false
		return nil
	}
	s.pp.mode = psStart
	err := s.pp.eval(s.net, true, false)
	s.pp.mode = psStep
	return err
}

// SaveState returns what a resumed fit needs besides the filters and the
// optimiser to continue bit for bit: the last training loss and filter
// gradient and the readouts the next epoch's solves start from (beta in
// the basis Qt). Layout: loss, obj, r, the nconv filter gradients, c (N),
// beta (N x r), Qt (r x F): 3 + nconv + N (r+1) + r F values, about 12 MB
// at 24,000 neurons and 60 bins. (Not yet stored in checkpoints: the epoch
// loop has no place for it; see the report of this solver.)
func (s *Poisson) SaveState() []float64 {
	pp := s.pp
	r, Bt, F, N := pp.r, pp.Bt, pp.F, pp.N
	out := make([]float64, 0, 3+pp.nconv+N*(r+1)+r*F)
	out = append(out, pp.loss, pp.obj, float64(r))
	out = append(out, s.net.Grads[:pp.nconv]...)
	out = append(out, pp.c...)
	for n := 0; n < N; n++ {
		out = append(out, pp.beta[n*Bt:n*Bt+r]...)
	}
	return append(out, pp.qt[:r*F]...)
}

// LoadState restores a SaveState taken from a fit of the same config and
// data; the next begin keeps it.
func (s *Poisson) LoadState(v []float64) error {
	pp := s.pp
	Bt, F, N := pp.Bt, pp.F, pp.N
	if len(v) < 3 {
		return fmt.Errorf("train: Poisson solver state has %d values", len(v))
	}
	r := int(v[2])
	if want := 3 + pp.nconv + N*(r+1) + r*F; r < 0 || r > Bt || len(v) != want {
		return fmt.Errorf("train: Poisson solver state has %d values, want %d: was the config or the data changed?", len(v), want)
	}
	pp.loss, pp.obj, pp.r = v[0], v[1], r
	v = v[3:]
	copy(s.net.Grads[:pp.nconv], v)
	v = v[pp.nconv:]
	copy(pp.c, v[:N])
	v = v[N:]
	clear(pp.beta)
	for n := 0; n < N; n++ {
		copy(pp.beta[n*Bt:n*Bt+r], v[n*r:(n+1)*r])
	}
	copy(pp.qt, v[N*r:])
	pp.hasOld, pp.mode, s.loaded = true, psStep, true
	return nil
}

func (s *Poisson) Epoch(opt *nn.Adam) float64 {
	loss := s.pp.loss
	opt.Step(s.net.Params[:s.pp.nconv], s.net.Grads[:s.pp.nconv])
	return loss
}

func (s *Poisson) Validate(epoch int) (float64, float64, error) {
	pp := s.pp
	r2 := epoch == 1 || (pp.r2Every > 0 && epoch%pp.r2Every == 0)
	if err := pp.eval(s.net, true, r2); err != nil {
		return 0, 0, err
	}
	if pp.Bv == 0 {
		return pp.obj, pp.vr2, nil
	}
	return pp.val, pp.vr2, nil
}

// poissonL2Grid is the relative grid of the Poisson penalty choice: tau =
// 10^(-4 + k/4), k = 0..24 (1e-4 to 1e2, four per decade); each value
// costs one solve of every neuron's readout.
func poissonL2Grid() []float64 {
	g := make([]float64, 25)
	for k := range g {
		g[k] = math.Pow(10, -4+float64(k)/4)
	}
	return g
}

// l2Scale is the data's scale for the Poisson penalty: mu = tau * scale
// with scale = (1/Bt) sum_b N_b ||h_b||^2 * (mean count per trial and
// neuron), the size of the data term's curvature for a neuron firing at
// the population's mean rate (for exp output: d2/du2 of N f = N f), so
// that one relative grid serves any feature scale and firing rate.
func (pp *poissonProj) l2Scale() float64 {
	F := pp.F
	var hh, total float64
	for i, b := range pp.rows {
		var s float64
		for _, v := range pp.h[b*F : (b+1)*F] {
			s += v * v
		}
		hh += pp.cnt[i] * s
	}
	for n := 0; n < pp.N; n++ {
		if !pp.skip[n] {
			for _, v := range pp.sum[n*pp.Bt : (n+1)*pp.Bt] {
				total += v
			}
		}
	}
	return hh / float64(pp.Bt) * total / (pp.W * float64(max(pp.nTrained, 1)))
}

// choosePenalty picks, at the net's current filters, the penalty of the
// grid tau (poissonL2Grid if nil) with the smallest validation loss: one
// for all neurons, or with perNeuron each neuron's own (each neuron's
// readout and validation loss depend on its penalty only). It solves
// every neuron's readout for each value, from the largest penalty down,
// each solve starting from the previous one (inexact steps with a line
// search until the Newton decrement is below psStartTol, as at the start
// of training), then solves the readouts at the choice exactly. It leaves
// the penalties and the readouts at the choice and returns each neuron's
// model.readout_l2 (2 mu / W) and the validation loss of every grid value
// (the population's, per trial and neuron).
func (pp *poissonProj) choosePenalty(net *nn.Net, tau []float64, perNeuron bool) ([]float64, []float64, error) {
	if pp.Bv == 0 {
		return nil, nil, fmt.Errorf("train: the Poisson penalty choice needs validation trials")
	}
	if tau == nil {
		tau = poissonL2Grid()
	}
	N := pp.N
	pp.muN = nil
	pp.mode = psStart
	h := pp.features(net)
	if err := pp.basis(h); err != nil {
		return nil, nil, err
	}
	scale := pp.l2Scale()
	val := make([]float64, len(tau))
	best, bestMu := math.Inf(1), pp.mu
	bestN, muN := make([]float64, N), make([]float64, N)
	for n := range bestN {
		bestN[n] = math.Inf(1)
	}
	for k := len(tau) - 1; k >= 0; k-- {
		pp.mu = tau[k] * scale
		pp.solveAll()
		pp.valLoss(h, false)
		val[k] = pp.val
		if pp.val < best {
			best, bestMu = pp.val, pp.mu
		}
		for n, v := range pp.valN {
			if v < bestN[n] {
				bestN[n], muN[n] = v, pp.mu
			}
		}
	}
	pp.mu = bestMu
	if perNeuron {
		pp.muN = muN
	} else {
		for n := range muN {
			muN[n] = bestMu
		}
	}
	pp.mode = psExact
	if err := pp.eval(net, false, true); err != nil {
		return nil, nil, err
	}
	l2 := muN
	for n, m := range l2 {
		l2[n] = 2 * m / pp.W
	}
	return l2, val, nil
}
