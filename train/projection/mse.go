package projection

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/lapack/lapack64"

	"github.com/strialab/stria/nn"
)

// The projected solver (train.solver: projected) minimises exactly the
// objective of the adam path on one-hot input with MSE and identity output,
//
//	J = 1/(W N) sum_b N_b sum_n (ybar_bn - f_bn)^2 + lambda/(2N) sum_n ||w_n||^2
//	    (+ the within-condition constant, eval/methods.md §8),
//	f_bn = h_b . w_n + c_n,
//
// but by variable projection (Golub & Pereyra 1973, eval/methods.md §8 [mem]):
// for fixed filters the best readout is a weighted ridge solution in closed
// form, so only the filters are optimised, on the projected loss.
//
// Letters: B bins (all conditions), Bt and Bv the bins present among the
// training and the validation trials, F features, N neurons, W and Wv the
// numbers of training and validation trials. p_b = N_b/W, D = diag(N_b).
// For fixed features H (B x F) of the training rows [derived]:
//
//	hbar = sum_b p_b h_b,  A = D^1/2 (H - 1 hbar^T)              Bt x F
//	mu = lambda W / 2,     K = A A^T + mu I                       Bt x Bt
//	Yc = Ybar - 1 ybar^T   (ybar_n = sum_b p_b ybar_bn)           Bt x N
//	S  = D^1/2 Yc Yc^T D^1/2                                      Bt x Bt
//	w_n = A^T K^-1 D^1/2 yc_n,  c_n = ybar_n - hbar . w_n
//	J  = (within + mu tr(K^-1 S)) / (W N)
//	data part = (within + mu^2 tr(M)) / (W N),  M = K^-1 S K^-1
//	dJ/dH_b = -(2 mu / (W N)) sqrt(N_b) (M A)_b   (envelope theorem)
//
// (A^T D^1/2 1 = 0, so K^-1 D^1/2 1 = D^1/2 1 / mu and the readout does not
// change if Ybar is used uncentred.) S is computed once; every step then
// costs O(Bt^2 F + Bt^3) and nothing per neuron. The validation loss of the
// closed-form readout is also a B x B computation: with
// Rk = (Hv - 1 hbar^T) A^T K^-1 (Bv x Bt) the centred validation prediction
// is Rk D^1/2 Yc, so
//
//	sum_b Nv_b ||yvc_b - Rk_b D^1/2 Yc||^2
//	  = sum_b Nv_b (||yvc_b||^2 - 2 Rk_b . (D^1/2 Yc yvc_b) + Rk_b S Rk_b^T),
//
// yvc_b the validation mean of bin b minus ybar. Only the median validation
// R^2 needs a pass over the neurons (O(Bv Bt N)); see projector.r2Every.

// projector holds the data of a projected fit reduced to B x B form, and
// the scratch space of one evaluation. Shapes as in the comment above.
type projector struct {
	// N is the number of neurons whose data the projector holds (0 for
	// a problem of Sums alone); Ntot that of the sums over neurons, the
	// N of the losses' normalisation 1/(W N).
	B, Bt, Bv, F, N int
	Ntot            float64
	count           []int       // B: training trials per condition
	blocks          []BlockSums // projectorData's keepBlocks
	rows, vrows     []int       // bins of the training and the validation rows
	trainRow        []int       // B: the training row of each bin, -1 for none
	sq, pw          []float64   // Bt: sqrt(N_b), N_b / W
	nv              []float64   // Bv: validation trials of each row
	W, Wv, mu       float64
	within, withinV float64 // within-condition sums of squares (all neurons)
	// withinN is each neuron's within-condition sum of squares on the
	// training trials (trained units), when kept from PartStats; nil
	// otherwise (trainWithinN computes it from the Stats).
	withinN []float64
	// consume: yc and dv are the Sum arrays of PartStats (Problem's
	// TrainParts and ValParts), which the readout may take over: z goes
	// into yc's storage and the per-bin predictions into valStore (dv's
	// whole B x N array). spent is set once it has; the solver cannot
	// evaluate after that.
	consume  bool
	valStore []float64
	spent    bool

	yc    []float64 // Bt x N, centred training condition means
	ymean []float64 // N, training mean of each neuron
	S     []float64 // Bt x Bt
	cvt   []float64 // Bv x Bt, row b: D^1/2 Yc yvc_b
	yyv   []float64 // Bv, ||yvc_b||^2

	// Validation R^2, per neuron (nil when there are no validation rows).
	dv     []float64 // Bv x N, yvc
	withN  []float64 // N, within-condition sum of squares on the validation trials
	valTot []float64 // N, total sum of squares on the validation trials
	// r2Every: the median validation R^2 is computed on every r2Every-th
	// epoch (and on the first and the best); other epochs log NaN. It is 1
	// unless the recording is so large that the pass over the neurons
	// would dominate a step.
	r2Every int

	work *nn.Work
	eye  []float64 // B x B one-hot input
	// oneHot evaluates a one-layer encoder on the one-hot rows directly
	// (nil for deeper encoders, which go through nn with eye).
	oneHot *oneHotConv

	// Scratch.
	h                   []float64 // B x F, features of the last call to features
	hbar, hv            []float64 // F, Bv x F
	a, ga, qt           []float64 // Bt x F
	k, l, x, m          []float64 // Bt x Bt
	rk, t               []float64 // Bv x Bt
	dH                  []float64 // B x F
	g                   []float64 // Bv x N
	ssRes, r2           []float64 // N
	nconv               int       // number of conv parameters (a prefix of Params)
	obj, loss, val, vr2 float64   // results of the last eval
}

