package projection

import (
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack"
	"gonum.org/v1/gonum/lapack/lapack64"

	"github.com/strialab/stria/nn"
)

// Automatic choice of the readout penalty of the projected (MSE) solver.
//
// With G = A A^T = U diag(s) U^T (Bt x Bt; A, S, cvt, yyv as in the comment
// at the top of projected.go), K^-1 = U diag(1/(s + mu)) U^T, so for every
// mu of a grid the closed-form readout's scores cost O(Bt) to O(Bv Bt^2)
// after one eigendecomposition [derived]:
//
//   - validation loss: Rk U = (P U) diag(d), P = (Hv - 1 hbar^T) A^T, d_j =
//     1/(s_j + mu), and sum_b Nv_b (||yvc_b||^2 - 2 Rk_b . cvt_b + Rk_b S Rk_b^T)
//     with S' = U^T S U: O(Bv Bt^2) per mu;
//   - per neuron on the validation trials: the centred prediction of neuron n
//     is (P U) diag(d) z_n, z_n = U^T D^1/2 yc_n, so G grid values cost
//     G Bv Bt N;
//   - on the training rows alone, Mallows' C_p / Stein's unbiased risk
//     estimate (Mallows 1973, Technometrics 15:661-675 [mem]): the D^1/2-scaled
//     condition means carry noise of variance sigma^2 per row (sigma^2 the
//     within-condition variance of one trial), the residual is
//     ||E||^2 = sum_j (mu/(s_j+mu))^2 S'_jj and the degrees of freedom
//     df = 1 + sum_j s_j/(s_j+mu), so
//     risk(mu) = ||E||^2 + 2 sigma^2 df - Bt sigma^2
//     estimates the weighted squared error of the fitted condition means
//     against the true ones, i.e. (up to a constant) the error on new trials
//     of the same conditions. sigma^2 = within / (W - Bt), per neuron or
//     summed. It assumes the noise variance does not depend on the
//     condition;
//   - generalised cross-validation on the condition rows (Golub, Heath &
//     Wahba 1979, Technometrics 21:215-223 [mem]): Bt ||E||^2 / (Bt - df)^2.
//     It approximates leaving out one whole condition and predicting its
//     mean from the others (with a condition's weight in D), i.e.
//     interpolation along the stimulus axis, not new trials of a seen
//     condition, which is what the test trials score. Measured on the
//     penalty benchmark it chose 2-3x smaller penalties than the validation
//     loss and closed less of the gap; it is kept for comparison only.
//
// The grid is relative: mu = tau tr(G)/Bt (tr(G)/Bt the mean eigenvalue of
// A A^T, which carries the trial counts through D), so it does not depend
// on the scale of the features; the ridge solution does not depend on the
// scale of the responses, so one grid serves raw counts and z-scored data.
// In the config's units, readout_l2 = 2 mu / W.

// l2Grid is the default relative grid: tau = 10^(-6 + k/8), k = 0..72
// (1e-6 to 1e3, eight values per decade: neighbours 1.33x apart).
func l2Grid() []float64 {
	g := make([]float64, 73)
	for k := range g {
		g[k] = math.Pow(10, -6+float64(k)/8)
	}
	return g
}

// ridgePath holds the eigendecomposition of A A^T at the projector's
// current features and the grid of penalties evaluated on it. Shapes:
// Bt x Bt for u and su, Bv x Bt for pu and cu, Bt x N for z.
type ridgePath struct {
	tau, mu []float64 // grid, relative and absolute (the projector's mu units)
	fixed   float64   // > 0: the one penalty (mu units) of fixedReadout, not a grid
	scale   float64   // tr(A A^T) / Bt
	s, u    []float64 // eigenvalues (ascending) and eigenvectors (columns)
	pu, cu  []float64
	su      []float64
	z       []float64 // nil until a per-neuron method needs it
	work    []float64
	d       []float64 // Bt
	tmp     []float64 // Bt
}

