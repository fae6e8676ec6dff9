package acuity

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// MaxNeurons returns the largest population size N for which the
// bias-corrected linear Fisher information of a pair with ta and tb trials is
// defined: N < ta + tb - 3, so ta + tb - 4 (negative when there are too few
// trials). Its standard error (InfoSE) needs N < ta + tb - 5.
//
// Source: the expectation of the inverse of a Wishart matrix with
// nu = ta + tb - 2 degrees of freedom is finite only for nu > N + 1
// (doc.go, "Bias correction").
func MaxNeurons(ta, tb int) int { return ta + tb - 4 }

// MaxSubset returns the largest population size allowed for every
// neighbouring pair of the axis, the minimum over pairs of
// MaxNeurons(TA, TB), given the condition of each trial. About half of it is
// a sensible largest size for InfoVsSize. Errors: an invalid axis, a condition
// out of range, or a pair too small for even one neuron.
func MaxSubset(cond []int, ax Conditions) (int, error) {
	if err := ax.check(); err != nil {
		return 0, err
	}
	B := ax.NBins()
	counts := make([]int, B)
	for t, c := range cond {
		if c < 0 || c >= B {
			return 0, fmt.Errorf("acuity: trial %d has condition %d, want 0..%d", t, c, B-1)
		}
		counts[c]++
	}
	lim := math.MaxInt
	for _, p := range ax.Pairs() {
		m := MaxNeurons(counts[p.A], counts[p.B])
		if m < 1 {
			return 0, fmt.Errorf("acuity: pair (%d,%d) has %d+%d trials: too few for the bias-corrected information of even one neuron (needs 5)", p.A, p.B, counts[p.A], counts[p.B])
		}
		lim = min(lim, m)
	}
	return lim, nil
}

// CorrectInfo returns the bias-corrected linear Fisher information
//
//	I_bc = I_naive (nu - N - 1)/nu - N (1/ta + 1/tb)/ds^2,  nu = ta + tb - 2,
//
// from the naive plug-in estimate I_naive = f'^T S^-1 f' of a pair with ta
// and tb trials, N neurons and stimulus step ds, S the pooled covariance
// (divisor nu). It is unbiased for Gaussian responses with a covariance shared
// by the two conditions (derivation in doc.go; with ta = tb = T it is the form
// of Kanitscheider et al. 2015, PLoS Comput Biol 11:e1004218). It returns NaN
// when N > MaxNeurons(ta, tb). The result can be negative when the true
// information is small; it is not clipped.
func CorrectInfo(naive float64, ta, tb, n int, ds float64) float64 {
	if n > MaxNeurons(ta, tb) || n < 0 {
		return math.NaN()
	}
	nu := float64(ta + tb - 2)
	N := float64(n)
	return naive*(nu-N-1)/nu - N*(1/float64(ta)+1/float64(tb))/(ds*ds)
}

// CorrectShuffled returns the bias-corrected information of the
// trial-shuffled population (diagonal covariance):
//
//	I_bc = I_naive (nu - 2)/nu - N (1/ta + 1/tb)/ds^2,  nu = ta + tb - 2,
//
// I_naive = sum_n f'_n^2 / s_n^2 with s_n^2 the pooled variance (divisor
// nu). Unbiased for Gaussian responses with equal variances in the two
// conditions, whatever the correlations (doc.go). NaN when nu <= 2.
func CorrectShuffled(naive float64, ta, tb, n int, ds float64) float64 {
	nu := float64(ta + tb - 2)
	if nu <= 2 || n < 0 {
		return math.NaN()
	}
	return naive*(nu-2)/nu - float64(n)*(1/float64(ta)+1/float64(tb))/(ds*ds)
}

// InfoSE returns the standard error of the bias-corrected information for
// Gaussian responses,
//
//	Var = 2 [I^2 + 2 k (nu-1) I + k^2 N (nu-1)] / (nu - N - 3),
//	k = (1/ta + 1/tb)/ds^2,  nu = ta + tb - 2,
//
// evaluated at info (clipped at 0 from below). Derived in doc.go; with
// ta = tb = T it is the variance given by Kanitscheider et al. 2015 [mem]. NaN
// when nu - N - 3 <= 0.
func InfoSE(info float64, ta, tb, n int, ds float64) float64 {
	nu := float64(ta + tb - 2)
	N := float64(n)
	if nu-N-3 <= 0 || math.IsNaN(info) {
		return math.NaN()
	}
	I := math.Max(info, 0)
	k := (1/float64(ta) + 1/float64(tb)) / (ds * ds)
	return math.Sqrt(2 * (I*I + 2*k*(nu-1)*I + k*k*N*(nu-1)) / (nu - N - 3))
}