// The median validation R^2 costs Bv Bt N multiply-adds each time it is
// computed. Up to projectedR2Every of them it is computed every epoch (at
// 60 bins: up to about 1,100 neurons); above, every k-th epoch with k
// chosen so that it costs on average projectedR2Budget per epoch, about a
// quarter of a training step at the full-size shape (B 60, F 480): every
// 173rd epoch at 24,000 neurons. It only feeds the log; the stop uses the
// validation loss, computed every epoch.
const (
	projectedR2Every  = 4e6
	projectedR2Budget = 5e5
)

func newProjector(pr *Problem, net *nn.Net) (*projector, error) {
	pj, err := projectorData(pr, net.Features(), false)
	if err != nil {
		return nil, err
	}
	B, F := pj.B, pj.F
	pj.work = net.NewWork(B)
	pj.eye = make([]float64, B*B)
	for b := 0; b < B; b++ {
		pj.eye[b*B+b] = 1
	}
	if usableOneHot(net) {
		pj.oneHot = newOneHotConv(net)
	}
	Bt := pj.Bt
	pj.hbar = make([]float64, F)
	pj.a = make([]float64, Bt*F)
	pj.ga = make([]float64, Bt*F)
	pj.qt = make([]float64, Bt*F)
	pj.k = make([]float64, Bt*Bt)
	pj.l = make([]float64, Bt*Bt)
	pj.x = make([]float64, Bt*Bt)
	pj.m = make([]float64, Bt*Bt)
	pj.dH = make([]float64, B*F)
	pj.nconv = len(net.Params) - net.Neurons*F - net.Neurons
	return pj, nil
}

