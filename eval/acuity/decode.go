package acuity

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// Fold is one cross-validation split: Train and Test list trial indices
// (rows of the response matrix). A trial may be in Test of at most one fold
// and never in Train and Test of the same fold.
type Fold struct {
	Train, Test []int
}

// DecoderKind selects how a Decoder classifies a test trial.
type DecoderKind int

const (
	// LinearDiscriminant is shrinkage linear discriminant analysis fitted on
	// the training trials: class means m_k, pooled within-condition
	// covariance S (divisor: number of training trials) shrunk towards its
	// diagonal, Sigma = (1 - alpha) S + alpha diag(S), and the rule
	// argmax_k x^T Sigma^-1 m_k - m_k^T Sigma^-1 m_k / 2 + log prior_k.
	// alpha = 1 (diagonal LDA) costs O(N) per trial and class and scales to
	// any N; alpha < 1 needs the N x N matrix and is refused above
	// Decoder.MaxFull neurons.
	LinearDiscriminant DecoderKind = iota
	// GaussianModel classifies by the likelihood of the model's predicted
	// means under independent Gaussian noise, per-neuron variance = the mean
	// squared residual of the training trials around the predictions.
	GaussianModel
	// PoissonModel classifies by the Poisson likelihood of the predicted
	// means (count models); responses must be >= 0.
	PoissonModel
)

// PoissonFloor is the smallest predicted mean the Poisson decoder uses:
// predictions below it are raised to it (and counted in DecodeStats.Floored)
// so that a zero prediction with a positive count gives a finite likelihood.
const PoissonFloor = 1e-6

// DefaultMaxFull is the default Decoder.MaxFull.
const DefaultMaxFull = 2000

// Decoder decodes the condition of held-out trials. The zero value is
// LinearDiscriminant with Shrinkage 0 (plain LDA, full covariance): set
// Shrinkage explicitly, 1 for large populations.
type Decoder struct {
	Kind DecoderKind
	// Shrinkage is alpha in [0, 1] for LinearDiscriminant. 1 gives diagonal
	// LDA (cost linear in N). For alpha < 1 the classifier equals
	// scikit-learn's LinearDiscriminantAnalysis(solver="lsqr",
	// shrinkage=alpha) fitted on responses divided, per neuron, by their
	// pooled within-condition standard deviation on the training trials
	// (checked in ref_test.go).
	Shrinkage float64
	// UniformPrior drops the log prior (LinearDiscriminant); by default the
	// prior of condition k is its share of the training trials, as in
	// scikit-learn. The covariance stays the pooled one either way. Model
	// decoders never use a prior (maximum likelihood).
	UniformPrior bool
	// Pred[f] holds the predicted mean of every condition and neuron for
	// fold f, nbins x n row-major (all n neurons, whatever the subset), fitted
	// on folds[f].Train only. Model kinds only.
	Pred [][]float64
	// MaxFull caps the number of neurons for LinearDiscriminant with
	// Shrinkage < 1 (0: DefaultMaxFull). The cost is (training trials) N^2/2
	// + N^3/6 per fold.
	MaxFull int
}

// DecodeStats counts what a decoding run left out or adjusted.
type DecodeStats struct {
	// Excluded counts (fold, neuron) pairs left out of the classifier because
	// the neuron's training variance (within-condition for LDA, residual for
	// GaussianModel) was zero (for LDA: below 1e-12 of its mean square about
	// the first training trial, the rounding level of the one-pass sums): such
	// a neuron would get infinite weight.
	Excluded int
	// Floored counts (fold, condition, neuron) predictions raised to
	// PoissonFloor.
	Floored int
	// Untrained counts (fold, condition) pairs without training trials: the
	// LDA never decodes such a condition in that fold.
	Untrained int
}