// Threshold returns the discrimination threshold at d' = 1 in axis units,
// 1/sqrt(info). Rules: info > 0 (and finite) gives a finite positive
// threshold; info <= 0 (no information detectable: the bias-corrected
// estimate can fall below zero) gives +Inf; NaN gives NaN; +Inf gives 0.
func Threshold(info float64) float64 {
	switch {
	case math.IsNaN(info):
		return math.NaN()
	case info <= 0:
		return math.Inf(1)
	}
	return 1 / math.Sqrt(info)
}

// PairInfo is the linear Fisher information of one neuron subset between the
// neighbouring conditions of Pair, in 1/(axis unit)^2.
type PairInfo struct {
	Pair
	TA, TB int // trials of conditions A and B
	// N is the number of neurons used: the subset without the neurons whose
	// responses are constant, and equal, over all trials of both conditions
	// (they carry no linear information and would make S singular).
	N int
	// Naive = f'^T S^-1 f', Info its bias-corrected value (CorrectInfo) and
	// SE the standard error of Info (InfoSE; NaN when N >= TA+TB-5).
	Naive, Info, SE float64
	// ShuffledNaive and Shuffled are the same for the diagonal of S: the
	// information of the trial-shuffled population, without noise
	// correlations (CorrectShuffled).
	ShuffledNaive, Shuffled float64
}

// Threshold returns the discrimination threshold of the pair at d' = 1,
// Threshold(p.Info).
func (p PairInfo) Threshold() float64 { return Threshold(p.Info) }

// ShuffledThreshold returns Threshold(p.Shuffled).
func (p PairInfo) ShuffledThreshold() float64 { return Threshold(p.Shuffled) }

// LinearInfo returns the linear Fisher information of the neurons in subset
// for every pair of neighbouring conditions (Conditions.Pairs order).
//
// y holds the responses, trials x n row-major float32; cond[t] in 0..B-1 is
// the condition of trial t, B = ax.NBins(). subset lists column indices of y
// (nil: all n neurons); its order does not change the result beyond
// rounding. For each pair, f' = (mean_B - mean_A)/Ds and S is the pooled
// within-condition covariance of the two conditions with divisor
// TA + TB - 2; see PairInfo for the fields and doc.go for the formulas.
//
// Errors: an invalid axis; a condition out of range (naming the trial); a
// pair with N > MaxNeurons(TA, TB) (naming the pair and the counts); a
// non-finite response (naming trial and neuron); a neuron constant within
// both conditions of a pair but different between them (infinite
// information); a neuron that is a linear combination of others within a pair
// (singular covariance). It panics if len(y) != len(cond)*n or a subset index
// is out of range.
func LinearInfo(y []float32, n int, cond []int, ax Conditions, subset []int) ([]PairInfo, error) {
	if err := ax.check(); err != nil {
		return nil, err
	}
	groups, err := groupTrials(y, n, cond, ax.NBins())
	if err != nil {
		return nil, err
	}
	if subset == nil {
		subset = make([]int, n)
		for j := range subset {
			subset[j] = j
		}
	}
	K := len(subset)
	pairs := ax.Pairs()
	for _, p := range pairs {
		ta, tb := len(groups[p.A]), len(groups[p.B])
		if K > MaxNeurons(ta, tb) {
			return nil, fmt.Errorf("acuity: pair (%d,%d) has %d+%d trials: the bias-corrected information needs fewer than %d neurons, got %d", p.A, p.B, ta, tb, ta+tb-3, K)
		}
	}
	z := make([]float64, len(cond)*K)
	if err := gatherColumns(z, y, n, subset); err != nil {
		return nil, err
	}
	out := make([]PairInfo, len(pairs))
	var sc pairScratch
	for i, p := range pairs {
		ta, tb := groups[p.A], groups[p.B]
		if err := sc.compute(z, K, ta, tb); err != nil {
			return nil, pairErr(err, p, subset)
		}
		out[i] = sc.result(p, len(ta), len(tb), K)
	}
	return out, nil
}

// pairErr turns a scratch error into one naming the pair and the neuron.
func pairErr(err error, p Pair, subset []int) error {
	if e, ok := err.(*colError); ok {
		return fmt.Errorf("acuity: pair (%d,%d): neuron %d %s", p.A, p.B, subset[e.col], e.msg)
	}
	return fmt.Errorf("acuity: pair (%d,%d): %v", p.A, p.B, err)
}