// projectorData reduces a problem to the projector's data for F
// features: the neurons' own (yc, dv, ...) and the sums over neurons
// (S, cvt, yyv, within, withinV). keepBlocks keeps the BlockSums of a
// problem of PartStats in pj.blocks.
func projectorData(pr *Problem, F int, keepBlocks bool) (*projector, error) {
	if !(pr.Penalty > 0) {
		return nil, fmt.Errorf("train.solver projected needs model.readout_l2 > 0 (it is %v): without a penalty the closed-form readout interpolates the condition means", pr.Penalty)
	}
	B, N, count := pr.dims()
	pj := &projector{B: B, N: N, F: F, count: count}
	for b, c := range count {
		if c > 0 {
			pj.rows = append(pj.rows, b)
		}
	}
	Bt := len(pj.rows)
	if Bt == 0 {
		return nil, fmt.Errorf("train: no training trials")
	}
	pj.trainRow = make([]int, B)
	for b := range pj.trainRow {
		pj.trainRow[b] = -1
	}
	for r, b := range pj.rows {
		pj.trainRow[b] = r
	}
	pj.Bt = Bt
	W := 0
	for _, c := range count {
		W += c
	}
	pj.W = float64(W)
	pj.mu = pr.Penalty * pj.W / 2
	pj.sq, pj.pw = make([]float64, Bt), make([]float64, Bt)
	for r, b := range pj.rows {
		c := float64(count[b])
		pj.sq[r], pj.pw[r] = math.Sqrt(c), c/pj.W
	}
	// Training means, their weighted mean and the within sum of squares,
	// in the trainer's (possibly z-scored) units z = (y - mu) * inv: a
	// centred mean scales by inv, a sum of squared deviations by inv^2.
	mu, inv := make([]float64, N), make([]float64, N)
	for n := range mu {
		mu[n], inv[n] = pr.Norm.Affine(n)
	}
	switch {
	case pr.TrainParts != nil:
		pj.consume = true
		pj.trainFromParts(pr.TrainParts, inv)
	case pr.Train != nil:
		pj.trainFromStats(pr.Train, inv)
	default:
		pj.ymean = []float64{}
		pj.yc = []float64{}
	}
	if pr.hasVal() {
		switch {
		case pr.TrainParts != nil:
			pj.valFromParts(pr.ValParts, pr.TrainParts, inv)
		case pr.Val != nil:
			pj.valFromStats(pr.Val, inv)
		default:
			pj.valFromCounts(pr.Sums.ValCount)
		}
	}
	pj.Ntot = float64(N)
	switch {
	case pr.Sums != nil:
		if err := pj.setSums(pr.Sums, N, pr.TrainParts != nil); err != nil {
			return nil, err
		}
	case pr.TrainParts != nil:
		blocks := pj.blockSums()
		pj.addBlocks(blocks)
		if keepBlocks {
			pj.blocks = blocks
		}
	default:
		pj.S = make([]float64, Bt*Bt)
		sumOverNeurons(pj.S, pj.yc, pj.yc, Bt, Bt, N)
		if pj.Bv > 0 {
			Bv := pj.Bv
			pj.yyv = make([]float64, Bv)
			for r := range pj.yyv {
				var s float64
				for _, v := range pj.dv[r*N : (r+1)*N] {
					s += v * v
				}
				pj.yyv[r] = s
			}
			pj.cvt = make([]float64, Bv*Bt)
			sumOverNeurons(pj.cvt, pj.dv, pj.yc, Bv, Bt, N)
		}
	}
	for i := 0; i < Bt; i++ {
		for j := 0; j < Bt; j++ {
			pj.S[i*Bt+j] *= pj.sq[i] * pj.sq[j]
		}
	}
	if Bv := pj.Bv; Bv > 0 {
		for r := 0; r < Bv; r++ {
			for c := 0; c < Bt; c++ {
				pj.cvt[r*Bt+c] *= pj.sq[c]
			}
		}
		// From statistics per range of neurons (PartStats) the median R^2
		// is left to the best filters (see Validate); in memory it is
		// computed on every r2Every-th epoch.
		pj.r2Every = 1
		if cost := float64(Bv) * float64(Bt) * float64(N); cost > projectedR2Every {
			pj.r2Every = int(math.Ceil(cost / projectedR2Budget))
		}
		if pr.TrainParts != nil || pr.Sums != nil {
			pj.r2Every = 0
		}
		pj.g = make([]float64, Bv*min(N, neuronBlock))
		pj.ssRes = make([]float64, N)
		pj.r2 = make([]float64, N)
		pj.hv = make([]float64, Bv*F)
		pj.rk = make([]float64, Bv*Bt)
		pj.t = make([]float64, Bv*Bt)
	}

	for n, m := range pj.ymean {
		pj.ymean[n] = (m - mu[n]) * inv[n]
	}
	return pj, nil
}

// neuronBlock is the number of neurons of the passes over all neurons
// that go block by block (the validation R^2, the readout), so that their
// scratch is B x neuronBlock rather than B x N.
const neuronBlock = 4096

// cols wraps columns [c0, c0+nc) of a row-major r x c slice as a
// blas64.General.
func cols(v []float64, r, c, c0, nc int) blas64.General {
	return blas64.General{Rows: r, Cols: nc, Stride: c, Data: v[c0 : (r-1)*c+c0+nc]}
}