// Decode classifies the test trials of every fold. y holds the responses,
// trials x n row-major float32; cond[t] in 0..nbins-1 is the true condition
// of trial t (used for training and to check the folds, never for the test
// decision). subset lists the neuron columns used (nil: all). dst, one entry
// per trial (len(cond)), receives the decoded condition of every test trial
// and -1 for trials in no test set.
//
// Cost per fold: one pass over the training trials (N per trial), and
// (test trials) x nbins x N multiply-adds for the scores, done as a matrix
// product in blocks of test trials. Ties go to the lowest condition index.
//
// Errors name the fold, trial, neuron or condition: invalid folds, a
// condition out of range, non-finite responses or predictions, negative
// responses for PoissonModel, missing or mis-shaped predictions, a shrinkage
// out of [0, 1], a full LDA above MaxFull neurons or with a singular
// covariance. Panics if len(dst) != len(cond), len(y) != len(cond)*n or a
// subset index is out of range.
func (d *Decoder) Decode(dst []int, y []float32, n int, cond []int, nbins int, folds []Fold, subset []int) (DecodeStats, error) {
	var st DecodeStats
	if len(dst) != len(cond) {
		panic(fmt.Sprintf("acuity: Decode: len(dst) = %d, want %d trials", len(dst), len(cond)))
	}
	if nbins < 2 {
		return st, fmt.Errorf("acuity: decoding needs at least 2 conditions, got %d", nbins)
	}
	if _, err := groupTrials(y, n, cond, nbins); err != nil {
		return st, err
	}
	if err := d.check(n, nbins, len(folds), subset); err != nil {
		return st, err
	}
	if err := checkFolds(folds, len(cond)); err != nil {
		return st, err
	}
	// Columns in ascending order: the passes over the trials then read each
	// row front to back (the scores do not depend on the order beyond
	// rounding).
	var cols []int
	if subset == nil {
		cols = make([]int, n)
		for j := range cols {
			cols[j] = j
		}
	} else {
		cols = slices.Clone(subset)
		slices.Sort(cols)
		for j := 1; j < len(cols); j++ {
			if cols[j] == cols[j-1] {
				return st, fmt.Errorf("acuity: neuron %d appears twice in the subset", cols[j])
			}
		}
	}
	for t := range dst {
		dst[t] = -1
	}
	var c classifier
	for f, fold := range folds {
		if len(fold.Test) == 0 {
			continue
		}
		var err error
		switch d.Kind {
		case LinearDiscriminant:
			err = c.fitLDA(y, n, cond, nbins, fold.Train, cols, d.Shrinkage, d.UniformPrior, &st)
		case GaussianModel:
			err = c.fitGaussian(y, n, cond, nbins, fold.Train, cols, d.Pred[f], &st)
		case PoissonModel:
			err = c.fitPoisson(nbins, n, cols, d.Pred[f], &st)
		}
		if err != nil {
			return st, fmt.Errorf("acuity: fold %d: %w", f, err)
		}
		if err := c.predict(dst, y, n, fold.Test, cols, d.Kind == PoissonModel); err != nil {
			return st, fmt.Errorf("acuity: fold %d: %w", f, err)
		}
	}
	return st, nil
}

func (d *Decoder) check(n, nbins, nfolds int, subset []int) error {
	for _, c := range subset {
		if c < 0 || c >= n {
			panic(fmt.Sprintf("acuity: subset neuron %d out of range 0..%d", c, n-1))
		}
	}
	switch d.Kind {
	case LinearDiscriminant:
		if !(d.Shrinkage >= 0 && d.Shrinkage <= 1) {
			return fmt.Errorf("acuity: LDA shrinkage %v out of [0, 1]", d.Shrinkage)
		}
		K := n
		if subset != nil {
			K = len(subset)
		}
		maxFull := d.MaxFull
		if maxFull <= 0 {
			maxFull = DefaultMaxFull
		}
		if d.Shrinkage < 1 && K > maxFull {
			return fmt.Errorf("acuity: LDA with shrinkage %v < 1 needs an N x N covariance: %d neurons exceed the cap of %d (use shrinkage 1, a subset, or raise MaxFull)", d.Shrinkage, K, maxFull)
		}
	case GaussianModel, PoissonModel:
		if len(d.Pred) != nfolds {
			return fmt.Errorf("acuity: model decoder has predictions for %d folds, want %d", len(d.Pred), nfolds)
		}
		for f, p := range d.Pred {
			if len(p) != nbins*n {
				return fmt.Errorf("acuity: fold %d: predictions have %d values, want conditions x neurons = %d x %d", f, len(p), nbins, n)
			}
		}
	default:
		return fmt.Errorf("acuity: unknown decoder kind %d", d.Kind)
	}
	return nil
}