type colError struct {
	col int
	msg string
}

func (e *colError) Error() string { return fmt.Sprintf("column %d %s", e.col, e.msg) }

// gatherColumns copies the subset columns of y into dst (trials x len(subset),
// float64) and rejects non-finite values.
func gatherColumns(dst []float64, y []float32, n int, subset []int) error {
	K := len(subset)
	T := len(y) / n
	for _, c := range subset {
		if c < 0 || c >= n {
			panic(fmt.Sprintf("acuity: subset neuron %d out of range 0..%d", c, n-1))
		}
	}
	for t := 0; t < T; t++ {
		row := y[t*n : t*n+n]
		d := dst[t*K : t*K+K]
		for j, c := range subset {
			v := float64(row[c])
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("acuity: response of trial %d, neuron %d is %v", t, c, v)
			}
			d[j] = v
		}
	}
	return nil
}

// pairScratch holds the work space of one pair computation, reused across
// pairs and subsets.
type pairScratch struct {
	mA, mB []float64 // K condition means
	keep   []int     // kept columns (ascending)
	x      []float64 // (ta+tb) x kept, centred responses
	s      []float64 // kept x kept pooled covariance, then its Cholesky factor
	d      []float64 // kept: mean difference, then L^-1 d
	// cumFull[k] = sum_{i<k} (L^-1 d)_i^2 and cumDiag[k] = sum_{i<k} d_i^2/S_ii
	// for the first k kept columns (the quadratic forms of the leading
	// k x k block: Cholesky and forward substitution are prefix-consistent).
	cumFull, cumDiag []float64
	nu               float64
}

func grow(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}

// compute fills the scratch for the trials ta, tb of the two conditions and
// the K columns of z (trials x K).
func (sc *pairScratch) compute(z []float64, K int, ta, tb []int) error {
	sc.mA, sc.mB = grow(sc.mA, K), grow(sc.mB, K)
	if len(ta) == 0 || len(tb) == 0 {
		return fmt.Errorf("a condition has no trials")
	}
	colMean(sc.mA, z, K, ta)
	colMean(sc.mB, z, K, tb)
	sc.keep = sc.keep[:0]
	for j := 0; j < K; j++ {
		ca, cb := constCol(z, K, j, ta), constCol(z, K, j, tb)
		if ca && cb {
			if z[ta[0]*K+j] != z[tb[0]*K+j] {
				return &colError{j, "is constant within both conditions but differs between them (infinite linear information)"}
			}
			continue
		}
		sc.keep = append(sc.keep, j)
	}
	M := len(sc.keep)
	T := len(ta) + len(tb)
	sc.x = grow(sc.x, T*M)
	r := 0
	for _, tr := range [2][]int{ta, tb} {
		m := sc.mA
		if r > 0 {
			m = sc.mB
		}
		for _, t := range tr {
			row := z[t*K : t*K+K]
			xr := sc.x[r*M : r*M+M]
			for i, j := range sc.keep {
				xr[i] = row[j] - m[j]
			}
			r++
		}
	}
	sc.d = grow(sc.d, M)
	for i, j := range sc.keep {
		sc.d[i] = sc.mB[j] - sc.mA[j]
	}
	sc.nu = float64(T - 2)
	sc.s = grow(sc.s, M*M)
	sc.cumFull, sc.cumDiag = grow(sc.cumFull, M+1), grow(sc.cumDiag, M+1)
	if M == 0 {
		sc.cumFull[0], sc.cumDiag[0] = 0, 0
		return nil
	}
	blas64.Syrk(blas.Trans, 1/sc.nu, blas64.General{Rows: T, Cols: M, Stride: M, Data: sc.x},
		0, blas64.Symmetric{Uplo: blas.Lower, N: M, Stride: M, Data: sc.s})
	sc.cumDiag[0] = 0
	for i := 0; i < M; i++ {
		sc.cumDiag[i+1] = sc.cumDiag[i] + sc.d[i]*sc.d[i]/sc.s[i*M+i]
	}
	if j := cholLower(sc.s, M); j >= 0 {
		return &colError{sc.keep[j], "is (numerically) a linear combination of the other neurons of the subset: singular covariance"}
	}
	// Forward substitution L w = d, in place.
	a, d := sc.s, sc.d
	sc.cumFull[0] = 0
	for i := 0; i < M; i++ {
		row := a[i*M : i*M+i]
		v := d[i]
		for k, l := range row {
			v -= l * d[k]
		}
		v /= a[i*M+i]
		d[i] = v
		sc.cumFull[i+1] = sc.cumFull[i] + v*v
	}
	return nil
}