// sumOverNeurons writes dst = a b^T (m x n), a sum over the N neurons,
// with a (m x N) and b (n x N): by chunks of neuronBlock neurons on up to
// GOMAXPROCS goroutines (a product with a long inner dimension and a small
// result runs on one core in Gemm), the chunks' products added in chunk
// order, so the result does not depend on the number of cores. At most
// one chunk: Gemm itself.
func sumOverNeurons(dst, a, b []float64, m, n, N int) {
	nch := (N + neuronBlock - 1) / neuronBlock
	if nch <= 1 {
		blas64.Gemm(blas.NoTrans, blas.Trans, 1, gen(a, m, N), gen(b, n, N), 0, gen(dst, m, n))
		return
	}
	part := make([]float64, nch*m*n)
	parallelBlocks(N, func(n0, n1 int) {
		c := n0 / neuronBlock
		blas64.Gemm(blas.NoTrans, blas.Trans, 1, cols(a, m, N, n0, n1-n0), cols(b, n, N, n0, n1-n0), 0, gen(part[c*m*n:(c+1)*m*n], m, n))
	})
	copy(dst, part[:m*n])
	for c := 1; c < nch; c++ {
		for i, v := range part[c*m*n : (c+1)*m*n] {
			dst[i] += v
		}
	}
}

// gen wraps a row-major r x c slice as a blas64.General.
func gen(v []float64, r, c int) blas64.General {
	return blas64.General{Rows: r, Cols: c, Stride: c, Data: v[:r*c]}
}

// features runs the conv stack on every bin and forms hbar and A.
func (pj *projector) features(net *nn.Net) []float64 {
	F := pj.F
	var h []float64
	if pj.oneHot != nil {
		h = pj.oneHot.forward(net)
	} else {
		h = net.ForwardFeatures(pj.work, pj.eye, pj.B)
	}
	pj.h = h
	clear(pj.hbar)
	for r, b := range pj.rows {
		w := pj.pw[r]
		for f, v := range h[b*F : (b+1)*F] {
			pj.hbar[f] += w * v
		}
	}
	for r, b := range pj.rows {
		s := pj.sq[r]
		a := pj.a[r*F : (r+1)*F]
		for f, v := range h[b*F : (b+1)*F] {
			a[f] = s * (v - pj.hbar[f])
		}
	}
	return h
}

// factor forms A A^T (kept in pj.k) and the Cholesky factor of K = A A^T
// + mu I. It returns false
// if K is not numerically positive definite (only possible with NaN or Inf
// features).
func (pj *projector) factor() (blas64.Triangular, bool) {
	Bt, F := pj.Bt, pj.F
	mulABt(pj.k, pj.a, pj.a, Bt, Bt, F, true)
	copy(pj.l, pj.k)
	for i := 0; i < Bt; i++ {
		pj.l[i*Bt+i] += pj.mu
	}
	return lapack64.Potrf(blas64.Symmetric{Uplo: blas.Lower, N: Bt, Stride: Bt, Data: pj.l})
}

// mulABt writes dst = a b^T, with a [m][k], b [n][k], dst [m][n]. With
// sym (a == b, m == n) only the lower triangle is computed and mirrored.
// Serial: at the sizes of a step (m, n <= B, k = F) a parallel Gemm costs
// more in goroutines and allocations than it saves.
func mulABt(dst, a, b []float64, m, n, k int, sym bool) {
	for i := 0; i < m; i++ {
		ai := a[i*k : (i+1)*k]
		jn := n
		if sym {
			jn = i + 1
		}
		for j := 0; j < jn; j++ {
			v := floats.Dot(ai, b[j*k:(j+1)*k])
			dst[i*n+j] = v
			if sym {
				dst[j*n+i] = v
			}
		}
	}
}

// mulAB writes dst = a b, with a [m][k], b [k][n], dst [m][n], serially.
func mulAB(dst, a, b []float64, m, k, n int) {
	for i := 0; i < m; i++ {
		d := dst[i*n : (i+1)*n]
		clear(d)
		for c, v := range a[i*k : (i+1)*k] {
			if v != 0 {
				floats.AddScaled(d, v, b[c*n:(c+1)*n])
			}
		}
	}
}