// newRidgePath allocates a path over the grid tau (l2Grid if nil).
func newRidgePath(pj *projector, tau []float64) *ridgePath {
	if tau == nil {
		tau = l2Grid()
	}
	Bt, Bv := pj.Bt, pj.Bv
	rp := &ridgePath{tau: tau, mu: make([]float64, len(tau)), s: make([]float64, Bt), u: make([]float64, Bt*Bt),
		pu: make([]float64, Bv*Bt), cu: make([]float64, Bv*Bt), su: make([]float64, Bt*Bt),
		d: make([]float64, Bt), tmp: make([]float64, Bt*Bt)}
	var q [1]float64
	lapack64.Syev(lapack.EVCompute, blas64.Symmetric{Uplo: blas.Upper, N: Bt, Stride: Bt, Data: rp.u}, rp.s, q[:], -1)
	rp.work = make([]float64, int(q[0]))
	return rp
}

// decompose evaluates the features of the net's filters and diagonalises
// A A^T; it prepares the validation terms P U, cvt U and U^T S U.
func (rp *ridgePath) decompose(pj *projector, net *nn.Net) error {
	Bt, Bv, F := pj.Bt, pj.Bv, pj.F
	h := pj.features(net)
	mulABt(rp.u, pj.a, pj.a, Bt, Bt, F, true)
	var tr float64
	for i := 0; i < Bt; i++ {
		tr += rp.u[i*Bt+i]
	}
	switch {
	case rp.fixed > 0 && (math.IsNaN(tr) || math.IsInf(tr, 0)):
		return fmt.Errorf("train: projected solver: the features are not finite")
	case rp.fixed > 0:
		// A fixed penalty: zero features (dead filters) give the readout
		// of the means alone, as the Cholesky solve of K = mu I does.
		rp.mu[0] = rp.fixed
	case !(tr > 0) || math.IsInf(tr, 0):
		return fmt.Errorf("train: readout penalty: the features are zero or not finite")
	default:
		rp.scale = tr / float64(Bt)
		for g, t := range rp.tau {
			rp.mu[g] = t * rp.scale
		}
	}
	if !lapack64.Syev(lapack.EVCompute, blas64.Symmetric{Uplo: blas.Upper, N: Bt, Stride: Bt, Data: rp.u}, rp.s, rp.work, len(rp.work)) {
		return fmt.Errorf("train: readout penalty: the eigendecomposition did not converge")
	}
	for j := range rp.s {
		rp.s[j] = max(rp.s[j], 0)
	}
	ug := gen(rp.u, Bt, Bt)
	// S' = U^T S U.
	blas64.Gemm(blas.Trans, blas.NoTrans, 1, ug, gen(pj.S, Bt, Bt), 0, gen(rp.tmp, Bt, Bt))
	blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(rp.tmp, Bt, Bt), ug, 0, gen(rp.su, Bt, Bt))
	if Bv > 0 {
		for r, b := range pj.vrows {
			hv := pj.hv[r*F : (r+1)*F]
			for f, v := range h[b*F : (b+1)*F] {
				hv[f] = v - pj.hbar[f]
			}
		}
		mulABt(pj.rk, pj.hv, pj.a, Bv, Bt, F, false) // P
		blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(pj.rk, Bv, Bt), ug, 0, gen(rp.pu, Bv, Bt))
		blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(pj.cvt, Bv, Bt), ug, 0, gen(rp.cu, Bv, Bt))
	}
	rp.z = nil
	return nil
}

// valLoss writes into dst (one per grid value) the validation loss of the
// closed-form readout, in the units of EpochLog.ValLoss.
func (rp *ridgePath) valLoss(dst []float64, pj *projector) {
	Bt, Bv := pj.Bt, pj.Bv
	for g, mu := range rp.mu {
		for j, s := range rp.s {
			rp.d[j] = 1 / (s + mu)
		}
		sum := pj.withinV
		for r := 0; r < Bv; r++ {
			pu, cu := rp.pu[r*Bt:(r+1)*Bt], rp.cu[r*Bt:(r+1)*Bt]
			v := rp.tmp[:Bt]
			var cross float64
			for j, x := range pu {
				v[j] = x * rp.d[j]
				cross += v[j] * cu[j]
			}
			var quad float64
			for j, a := range v {
				if a == 0 {
					continue
				}
				row := rp.su[j*Bt : (j+1)*Bt]
				var q float64
				for k, b := range v {
					q += row[k] * b
				}
				quad += a * q
			}
			sum += pj.nv[r] * (pj.yyv[r] - 2*cross + quad)
		}
		dst[g] = sum / (pj.Wv * pj.Ntot)
	}
}