func checkFolds(folds []Fold, T int) error {
	if len(folds) == 0 {
		return fmt.Errorf("acuity: no folds")
	}
	tested := make([]int, T) // fold+1 of the test set holding the trial
	inTrain := make([]int, T)
	for f, fold := range folds {
		for _, t := range fold.Test {
			if t < 0 || t >= T {
				return fmt.Errorf("acuity: fold %d: test trial %d out of range 0..%d", f, t, T-1)
			}
			if tested[t] != 0 {
				return fmt.Errorf("acuity: trial %d is a test trial of folds %d and %d", t, tested[t]-1, f)
			}
			tested[t] = f + 1
		}
		for _, t := range fold.Train {
			if t < 0 || t >= T {
				return fmt.Errorf("acuity: fold %d: training trial %d out of range 0..%d", f, t, T-1)
			}
			if tested[t] == f+1 {
				return fmt.Errorf("acuity: fold %d: trial %d is both a training and a test trial", f, t)
			}
			if inTrain[t] == f+1 {
				return fmt.Errorf("acuity: fold %d: training trial %d listed twice", f, t)
			}
			inTrain[t] = f + 1
		}
	}
	return nil
}

// classifier is a linear rule score_k = (x - g)^T w_k + c_k with work space
// reused across folds.
type classifier struct {
	B, K   int
	w      []float64 // B x K
	c      []float64 // B
	g      []float64 // K centre
	sum    []float64 // B x K
	sq     []float64 // K
	shift  []float64 // K
	cnt    []int     // B
	buf    []float64 // K
	used   []int     // used column positions (full LDA)
	xs     []float64 // training trials x used, centred (full LDA)
	s      []float64 // used x used
	xb, sb []float64 // scoring blocks
}

// row gathers the cols of trial t into dst as float64 and checks finiteness.
func row(dst []float64, y []float32, n, t int, cols []int) error {
	r := y[t*n : t*n+n]
	for j, c := range cols {
		v := float64(r[c])
		if v-v != 0 { // NaN or Inf
			return fmt.Errorf("response of trial %d, neuron %d is %v", t, c, v)
		}
		dst[j] = v
	}
	return nil
}

// badValue locates a non-finite response.
type badValue struct{ t, col int }

func (b *badValue) err(y []float32, n int) error {
	return fmt.Errorf("response of trial %d, neuron %d is %v", b.t, b.col, y[b.t*n+b.col])
}

// parallelCols runs fn on contiguous chunks [j0, j1) of 0..K-1 on
// GOMAXPROCS goroutines. Each column is handled by one goroutine, in trial
// order, so the result does not depend on their number. It returns the
// non-finite value with the smallest trial (then column) index, if any.
func parallelCols(K int, fn func(j0, j1 int) *badValue) *badValue {
	w := min(runtime.GOMAXPROCS(0), max(K/256, 1))
	if w <= 1 {
		return fn(0, K)
	}
	bad := make([]*badValue, w)
	var wg sync.WaitGroup
	for i := 0; i < w; i++ {
		wg.Add(1)
		go func(i int) {
			defer wg.Done()
			bad[i] = fn(i*K/w, (i+1)*K/w)
		}(i)
	}
	wg.Wait()
	var first *badValue
	for _, b := range bad {
		if b != nil && (first == nil || b.t < first.t || b.t == first.t && b.col < first.col) {
			first = b
		}
	}
	return first
}