// solveLeft overwrites b (Bt x cols) with K^-1 b.
func solveLeft(l blas64.Triangular, b blas64.General) {
	blas64.Trsm(blas.Left, blas.NoTrans, 1, l, b)
	blas64.Trsm(blas.Left, blas.Trans, 1, l, b)
}

// solveRight overwrites b (rows x Bt) with b K^-1.
func solveRight(l blas64.Triangular, b blas64.General) {
	blas64.Trsm(blas.Right, blas.Trans, 1, l, b)
	blas64.Trsm(blas.Right, blas.NoTrans, 1, l, b)
}

// eval computes, at the net's current filters, the projected objective
// (pj.obj, penalty included), the training data loss (pj.loss), the
// validation loss (pj.val) and, if r2, the median validation R^2 (pj.vr2,
// NaN otherwise), all in the units of EpochLog. With grad it also
// overwrites the conv gradients in net.Grads with dJ/dtheta (the readout
// part of net.Grads is not touched). It allocates nothing.
func (pj *projector) eval(net *nn.Net, grad, r2 bool) error {
	if pj.spent {
		panic("train: projected solver evaluated after ReadoutBlocks took over its statistics")
	}
	Bt, F, N := pj.Bt, pj.F, pj.Ntot
	h := pj.features(net)
	l, ok := pj.factor()
	if !ok {
		return fmt.Errorf("train: projected solver: the features are not finite")
	}
	// X = K^-1 S, M = X K^-1.
	copy(pj.x, pj.S)
	solveLeft(l, gen(pj.x, Bt, Bt))
	copy(pj.m, pj.x)
	solveRight(l, gen(pj.m, Bt, Bt))
	var trX, trM float64
	for i := 0; i < Bt; i++ {
		trX += pj.x[i*Bt+i]
		trM += pj.m[i*Bt+i]
	}
	scale := 1 / (pj.W * N)
	pj.obj = (pj.within + pj.mu*trX) * scale
	pj.loss = (pj.within + pj.mu*pj.mu*trM) * scale
	if grad {
		mulAB(pj.ga, pj.m, pj.a, Bt, Bt, F)
		clear(pj.dH)
		c := -2 * pj.mu * scale
		for r, b := range pj.rows {
			s := c * pj.sq[r]
			d := pj.dH[b*F : (b+1)*F]
			for f, v := range pj.ga[r*F : (r+1)*F] {
				d[f] = s * v
			}
		}
		clear(net.Grads[:pj.nconv])
		if pj.oneHot != nil {
			pj.oneHot.backward(net, pj.dH)
		} else {
			net.BackwardFeatures(pj.work, pj.dH, pj.B)
		}
	}
	pj.val, pj.vr2 = math.NaN(), math.NaN()
	if pj.Bv == 0 {
		return nil
	}
	Bv := pj.Bv
	pj.valProjection(h)
	rk := gen(pj.rk, Bv, Bt)
	solveRight(l, rk)
	mulAB(pj.t, pj.rk, pj.S, Bv, Bt, Bt)
	sum := pj.withinV
	for r := 0; r < Bv; r++ {
		rr := pj.rk[r*Bt : (r+1)*Bt]
		var cross, quad float64
		for c, v := range rr {
			cross += v * pj.cvt[r*Bt+c]
			quad += v * pj.t[r*Bt+c]
		}
		sum += pj.nv[r] * (pj.yyv[r] - 2*cross + quad)
	}
	pj.val = sum / (pj.Wv * N)
	if r2 {
		pj.vr2 = pj.valR2()
	}
	return nil
}

// valProjection writes P = (Hv - 1 hbar^T) A^T (Bv x Bt) into pj.rk, for
// the features h of the last factor. A validation bin that is training
// row c has A_c = sqrt(N_c) (h_c - hbar), so its row of P is row c of
// A A^T (pj.k) divided by sqrt(N_c) [derived]; only bins without training
// trials take the product with A (F multiply-adds per entry).
func (pj *projector) valProjection(h []float64) {
	Bt, F := pj.Bt, pj.F
	for r, b := range pj.vrows {
		row := pj.rk[r*Bt : (r+1)*Bt]
		if c := pj.trainRow[b]; c >= 0 {
			inv := 1 / pj.sq[c]
			for j, v := range pj.k[c*Bt : (c+1)*Bt] {
				row[j] = v * inv
			}
			continue
		}
		hv := pj.hv[r*F : (r+1)*F]
		for f, v := range h[b*F : (b+1)*F] {
			hv[f] = v - pj.hbar[f]
		}
		for j := range row {
			var d float64
			for f, a := range pj.a[j*F : (j+1)*F] {
				d += hv[f] * a
			}
			row[j] = d
		}
	}
}