// sure writes into dst Mallows' C_p risk of the fitted condition means
// (summed over neurons, relative: the constant -Bt sigma^2 is left out) and
// into gcv (if not nil) the generalised cross-validation score, both from
// the training rows alone.
func (rp *ridgePath) sure(dst, gcv []float64, pj *projector) {
	Bt := pj.Bt
	sigma2 := pj.within / math.Max(pj.W-float64(Bt), 1)
	for g, mu := range rp.mu {
		var res, df float64
		for j, s := range rp.s {
			q := mu / (s + mu)
			res += q * q * rp.su[j*Bt+j]
			df += s / (s + mu)
		}
		df++ // the intercept
		dst[g] = res + 2*sigma2*df
		if gcv != nil {
			gcv[g] = float64(Bt) * res / ((float64(Bt) - df) * (float64(Bt) - df))
		}
	}
}

// argmin returns the index of the smallest finite value (0 if none).
func argmin(x []float64) int {
	k := 0
	best := math.Inf(1)
	for i, v := range x {
		if v < best {
			best, k = v, i
		}
	}
	return k
}

// zeta computes z = U^T D^1/2 Yc (Bt x N) once per decomposition, by
// blocks of neurons (scratch Bt x neuronBlock).
func (rp *ridgePath) zeta(pj *projector) []float64 {
	if rp.z != nil {
		return rp.z
	}
	Bt, N := pj.Bt, pj.N
	if pj.consume {
		// In yc's own storage: each block of yc is copied to sy before
		// z's block overwrites it.
		rp.z, pj.yc, pj.spent = pj.yc, nil, true
	} else {
		rp.z = make([]float64, Bt*N)
	}
	yc := rp.z
	if !pj.consume {
		yc = pj.yc
	}
	// z[:, n0:n1] = U^T sy by mulInto (Dgemm's arithmetic) with U^T
	// copied, on all cores; the blocks of neurons are disjoint, so a block
	// of yc is read before z overwrites it also in place.
	ut := make([]float64, Bt*Bt)
	for i := 0; i < Bt; i++ {
		for l := 0; l < Bt; l++ {
			ut[i*Bt+l] = rp.u[l*Bt+i]
		}
	}
	parallelScratch(N, Bt*min(N, neuronBlock), func(n0, n1 int, sy []float64) {
		nb := n1 - n0
		for r := 0; r < Bt; r++ {
			s := pj.sq[r]
			for n, v := range yc[r*N+n0 : r*N+n0+nb] {
				sy[r*nb+n] = s * v
			}
		}
		mulInto(rp.z[n0:], N, ut, Bt, sy[:Bt*nb], nb, Bt, Bt, nb)
	})
	return rp.z
}

// perNeuronVal returns, for every neuron, the index of the grid value with
// the smallest validation sum of squares of that neuron (G Bv Bt N
// multiply-adds). Neurons without validation variance get the global
// choice glob.
func (rp *ridgePath) perNeuronVal(pj *projector, glob int) []int {
	Bt, Bv, N := pj.Bt, pj.Bv, pj.N
	z := rp.zeta(pj)
	best := make([]float64, N)
	pick := make([]int, N)
	for n := range best {
		best[n] = math.Inf(1)
		pick[n] = glob
	}
	m := make([]float64, Bv*Bt)
	pred := make([]float64, Bv*N)
	sse := make([]float64, N)
	for g, mu := range rp.mu {
		for r := 0; r < Bv; r++ {
			for j, s := range rp.s {
				m[r*Bt+j] = rp.pu[r*Bt+j] / (s + mu)
			}
		}
		blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(m, Bv, Bt), gen(z, Bt, N), 0, gen(pred, Bv, N))
		clear(sse)
		for r := 0; r < Bv; r++ {
			w := pj.nv[r]
			p, d := pred[r*N:(r+1)*N], pj.dv[r*N:(r+1)*N]
			for n, v := range p {
				e := d[n] - v
				sse[n] += w * e * e
			}
		}
		for n, v := range sse {
			if pj.valTot[n] > 0 && v < best[n] {
				best[n], pick[n] = v, g
			}
		}
	}
	return pick
}