// result returns the information of the first k subset columns (k = K for
// the whole subset) as a PairInfo.
func (sc *pairScratch) result(p Pair, ta, tb, k int) PairInfo {
	m := sc.kept(k)
	ds2 := p.Ds * p.Ds
	naive := sc.cumFull[m] / ds2
	sh := sc.cumDiag[m] / ds2
	info := CorrectInfo(naive, ta, tb, m, p.Ds)
	return PairInfo{Pair: p, TA: ta, TB: tb, N: m,
		Naive: naive, Info: info, SE: InfoSE(info, ta, tb, m, p.Ds),
		ShuffledNaive: sh, Shuffled: CorrectShuffled(sh, ta, tb, m, p.Ds)}
}

// kept returns how many of the first k columns were kept.
func (sc *pairScratch) kept(k int) int {
	m := 0
	for m < len(sc.keep) && sc.keep[m] < k {
		m++
	}
	return m
}

func colMean(dst, z []float64, K int, trials []int) {
	for j := range dst {
		dst[j] = 0
	}
	for _, t := range trials {
		row := z[t*K : t*K+K]
		for j, v := range row {
			dst[j] += v
		}
	}
	inv := 1 / float64(len(trials))
	for j := range dst {
		dst[j] *= inv
	}
}

func constCol(z []float64, K, j int, trials []int) bool {
	v0 := z[trials[0]*K+j]
	for _, t := range trials[1:] {
		if z[t*K+j] != v0 {
			return false
		}
	}
	return true
}

// cholTol is the relative pivot below which cholLower declares the matrix
// singular: the residual variance of a neuron given the earlier ones below
// 1e-10 of its own variance.
const cholTol = 1e-10

// cholLower overwrites the lower triangle of the M x M row-major a with its
// Cholesky factor L (a = L L^T). It returns -1 on success or the first column
// whose pivot is not positive relative to cholTol.
func cholLower(a []float64, M int) int {
	for j := 0; j < M; j++ {
		rj := a[j*M : j*M+j]
		d := a[j*M+j]
		orig := d
		for _, l := range rj {
			d -= l * l
		}
		if !(d > cholTol*orig) {
			return j
		}
		ljj := math.Sqrt(d)
		a[j*M+j] = ljj
		inv := 1 / ljj
		for i := j + 1; i < M; i++ {
			ri := a[i*M : i*M+j]
			v := a[i*M+j]
			for k, l := range ri {
				v -= l * rj[k]
			}
			a[i*M+j] = v * inv
		}
	}
	return -1
}

// SizeCurve is linear Fisher information against population size: nested
// random neuron subsets, one random order of neurons per repeat, the first
// Sizes[s] neurons of it form the subset of size index s.
type SizeCurve struct {
	Sizes   []int
	Repeats int
	Pairs   []Pair
	// Info, Shuffled and N are laid out [(r*len(Sizes) + s)*len(Pairs) + p]
	// for repeat r, size index s and pair p: the bias-corrected information,
	// its trial-shuffled counterpart and the number of neurons used (see
	// PairInfo.N).
	Info, Shuffled []float64
	N              []int
}

// Curves returns the bias-corrected information of pair index p (or the mean
// over all pairs when p < 0) as a Repeats x len(Sizes) row-major slice, the
// input FitSaturation takes.
func (c *SizeCurve) Curves(p int) []float64 {
	S, P := len(c.Sizes), len(c.Pairs)
	out := make([]float64, c.Repeats*S)
	for r := 0; r < c.Repeats; r++ {
		for s := 0; s < S; s++ {
			row := c.Info[(r*S+s)*P : (r*S+s)*P+P]
			if p >= 0 {
				out[r*S+s] = row[p]
				continue
			}
			sum := 0.0
			for _, v := range row {
				sum += v
			}
			out[r*S+s] = sum / float64(P)
		}
	}
	return out
}

// PairMean returns, for size index s, the mean over repeats of the
// bias-corrected information of every pair (len(Pairs) values): the
// information as a function of the stimulus, averaged over random subsets.
func (c *SizeCurve) PairMean(s int) []float64 {
	S, P := len(c.Sizes), len(c.Pairs)
	out := make([]float64, P)
	for r := 0; r < c.Repeats; r++ {
		row := c.Info[(r*S+s)*P : (r*S+s)*P+P]
		for p, v := range row {
			out[p] += v
		}
	}
	for p := range out {
		out[p] /= float64(c.Repeats)
	}
	return out
}