// valR2 returns the median over neurons of the validation R^2 of the
// closed-form readout, from pj.rk of the last eval: the centred
// validation prediction is G = Rk D^1/2 Yc (Bv x N) and the residual sum of
// squares of neuron n is within_n + sum_b Nv_b (yvc_bn - G_bn)^2.
func (pj *projector) valR2() float64 {
	Bv, Bt, N := pj.Bv, pj.Bt, pj.N
	for r := 0; r < Bv; r++ {
		for c := 0; c < Bt; c++ {
			pj.t[r*Bt+c] = pj.rk[r*Bt+c] * pj.sq[c]
		}
	}
	copy(pj.ssRes, pj.withN)
	// G by blocks of neurons (mulInto: Dgemm's arithmetic), scratch of Bv x
	// neuronBlock, not Bv x N: one block in pj.g (no allocation in the
	// epochs of a small recording), several on all cores with scratch per
	// goroutine; each neuron's sum is formed by one goroutine in a fixed
	// order.
	block := func(n0, n1 int, gb []float64) {
		nb := n1 - n0
		gb = gb[:Bv*nb]
		mulInto(gb, nb, pj.t, Bt, pj.yc[n0:], N, Bv, Bt, nb)
		for r := 0; r < Bv; r++ {
			w := pj.nv[r]
			g, d := gb[r*nb:(r+1)*nb], pj.dv[r*N+n0:r*N+n0+nb]
			ss := pj.ssRes[n0 : n0+nb]
			for n, v := range g {
				e := d[n] - v
				ss[n] += w * e * e
			}
		}
	}
	if N <= neuronBlock {
		block(0, N, pj.g)
	} else {
		parallelScratch(N, Bv*neuronBlock, block)
	}
	for n, ss := range pj.ssRes {
		pj.r2[n] = math.NaN()
		if pj.valTot[n] > 0 {
			pj.r2[n] = 1 - ss/pj.valTot[n]
		}
	}
	return medianR2(pj.ssRes, pj.r2)
}

// medianR2 returns the median of the values of r2 that are not NaN,
// using scratch (len(r2) at least) for them.
func medianR2(scratch, r2 []float64) float64 {
	k := 0
	for _, v := range r2 {
		if !math.IsNaN(v) {
			scratch[k] = v
			k++
		}
	}
	return median(scratch[:k])
}

// MedianR2 is the median validation R^2 of a fit from every neuron's
// (ValR2s of each range of neurons, joined): the median over the neurons
// whose value is not NaN, as ValR2 computes it.
func MedianR2(r2 []float64) float64 {
	return medianR2(make([]float64, len(r2)), r2)
}

// readout writes the closed-form readout of the net's current filters into
// the net: w_n = A^T K^-1 D^1/2 yc_n (all N x F weights in one matrix
// product, parallel and deterministic in gonum's Gemm), c_n = ybar_n -
// hbar . w_n.
func (pj *projector) readout(net *nn.Net) error {
	Bt, F, N := pj.Bt, pj.F, pj.N
	pj.features(net)
	l, ok := pj.factor()
	if !ok {
		return fmt.Errorf("train: projected solver: the features are not finite")
	}
	copy(pj.qt, pj.a)
	solveLeft(l, gen(pj.qt, Bt, F))
	for r := 0; r < Bt; r++ {
		s := pj.sq[r]
		q := pj.qt[r*F : (r+1)*F]
		for f := range q {
			q[f] *= s
		}
	}
	w := net.ReadW()
	// W = yc^T qt. Transposing yc first (Bt x N, a small copy) lets the
	// product run as NoTrans x NoTrans, which gonum's kernel does about
	// three times faster than the transposed form at these shapes.
	yt := make([]float64, N*Bt)
	for b := 0; b < Bt; b++ {
		for n, v := range pj.yc[b*N : (b+1)*N] {
			yt[n*Bt+b] = v
		}
	}
	blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(yt, N, Bt), gen(pj.qt, Bt, F), 0, gen(w, N, F))
	v := make([]float64, Bt)
	blas64.Gemv(blas.NoTrans, 1, gen(pj.qt, Bt, F), blas64.Vector{N: F, Inc: 1, Data: pj.hbar}, 0, blas64.Vector{N: Bt, Inc: 1, Data: v})
	c := net.ReadB()
	copy(c, pj.ymean)
	blas64.Gemv(blas.Trans, -1, gen(pj.yc, Bt, N), blas64.Vector{N: Bt, Inc: 1, Data: v}, 1, blas64.Vector{N: N, Inc: 1, Data: c})
	return nil
}