// perNeuronSURE returns, for every neuron, the index of the grid value
// with the smallest C_p risk of that neuron on the training rows
// (sigma_n^2 its within-condition variance): O(Bt N G) after z.
func (rp *ridgePath) perNeuronSURE(pj *projector, withinN []float64) []int {
	Bt, N := pj.Bt, pj.N
	z := rp.zeta(pj)
	pick := make([]int, N)
	dfs := make([]float64, len(rp.mu))
	// coef[g*Bt+j] = mu_g / (s_j + mu_g): no division per neuron.
	coef := make([]float64, len(rp.mu)*Bt)
	for g, mu := range rp.mu {
		for j, s := range rp.s {
			dfs[g] += s / (s + mu)
			coef[g*Bt+j] = mu / (s + mu)
		}
	}
	// Each neuron is done by one goroutine, so the choice does not depend
	// on the number of cores. For each grid value the risks of a block of
	// neurons are summed over j in ascending order, as one neuron's alone.
	parallelBlocks(N, func(n0, n1 int) {
		nb := n1 - n0
		res := make([]float64, nb)
		best := make([]float64, nb)
		sigma2 := make([]float64, nb)
		for n := range best {
			best[n] = math.Inf(1)
			sigma2[n] = withinN[n0+n] / math.Max(pj.W-float64(Bt), 1)
		}
		if hasTile4x8 && Bt > 0 {
			// By tiles of 8 neurons (sq8: the same sums as the loop
			// below, bit for bit), each tile's z read from the L1 cache
			// for every grid value; the neurons left over go below.
			var r [8]float64
			for m := 0; m+8 <= nb; m += 8 {
				for g := range rp.mu {
					sq8(&r[0], &z[n0+m], N, &coef[g*Bt], Bt)
					for i, v := range r {
						n := m + i
						if v := v + 2*sigma2[n]*dfs[g]; v < best[n] {
							best[n], pick[n0+n] = v, g
						}
					}
				}
			}
			done := nb &^ 7
			res, best, sigma2 = res[done:], best[done:], sigma2[done:]
			n0 += done
			nb -= done
		}
		for g := range rp.mu {
			clear(res)
			for j, c := range coef[g*Bt : (g+1)*Bt] {
				zr := z[j*N+n0 : j*N+n1]
				for n, v := range zr {
					q := c * v
					res[n] += q * q
				}
			}
			for n, r := range res {
				if v := r + 2*sigma2[n]*dfs[g]; v < best[n] {
					best[n], pick[n0+n] = v, g
				}
			}
		}
	})
	return pick
}