// InfoVsSize computes the linear Fisher information of every neighbouring
// pair for nested random neuron subsets of the given sizes (strictly
// increasing, each at most n and at most MaxNeurons of every pair), repeated
// with repeats independent random orders of the neurons drawn from rng.
//
// Cost: per repeat and pair one pooled covariance and one Cholesky
// factorisation of the largest subset, (TA+TB) K^2/2 + K^3/6 multiply-adds
// for K = the largest size; every smaller size is read off the same factor
// (the Cholesky factor of a leading block is the leading block of the
// factor). Pairs are spread over GOMAXPROCS goroutines; the result does not
// depend on their number. The random draws happen before any goroutine
// starts: the same rng state gives the same subsets.
//
// Shapes, errors and panics are those of LinearInfo. Estimates near the limit
// MaxNeurons are valid but very noisy (InfoSE grows like 1/sqrt(nu-N-3)); a
// largest size of about half the limit is a sensible default.
func InfoVsSize(y []float32, n int, cond []int, ax Conditions, sizes []int, repeats int, rng *rand.Rand) (*SizeCurve, error) {
	if err := ax.check(); err != nil {
		return nil, err
	}
	groups, err := groupTrials(y, n, cond, ax.NBins())
	if err != nil {
		return nil, err
	}
	if err := checkSizes(sizes, n); err != nil {
		return nil, err
	}
	if repeats < 1 {
		return nil, fmt.Errorf("acuity: repeats = %d, want at least 1", repeats)
	}
	K := sizes[len(sizes)-1]
	pairs := ax.Pairs()
	for _, p := range pairs {
		ta, tb := len(groups[p.A]), len(groups[p.B])
		if K > MaxNeurons(ta, tb) {
			return nil, fmt.Errorf("acuity: pair (%d,%d) has %d+%d trials: the bias-corrected information needs fewer than %d neurons, largest size is %d", p.A, p.B, ta, tb, ta+tb-3, K)
		}
	}
	S, P := len(sizes), len(pairs)
	c := &SizeCurve{Sizes: append([]int(nil), sizes...), Repeats: repeats, Pairs: pairs,
		Info: make([]float64, repeats*S*P), Shuffled: make([]float64, repeats*S*P), N: make([]int, repeats*S*P)}
	orders := make([][]int, repeats)
	for r := range orders {
		orders[r] = randomSubset(rng, n, K)
	}
	z := make([]float64, len(cond)*K)
	workers := min(runtime.GOMAXPROCS(0), P)
	scr := make([]pairScratch, workers)
	errs := make([]error, P)
	for r := 0; r < repeats; r++ {
		if err := gatherColumns(z, y, n, orders[r]); err != nil {
			return nil, err
		}
		var wg sync.WaitGroup
		for w := 0; w < workers; w++ {
			wg.Add(1)
			go func(sc *pairScratch, w int) {
				defer wg.Done()
				for pi := w; pi < P; pi += workers {
					p := pairs[pi]
					ta, tb := groups[p.A], groups[p.B]
					if err := sc.compute(z, K, ta, tb); err != nil {
						errs[pi] = pairErr(err, p, orders[r])
						continue
					}
					for s, k := range sizes {
						res := sc.result(p, len(ta), len(tb), k)
						i := (r*S+s)*P + pi
						c.Info[i], c.Shuffled[i], c.N[i] = res.Info, res.Shuffled, res.N
					}
				}
			}(&scr[w], w)
		}
		wg.Wait()
		for _, e := range errs {
			if e != nil {
				return nil, e
			}
		}
	}
	return c, nil
}

func checkSizes(sizes []int, n int) error {
	if len(sizes) == 0 {
		return fmt.Errorf("acuity: no subset sizes given")
	}
	for i, k := range sizes {
		if k < 1 || k > n {
			return fmt.Errorf("acuity: subset size %d out of range 1..%d", k, n)
		}
		if i > 0 && k <= sizes[i-1] {
			return fmt.Errorf("acuity: subset sizes must increase strictly: %d after %d", k, sizes[i-1])
		}
	}
	return nil
}

// randomSubset returns k distinct indices of 0..n-1 in random order (the
// first k of a Fisher-Yates shuffle), drawing k values from rng.
func randomSubset(rng *rand.Rand, n, k int) []int {
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	for i := 0; i < k; i++ {
		j := i + rng.IntN(n-i)
		idx[i], idx[j] = idx[j], idx[i]
	}
	return idx[:k:k]
}