func (c *classifier) reset(B, K int) {
	c.B, c.K = B, K
	c.w = grow(c.w, B*K)
	c.c = grow(c.c, B)
	c.g = grow(c.g, K)
	c.buf = grow(c.buf, K)
	for i := range c.w {
		c.w[i] = 0
	}
	for i := range c.g {
		c.g[i] = 0
	}
}

func (c *classifier) fitLDA(y []float32, n int, cond []int, B int, train, cols []int, alpha float64, uniform bool, st *DecodeStats) error {
	K := len(cols)
	c.reset(B, K)
	if len(train) == 0 {
		return fmt.Errorf("no training trials")
	}
	c.sum = grow(c.sum, B*K)
	c.sq = grow(c.sq, K)
	c.shift = grow(c.shift, K)
	if cap(c.cnt) < B {
		c.cnt = make([]int, B)
	}
	c.cnt = c.cnt[:B]
	for i := range c.sum {
		c.sum[i] = 0
	}
	for i := range c.sq {
		c.sq[i] = 0
	}
	for i := range c.cnt {
		c.cnt[i] = 0
	}
	// One pass: per-condition sums and the sum of squares, relative to the
	// first training trial (so a constant neuron has exactly zero spread).
	if err := row(c.shift, y, n, train[0], cols); err != nil {
		return err
	}
	for _, t := range train {
		c.cnt[cond[t]]++
	}
	bad := parallelCols(K, func(j0, j1 int) *badValue {
		sh, q := c.shift[j0:j1], c.sq[j0:j1]
		cs := cols[j0:j1]
		for _, t := range train {
			r := y[t*n : t*n+n]
			k := cond[t]
			s := c.sum[k*K+j0 : k*K+j1]
			for i, col := range cs {
				v := float64(r[col])
				if v-v != 0 {
					return &badValue{t, col}
				}
				v -= sh[i]
				s[i] += v
				q[i] += v * v
			}
		}
		return nil
	})
	if bad != nil {
		return bad.err(y, n)
	}
	nt := float64(len(train))
	tot := grow(c.s, K)
	for j, q := range c.sq {
		tot[j] = q / nt
	}
	c.s = tot
	// Means (relative to shift), grand mean g, within variance v in c.sq.
	for k := 0; k < B; k++ {
		if c.cnt[k] == 0 {
			st.Untrained++
			continue
		}
		s := c.sum[k*K : k*K+K]
		inv := 1 / float64(c.cnt[k])
		for j := range s {
			c.g[j] += s[j]
			c.sq[j] -= s[j] * s[j] * inv
			s[j] *= inv
		}
	}
	v := c.sq
	for j := range v {
		c.g[j] /= nt
		v[j] /= nt
	}
	c.used = c.used[:0]
	for j := range v {
		// Zero within-condition variance, up to the rounding of the one-pass
		// sums (relative to the mean square about the shift): no finite
		// weight exists.
		if v[j] <= 1e-12*tot[j] || v[j] <= 0 {
			st.Excluded++
			v[j] = 0
			continue
		}
		c.used = append(c.used, j)
	}
	// Centred means m_k - g live in c.sum.
	for k := 0; k < B; k++ {
		if c.cnt[k] == 0 {
			continue
		}
		s := c.sum[k*K : k*K+K]
		for j := range s {
			s[j] -= c.g[j]
		}
	}
	for k := 0; k < B; k++ {
		if c.cnt[k] == 0 {
			c.c[k] = math.Inf(-1)
			continue
		}
		c.c[k] = 0
		if !uniform {
			c.c[k] = math.Log(float64(c.cnt[k]) / nt)
		}
	}
	if alpha >= 1 {
		for k := 0; k < B; k++ {
			if c.cnt[k] == 0 {
				continue
			}
			m := c.sum[k*K : k*K+K]
			w := c.w[k*K : k*K+K]
			q := 0.0
			for _, j := range c.used {
				w[j] = m[j] / v[j]
				q += m[j] * w[j]
			}
			c.c[k] -= q / 2
		}
	} else if err := c.fullLDA(y, n, cond, train, cols, alpha); err != nil {
		return err
	}
	// The scores use x - (shift + g): fold the shift into the centre.
	for j := range c.g {
		c.g[j] += c.shift[j]
	}
	return nil
}