// readout writes into c (N) the readout bias of the closed-form readout
// with penalty rp.mu[pick[n]] for neuron n (w_n = A^T U diag(1/(s+mu_n))
// z_n, c_n = ybar_n - hbar . w_n = ybar_n - (U^T A hbar) . zs_n with zs_n
// = diag(1/(s+mu_n)) z_n) and returns the per-bin predictions (B x N,
// trained units) and the weights in factored form (Readout).
// Everything goes by blocks of neurons, with scratch of B x neuronBlock.
// The features must be those of the last decompose.
func (rp *ridgePath) readout(pj *projector, c []float64, pick []int) (curves []float64, weights *Readout) {
	B, Bt, F, N := pj.B, pj.Bt, pj.F, pj.N
	z := rp.zeta(pj)
	mu, s := rp.mu, rp.s
	// zsBlock writes zs of neurons [n0, n0+nb) into dst (Bt x nb).
	zsBlock := func(dst []float64, n0, nb int) {
		for j := 0; j < Bt; j++ {
			sj := s[j]
			row := dst[j*nb : (j+1)*nb]
			for n, v := range z[j*N+n0 : j*N+n0+nb] {
				row[n] = v / (sj + mu[pick[n0+n]])
			}
		}
	}
	// zsBlockT writes the same values transposed (nb x Bt).
	zsBlockT := func(dst []float64, n0, nb int) {
		for j := 0; j < Bt; j++ {
			sj := s[j]
			for n, v := range z[j*N+n0 : j*N+n0+nb] {
				dst[n*Bt+j] = v / (sj + mu[pick[n0+n]])
			}
		}
	}
	// AU = A^T U (F x Bt); W^T = AU zs (F x N).
	au := make([]float64, F*Bt)
	blas64.Gemm(blas.Trans, blas.NoTrans, 1, gen(pj.a, Bt, F), gen(rp.u, Bt, Bt), 0, gen(au, F, Bt))
	// v = AU^T hbar (Bt): c_n = ybar_n - v . zs_n.
	v := make([]float64, Bt)
	blas64.Gemv(blas.Trans, 1, gen(au, F, Bt), blas64.Vector{N: F, Inc: 1, Data: pj.hbar}, 0, blas64.Vector{N: Bt, Inc: 1, Data: v})
	// Per-bin predictions: (H - 1 hbar^T) W^T + c = ((H - 1 hbar^T) AU) zs + ybar.
	hc := make([]float64, B*F)
	for b := 0; b < B; b++ {
		for f, x := range pj.h[b*F : (b+1)*F] {
			hc[b*F+f] = x - pj.hbar[f]
		}
	}
	g := make([]float64, B*Bt)
	blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(hc, B, F), gen(au, F, Bt), 0, gen(g, B, Bt))
	ymean := pj.ymean
	var out []float64
	if pj.consume && len(pj.valStore) == B*N {
		// dv is spent: the curves take its storage.
		out, pj.dv, pj.valStore = pj.valStore, nil, nil
	} else {
		out = make([]float64, B*N)
	}
	// Blocks of neurons on all cores: every value is computed by one
	// goroutine in a fixed order, whatever the number of cores.
	parallelScratch(N, Bt*min(N, neuronBlock), func(n0, n1 int, zs []float64) {
		nb := n1 - n0
		zb := zs[:Bt*nb]
		zsBlock(zb, n0, nb)
		for n := 0; n < nb; n++ {
			var t float64
			for j, x := range v {
				t += x * zb[j*nb+n]
			}
			c[n0+n] = ymean[n0+n] - t
		}
		// out[:, n0:n1] = g zb, as Dgemm computes it (mulInto).
		mulInto(out[n0:], N, g, Bt, zb, nb, B, Bt, nb)
		for b := 0; b < B; b++ {
			row := out[b*N+n0 : b*N+n0+nb]
			for n, m := range ymean[n0 : n0+nb] {
				row[n] += m
			}
		}
	})
	// W (N x F, row-major) = zs^T (N x Bt) AU^T (Bt x F): the readout in
	// factored form, zs^T its coefficients and AU^T its basis
	// (Readout.Weights and Expand multiply them out).
	aut := make([]float64, Bt*F)
	for f := 0; f < F; f++ {
		for j, x := range au[f*Bt : (f+1)*Bt] {
			aut[j*F+f] = x
		}
	}
	coef := func(dst []float64, n0, n1 int) {
		if n0 < 0 || n1 > N || n0 > n1 || len(dst) != (n1-n0)*Bt {
			panic(fmt.Sprintf("train: readout coefficients [%d, %d) of %d neurons into %d values, want (n1-n0) x %d", n0, n1, N, len(dst), Bt))
		}
		parallelRange(n1-n0, weightsBlock, func(m0, m1 int) {
			zsBlockT(dst[m0*Bt:m1*Bt], n0+m0, m1-m0)
		})
	}
	return out, &Readout{Rank: Bt, Features: F, Basis: aut, Coef: coef}
}