// curves returns the prediction of every bin (B x N, trained units) for the
// features and the readout of the last call to readout, in factored form:
// f_bn = (h_b - hbar) . w_n + ybar_n and w_n = qt^T yc_n, so the B x N
// predictions are ((H - 1 hbar^T) qt^T) Yc, a B x Bt x N product instead
// of the B x F x N one of a forward pass through the readout.
func (pj *projector) curves() []float64 {
	B, Bt, F, N := pj.B, pj.Bt, pj.F, pj.N
	h := pj.h
	g := make([]float64, B*Bt)
	hc := make([]float64, F)
	for b := 0; b < B; b++ {
		for f, v := range h[b*F : (b+1)*F] {
			hc[f] = v - pj.hbar[f]
		}
		for r := 0; r < Bt; r++ {
			var s float64
			for f, q := range pj.qt[r*F : (r+1)*F] {
				s += hc[f] * q
			}
			g[b*Bt+r] = s
		}
	}
	out := make([]float64, B*N)
	blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(g, B, Bt), gen(pj.yc, Bt, N), 0, gen(out, B, N))
	for b := 0; b < B; b++ {
		row := out[b*N : (b+1)*N]
		for n, m := range pj.ymean {
			row[n] += m
		}
	}
	return out
}

// MSE is the projected solver for the squared error with an identity
// output (see the comment at the top of this file): the filters (conv
// weights and biases) follow Adam on the projected objective, each epoch
// one full-batch step, and the readout of all neurons is computed once at
// the end (Readout or AutoReadout). Its methods Name, Trainable, Begin,
// Epoch, Validate and Random are what train's epoch loop drives.
//
// The loss an epoch reports is the training data loss before its step;
// Validate gives the validation loss and median R^2 after it (R^2 NaN on
// epochs skipped by r2Every, never the first; from PartStats or Sums on
// every epoch: the caller asks ValR2 or ValR2s at the best filters, so
// that ranges of neurons fitted apart log the same).
type MSE struct {
	pj  *projector
	net *nn.Net
	pr  Problem
}

// NewMSE reduces a problem to its B x B form for the filters of net (one
// conv stack; the readout part of net is overwritten at the end).
func NewMSE(pr Problem, net *nn.Net) (*MSE, error) {
	pj, err := newProjector(&pr, net)
	if err != nil {
		return nil, err
	}
	return &MSE{pj: pj, net: net, pr: pr}, nil
}

// Name is the solver's config word.
func (s *MSE) Name() string { return "projected" }

// Trainable returns the conv parameters, a prefix of the net's Params.
func (s *MSE) Trainable() []float64 { return s.net.Params[:s.pj.nconv] }

// Random returns nil: the solver draws nothing while training.
func (s *MSE) Random() *rand.PCG { return nil }

// Begin evaluates the starting filters: their loss and gradient feed the
// first step.
func (s *MSE) Begin() error { return s.pj.eval(s.net, true, false) }

// Epoch takes one optimiser step on the filters and returns the training
// data loss before it.
func (s *MSE) Epoch(opt *nn.Adam) float64 {
	loss := s.pj.loss
	opt.Step(s.net.Params[:s.pj.nconv], s.net.Grads[:s.pj.nconv])
	return loss
}