// fullLDA solves Sigma w_k = m_k - g with Sigma = (1-alpha) S + alpha diag(S)
// on the used neurons.
func (c *classifier) fullLDA(y []float32, n int, cond []int, train, cols []int, alpha float64) error {
	K, M := c.K, len(c.used)
	T := len(train)
	c.xs = grow(c.xs, T*M)
	x := c.buf
	for i, t := range train {
		if err := row(x, y, n, t, cols); err != nil {
			return err
		}
		m := c.sum[cond[t]*K : cond[t]*K+K]
		xr := c.xs[i*M : i*M+M]
		for u, j := range c.used {
			// Residual from the class mean; here m = m_k - g with m_k and
			// g still relative to shift.
			xr[u] = x[j] - c.shift[j] - c.g[j] - m[j]
		}
	}
	c.s = grow(c.s, M*M)
	if M == 0 {
		return nil
	}
	blas64.Syrk(blas.Trans, 1/float64(T), blas64.General{Rows: T, Cols: M, Stride: M, Data: c.xs},
		0, blas64.Symmetric{Uplo: blas.Lower, N: M, Stride: M, Data: c.s})
	for i := 0; i < M; i++ {
		for j := 0; j < i; j++ {
			c.s[i*M+j] *= 1 - alpha
		}
	}
	if bad := cholLower(c.s, M); bad >= 0 {
		return fmt.Errorf("neuron %d is (numerically) a linear combination of the other neurons on the training trials: singular LDA covariance (use shrinkage > 0)", cols[c.used[bad]])
	}
	L := c.s
	z := grow(c.xb, M)
	c.xb = z
	for k := 0; k < c.B; k++ {
		if math.IsInf(c.c[k], -1) {
			continue
		}
		m := c.sum[k*K : k*K+K]
		for u, j := range c.used {
			z[u] = m[j]
		}
		// L L^T w = m: forward then backward substitution.
		for i := 0; i < M; i++ {
			v := z[i]
			for q, l := range L[i*M : i*M+i] {
				v -= l * z[q]
			}
			z[i] = v / L[i*M+i]
		}
		for i := M - 1; i >= 0; i-- {
			v := z[i]
			for q := i + 1; q < M; q++ {
				v -= L[q*M+i] * z[q]
			}
			z[i] = v / L[i*M+i]
		}
		w := c.w[k*K : k*K+K]
		q := 0.0
		for u, j := range c.used {
			w[j] = z[u]
			q += m[j] * z[u]
		}
		c.c[k] -= q / 2
	}
	return nil
}

func (c *classifier) fitGaussian(y []float32, n int, cond []int, B int, train, cols []int, pred []float64, st *DecodeStats) error {
	K := len(cols)
	c.reset(B, K)
	if len(train) == 0 {
		return fmt.Errorf("no training trials for the noise variance")
	}
	if err := c.loadPred(pred, n, cols); err != nil {
		return err
	}
	c.sq = grow(c.sq, K)
	for j := range c.sq {
		c.sq[j] = 0
	}
	bad := parallelCols(K, func(j0, j1 int) *badValue {
		q := c.sq[j0:j1]
		cs := cols[j0:j1]
		for _, t := range train {
			r := y[t*n : t*n+n]
			p := c.sum[cond[t]*K+j0 : cond[t]*K+j1]
			for i, col := range cs {
				v := float64(r[col])
				if v-v != 0 {
					return &badValue{t, col}
				}
				d := v - p[i]
				q[i] += d * d
			}
		}
		return nil
	})
	if bad != nil {
		return bad.err(y, n)
	}
	for j := range c.g {
		for k := 0; k < B; k++ {
			c.g[j] += c.sum[k*K+j]
		}
		c.g[j] /= float64(B)
	}
	for k := 0; k < B; k++ {
		p := c.sum[k*K : k*K+K]
		w := c.w[k*K : k*K+K]
		q := 0.0
		for j := range p {
			v := c.sq[j] / float64(len(train))
			if !(v > 0) {
				continue
			}
			m := p[j] - c.g[j]
			w[j] = m / v
			q += m * w[j]
		}
		c.c[k] = -q / 2
	}
	for j := range c.sq {
		if !(c.sq[j] > 0) {
			st.Excluded++
		}
	}
	return nil
}