// Readout is the closed-form readout of a projected MSE fit in factored
// form: the weights of neuron n are w_n = sum_j coef_nj basis_j, row n
// of the N x Rank coefficients times the Rank x Features basis, which
// all neurons share (Rank = Bt, the training conditions: every weight
// vector lies in the span of the training conditions' features). The
// coefficients are 8x fewer numbers than the weights at 60 conditions
// and 480 features: a million neurons' weights (3.8 GB) need be neither
// computed nor written.
type Readout struct {
	Rank, Features int
	// Basis is Rank x Features, row-major.
	Basis []float64
	// Coef writes the coefficients of neurons [n0, n1) into dst
	// ((n1-n0) x Rank, row-major). It may read a file: not safe for
	// concurrent use.
	Coef func(dst []float64, n0, n1 int)
}

// Weights writes the readout weights of neurons [n0, n1) into dst
// ((n1-n0) x Features, row-major, the layout of a net's ReadW): the
// coefficients of Coef multiplied out by Expand.
func (r *Readout) Weights(dst []float64, n0, n1 int) {
	if n0 > n1 || len(dst) != (n1-n0)*r.Features {
		panic(fmt.Sprintf("train: readout weights [%d, %d) into %d values, want (n1-n0) x %d", n0, n1, len(dst), r.Features))
	}
	coef := make([]float64, (n1-n0)*r.Rank)
	r.Coef(coef, n0, n1)
	Expand(dst, coef, r.Basis, n1-n0, r.Rank, r.Features)
}

// Expand writes the readout weights coef basis (n x F, row-major) into
// dst from the coefficients of n neurons (n x rank) and a basis (rank x
// F), in blocks of weightsBlock neurons on all cores. Every weight is
// sum_j coef_nj basis_jf over j in ascending order, unfused, starting from
// 0: the arithmetic of the former AU zs (F x N) followed by a
// transposition, so the same bits (TestReadoutWeightsMatchFormer), and
// the same on any number of cores (a weight does not depend on the block
// it is computed in).
func Expand(dst, coef, basis []float64, n, rank, F int) {
	if len(dst) != n*F || len(coef) != n*rank || len(basis) != rank*F {
		panic(fmt.Sprintf("train: Expand: %d weights, %d coefficients and %d basis values for %d neurons of rank %d and %d features", len(dst), len(coef), len(basis), n, rank, F))
	}
	parallelRange(n, weightsBlock, func(m0, m1 int) {
		mulInto(dst[m0*F:m1*F], F, coef[m0*rank:m1*rank], rank, basis, F, m1-m0, rank, F)
	})
}

// weightsBlock is the number of neurons of one task of the readout
// weights and coefficients (a multiple of mulInto's 4-row tiles).
const weightsBlock = 256

// parallelRange calls do on the blocks [m0, m1) of size neurons that
// cover [0, n), on up to GOMAXPROCS goroutines, and waits.
func parallelRange(n, size int, do func(m0, m1 int)) {
	nblk := (n + size - 1) / size
	var next atomic.Int64
	var wg sync.WaitGroup
	for range min(runtime.GOMAXPROCS(0), nblk) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := int(next.Add(1) - 1)
				if i >= nblk {
					return
				}
				do(i*size, min((i+1)*size, n))
			}
		}()
	}
	wg.Wait()
}

// parallelScratch is parallelBlocks with scratch of size values for each
// goroutine (do may use it freely during one call).
func parallelScratch(N, size int, do func(n0, n1 int, scratch []float64)) {
	nblk := (N + neuronBlock - 1) / neuronBlock
	var next atomic.Int64
	var wg sync.WaitGroup
	for range min(runtime.GOMAXPROCS(0), nblk) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			scratch := make([]float64, size)
			for {
				i := int(next.Add(1) - 1)
				if i >= nblk {
					return
				}
				do(i*neuronBlock, min((i+1)*neuronBlock, N), scratch)
			}
		}()
	}
	wg.Wait()
}