// Validate evaluates the filters after an epoch: the validation loss of
// the closed-form readout (the training objective when there are no
// validation trials) and the median validation R^2.
func (s *MSE) Validate(epoch int) (float64, float64, error) {
	pj := s.pj
	r2 := pj.r2Every > 0 && (epoch == 1 || epoch%pj.r2Every == 0)
	if err := pj.eval(s.net, true, r2); err != nil {
		return 0, 0, err
	}
	if pj.Bv == 0 {
		return pj.obj, pj.vr2, nil
	}
	return pj.val, pj.vr2, nil
}

// ValR2 returns the median validation R^2 at the net's current filters
// (NaN without validation trials).
func (s *MSE) ValR2() (float64, error) {
	if s.pj.Bv == 0 {
		return math.NaN(), nil
	}
	if err := s.pj.eval(s.net, false, true); err != nil {
		return 0, err
	}
	return s.pj.vr2, nil
}

// ValR2s returns every neuron's validation R^2 at the net's current
// filters (NaN for a neuron without validation variance; nil without
// validation trials): MedianR2 of them is ValR2.
func (s *MSE) ValR2s() ([]float64, error) {
	if s.pj.Bv == 0 {
		return nil, nil
	}
	if err := s.pj.eval(s.net, false, true); err != nil {
		return nil, err
	}
	return slices.Clone(s.pj.r2), nil
}

// Readout writes the closed-form readout at the problem's penalty into
// the net and returns the predictions of every bin (B x N, in the units
// the solver was given: z-scored when Problem.Norm is set).
func (s *MSE) Readout() ([]float64, error) {
	if err := s.pj.readout(s.net); err != nil {
		return nil, err
	}
	return s.pj.curves(), nil
}

// AutoReadout chooses the readout penalty at the net's current filters
// (eval/methods.md §12), writes that readout into the net and returns the
// predictions of every bin (as Readout) and each neuron's penalty in
// model.readout_l2 units.
func (s *MSE) AutoReadout(perNeuron bool) (curves, l2 []float64, err error) {
	curves, l2, weights, err := s.pj.autoReadoutTo(&s.pr, s.net, perNeuron, s.net.ReadB())
	if err != nil {
		return nil, nil, err
	}
	weights.Weights(s.net.ReadW(), 0, s.pj.N)
	return curves, l2, nil
}

// ReadoutBlocks is the readout of Readout (auto false: the problem's
// penalty) or of AutoReadout (auto true) without writing it into the net,
// which may then have any number of neurons (one, for a fit from
// PartStats): it returns the per-bin predictions, each neuron's penalty
// in model.readout_l2 units (nil unless auto), the readout bias and the
// weights in factored form (Readout), whose coefficients are computed
// again on every call of its Coef, so that neither the N x F weights of
// a million neurons (3.8 GB) nor their coefficients need ever be held at
// once. The Readout keeps B x N values of the solver alive. With a Problem of PartStats the readout
// takes over their Sum arrays (the curves are returned in ValParts.Sum
// when it has B x N values) and the solver cannot be evaluated after it
// (it panics). The arithmetic is that of AutoReadout (by
// the eigendecomposition of A A^T), not Readout's Cholesky solve: with a
// fixed penalty the two agree to rounding.
func (s *MSE) ReadoutBlocks(auto, perNeuron bool) (curves, l2, bias []float64, weights *Readout, err error) {
	bias = make([]float64, s.pj.N)
	if auto {
		curves, l2, weights, err = s.pj.autoReadoutTo(&s.pr, s.net, perNeuron, bias)
		return curves, l2, bias, weights, err
	}
	curves, weights, err = s.pj.fixedReadout(s.net, bias)
	return curves, nil, bias, weights, err
}

// Eval is the state of the projected objective at some filters.
type Eval struct {
	Objective float64 // training objective, penalty included (EpochLog units)
	Loss      float64 // training data loss
	ValLoss   float64 // validation loss (NaN without validation trials)
	ValR2     float64 // median validation R^2 (NaN unless asked for)
}

// Evaluate computes the projected objective at the net's current filters
// and, with grad, writes its gradient into the conv part of net.Grads; for
// checks against other paths to the same numbers.
func (s *MSE) Evaluate(grad, r2 bool) (Eval, error) {
	pj := s.pj
	if err := pj.eval(s.net, grad, r2); err != nil {
		return Eval{}, err
	}
	return Eval{Objective: pj.obj, Loss: pj.loss, ValLoss: pj.val, ValR2: pj.vr2}, nil
}