// loadPred copies the subset columns of pred (B x n) into c.sum (B x K).
func (c *classifier) loadPred(pred []float64, n int, cols []int) error {
	B, K := c.B, c.K
	c.sum = grow(c.sum, B*K)
	for k := 0; k < B; k++ {
		for j, col := range cols {
			v := pred[k*n+col]
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("prediction for condition %d, neuron %d is %v", k, col, v)
			}
			c.sum[k*K+j] = v
		}
	}
	return nil
}

func (c *classifier) fitPoisson(B, n int, cols []int, pred []float64, st *DecodeStats) error {
	K := len(cols)
	c.reset(B, K)
	if err := c.loadPred(pred, n, cols); err != nil {
		return err
	}
	for k := 0; k < B; k++ {
		p := c.sum[k*K : k*K+K]
		w := c.w[k*K : k*K+K]
		s := 0.0
		for j, v := range p {
			if v < PoissonFloor {
				v = PoissonFloor
				st.Floored++
			}
			w[j] = math.Log(v)
			s += v
		}
		c.c[k] = -s
	}
	return nil
}

// scoreBlock is the number of test trials scored per matrix product: at
// least 4 x 64 rows, so that gonum's Dgemm runs blocked and in parallel.
const scoreBlock = 256

// predict writes argmax_k (x - g)^T w_k + c_k for the test trials.
func (c *classifier) predict(dst []int, y []float32, n int, test, cols []int, counts bool) error {
	B, K := c.B, c.K
	c.xb = grow(c.xb, scoreBlock*K)
	c.sb = grow(c.sb, scoreBlock*B)
	W := blas64.General{Rows: B, Cols: K, Stride: K, Data: c.w}
	for i0 := 0; i0 < len(test); i0 += scoreBlock {
		nb := min(scoreBlock, len(test)-i0)
		for i := 0; i < nb; i++ {
			t := test[i0+i]
			xr := c.xb[i*K : i*K+K]
			if err := row(xr, y, n, t, cols); err != nil {
				return err
			}
			if counts {
				for j, v := range xr {
					if v < 0 {
						return fmt.Errorf("acuity: Poisson decoder: response of trial %d, neuron %d is negative (%v)", t, cols[j], v)
					}
				}
				continue
			}
			for j := range xr {
				xr[j] -= c.g[j]
			}
		}
		blas64.Gemm(blas.NoTrans, blas.Trans, 1,
			blas64.General{Rows: nb, Cols: K, Stride: K, Data: c.xb[:nb*K]}, W,
			0, blas64.General{Rows: nb, Cols: B, Stride: B, Data: c.sb[:nb*B]})
		for i := 0; i < nb; i++ {
			s := c.sb[i*B : i*B+B]
			best, bk := math.Inf(-1), -1
			for k, v := range s {
				v += c.c[k]
				if v > best {
					best, bk = v, k
				}
			}
			if bk < 0 {
				return fmt.Errorf("no finite score for trial %d", test[i0+i])
			}
			dst[test[i0+i]] = bk
		}
	}
	return nil
}

// DecodeSummary summarises decoded conditions against the true ones.
type DecodeSummary struct {
	NBins int
	// Confusion counts trials by true (row) and decoded (column) condition,
	// NBins x NBins row-major.
	Confusion []int
	// Trials lists the decoded trials in ascending order and Err their
	// decoding error Values[decoded] - Values[true] in axis units (on a
	// periodic axis the shortest signed difference, Conditions.Diff).
	Trials []int
	Err    []float64
	// Accuracy is the fraction decoded exactly; MAE the mean absolute error
	// (axis units) with its standard error SEM = sd(|err|)/sqrt(n) (sd with
	// divisor n-1; NaN for fewer than 2 trials); RMSE the root mean square
	// error.
	Accuracy, MAE, SEM, RMSE float64
}