// parallelBlocks calls do on the blocks [n0, n1) of neuronBlock neurons
// that cover [0, N), on up to GOMAXPROCS goroutines, and waits.
func parallelBlocks(N int, do func(n0, n1 int)) {
	nblk := (N + neuronBlock - 1) / neuronBlock
	next := make(chan int, nblk)
	for i := range nblk {
		next <- i
	}
	close(next)
	var wg sync.WaitGroup
	for range min(runtime.GOMAXPROCS(0), nblk) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				do(i*neuronBlock, min((i+1)*neuronBlock, N))
			}
		}()
	}
	wg.Wait()
}

// readoutL2 converts a penalty in the projector's units (mu) to the
// config's model.readout_l2 (lambda = 2 mu / W).
func (pj *projector) readoutL2(mu float64) float64 { return 2 * mu / pj.W }

// trainWithinN returns each neuron's within-condition sum of squares over
// the training trials, in the trainer's units (for perNeuronSURE).
func trainWithinN(pr *Problem, pj *projector) []float64 {
	if pj.withinN != nil {
		return pj.withinN
	}
	st := pr.Train
	N := st.N
	out := make([]float64, N)
	for b, c := range st.Count {
		if c == 0 {
			continue
		}
		cnt := float64(c)
		for n := 0; n < N; n++ {
			s := st.Sum[b*N+n]
			out[n] += st.SumSq[b*N+n] - s*s/cnt
		}
	}
	for n := range out {
		_, inv := pr.Norm.Affine(n)
		out[n] *= inv * inv
	}
	return out
}

// autoReadoutTo chooses the readout penalty at the net's current filters
// and computes the closed-form readout with it, its bias into bias (N). Global: one penalty
// for all neurons, by the validation loss when there are validation trials
// and by C_p otherwise. Per neuron: each neuron's own C_p (its own
// within-condition variance; measured better than per-neuron validation
// choices, which the small validation set makes noisy). It returns the
// per-bin predictions (B x N, trained units) and the chosen
// model.readout_l2 of every neuron (all equal unless perNeuron), and
// leaves pj.mu at the global choice.
func (pj *projector) autoReadoutTo(pr *Problem, net *nn.Net, perNeuron bool, bias []float64) (curves, l2 []float64, weights *Readout, err error) {
	rp := newRidgePath(pj, nil)
	if err := rp.decompose(pj, net); err != nil {
		return nil, nil, nil, err
	}
	score := make([]float64, len(rp.mu))
	if pj.Bv > 0 {
		rp.valLoss(score, pj)
	} else {
		rp.sure(score, nil, pj)
	}
	g := argmin(score)
	pj.mu = rp.mu[g]
	var pick []int
	if perNeuron {
		pick = rp.perNeuronSURE(pj, trainWithinN(pr, pj))
	} else {
		pick = make([]int, pj.N)
		for n := range pick {
			pick[n] = g
		}
	}
	curves, weights = rp.readout(pj, bias, pick)
	l2 = make([]float64, pj.N)
	for n, k := range pick {
		l2[n] = pj.readoutL2(rp.mu[k])
	}
	return curves, l2, weights, nil
}

// fixedReadout computes the closed-form readout at the problem's penalty
// (pj.mu) by the eigendecomposition of A A^T, its bias into bias (N), and
// returns the per-bin predictions and the factored weights of
// ridgePath.readout.
func (pj *projector) fixedReadout(net *nn.Net, bias []float64) (curves []float64, weights *Readout, err error) {
	rp := newRidgePath(pj, []float64{1})
	rp.fixed = pj.mu
	if err := rp.decompose(pj, net); err != nil {
		return nil, nil, err
	}
	curves, weights = rp.readout(pj, bias, make([]int, pj.N))
	return curves, weights, nil
}