// Summarize compares decoded (one entry per trial, -1 for trials not
// decoded, as written by Decoder.Decode) with cond on the axis ax. Errors: an
// invalid axis, a condition or decoded value out of range, no decoded trial.
// Panics if len(decoded) != len(cond).
func Summarize(ax Conditions, cond, decoded []int) (DecodeSummary, error) {
	if len(decoded) != len(cond) {
		panic("acuity: Summarize: len(decoded) != len(cond)")
	}
	if err := ax.check(); err != nil {
		return DecodeSummary{}, err
	}
	B := ax.NBins()
	s := DecodeSummary{NBins: B, Confusion: make([]int, B*B)}
	var sa, sa2, s2 float64
	hits := 0
	for t, d := range decoded {
		if d == -1 {
			continue
		}
		c := cond[t]
		if c < 0 || c >= B {
			return DecodeSummary{}, fmt.Errorf("acuity: trial %d has condition %d, want 0..%d", t, c, B-1)
		}
		if d < 0 || d >= B {
			return DecodeSummary{}, fmt.Errorf("acuity: trial %d decoded as %d, want 0..%d or -1", t, d, B-1)
		}
		s.Confusion[c*B+d]++
		e := ax.Diff(ax.Values[d], ax.Values[c])
		s.Trials = append(s.Trials, t)
		s.Err = append(s.Err, e)
		if d == c {
			hits++
		}
		sa += math.Abs(e)
		s2 += e * e
	}
	m := float64(len(s.Err))
	if m == 0 {
		return DecodeSummary{}, fmt.Errorf("acuity: no decoded trial")
	}
	s.Accuracy = float64(hits) / m
	s.MAE = sa / m
	s.RMSE = math.Sqrt(s2 / m)
	for _, e := range s.Err {
		d := math.Abs(e) - s.MAE
		sa2 += d * d
	}
	s.SEM = math.NaN()
	if m > 1 {
		s.SEM = math.Sqrt(sa2/(m-1)) / math.Sqrt(m)
	}
	return s, nil
}

// DecodeCurve is decoding performance against population size: nested random
// subsets as in SizeCurve. MAE and Accuracy are laid out [r*len(Sizes) + s].
type DecodeCurve struct {
	Sizes         []int
	Repeats       int
	MAE, Accuracy []float64
}

// VsSize decodes with random neuron subsets of the given sizes (strictly
// increasing, at most n), repeats random orders drawn from rng, and
// summarises each run on ax (the number of conditions is ax.NBins()).
// Shapes and errors are those of Decode and Summarize.
func (d *Decoder) VsSize(y []float32, n int, cond []int, ax Conditions, folds []Fold, sizes []int, repeats int, rng *rand.Rand) (*DecodeCurve, error) {
	if err := ax.check(); err != nil {
		return nil, err
	}
	if err := checkSizes(sizes, n); err != nil {
		return nil, err
	}
	if repeats < 1 {
		return nil, fmt.Errorf("acuity: repeats = %d, want at least 1", repeats)
	}
	S := len(sizes)
	out := &DecodeCurve{Sizes: append([]int(nil), sizes...), Repeats: repeats,
		MAE: make([]float64, repeats*S), Accuracy: make([]float64, repeats*S)}
	orders := make([][]int, repeats)
	for r := range orders {
		orders[r] = randomSubset(rng, n, sizes[S-1])
	}
	dec := make([]int, len(cond))
	for r, ord := range orders {
		for s, k := range sizes {
			if _, err := d.Decode(dec, y, n, cond, ax.NBins(), folds, ord[:k]); err != nil {
				return nil, err
			}
			sum, err := Summarize(ax, cond, dec)
			if err != nil {
				return nil, err
			}
			out.MAE[r*S+s], out.Accuracy[r*S+s] = sum.MAE, sum.Accuracy
		}
	}
	return out, nil
}
