package eval

import (
	"math"
	"runtime"
	"runtime/debug"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/stat/distuv"
)

// Scores holds the held-out scores of one neuron.
//
// Trial level (single held-out trials, eval/methods.md §5):
//   - TestR2: 1 - SSres/SStot, penalises offsets; may be negative.
//   - TestR: Pearson correlation of responses and predictions.
//   - EVScore: explained variance score 1 - Var(y-yhat)/Var(y), offset-blind.
//   - ExplainableFraction: (Var[r] - sigma2_noise)/Var[r], the ceiling of
//     TestR2 for any model of the condition (eval/methods.md §4).
//   - FEV: fraction of explainable variance explained (eval/methods.md §4).
//
// Condition level (held-out condition means, eval/methods.md §1, §2):
//   - SP: signal power, ANOVA form (see SignalPower).
//   - CCAbs, CCMax, CCNorm, SPE: see the functions of the same names.
//   - SplitHalf: Spearman-Brown corrected split-half reliability 2r/(1+r) of
//     the held-out condition means, r the correlation across conditions of the
//     two halves' means (see ScorePopulation for how halves are formed).
//   - SignalF, SignalDF1, SignalDF2: the one-way ANOVA F statistic of the
//     held-out trials (condition as the factor) and its degrees of freedom,
//     the test of "no condition effect" that CheckCeiling uses (see there);
//     SignalP() is its p-value.
//
// A score that is undefined is NaN; in particular CCMax, CCNorm and SPE are
// NaN when SP <= 0. The ratio scores FEV, CCNorm and SPE divide by a
// noise-ceiling estimate and can explode for an untuned neuron whose estimate
// is positive by chance: pass the scores through GateCeilings before
// summarising them.
type Scores struct {
	TestR2, TestR, EVScore        float64
	ExplainableFraction, FEV      float64
	SP, CCAbs, CCMax, CCNorm, SPE float64
	SplitHalf                     float64
	SignalF, SignalDF1, SignalDF2 float64
}

// SignalP returns the p-value of SignalF, its upper tail under
// F(SignalDF1, SignalDF2): 0 for SignalF = +Inf, NaN when SignalF is NaN. It
// costs an incomplete beta function (microseconds); to test many neurons at
// one level use GateCeilings, which compares SignalF with the critical value.
func (s Scores) SignalP() float64 {
	switch {
	case math.IsNaN(s.SignalF):
		return math.NaN()
	case math.IsInf(s.SignalF, 1):
		return 0
	}
	return distuv.F{D1: s.SignalDF1, D2: s.SignalDF2}.Survival(s.SignalF)
}

// scoreBlock is the number of neurons one worker scores at a time.
const scoreBlock = 64

// ScorePopulation scores every neuron of a held-out set and writes the scores
// into dst (length n).
//
// Shapes: y is T x n row-major (responses as loaded, float32); trials lists
// the row indices of the held-out trials (length M); cond has length >= T and
// cond[t] in [0, nbins) is the condition of row t; pred is M x n row-major,
// row i the prediction for trial trials[i].
//
// For each neuron the trial-level scores use the M held-out trials and the
// single-trial predictions. The condition-level scores use, for each
// condition b with N_b >= 1 held-out trials, the mean ybar_b of y and the mean
// yhat_b of pred over those trials; conditions with no held-out trial are left
// out of every condition-level sum. A condition with exactly one held-out
// trial counts for ybar_b, yhat_b and Var_b(ybar), but not for the noise
// variance: sigma2_noise is the pooled within-condition variance of the
// conditions with N_b >= 2, sum_b SSwithin_b / sum_b (N_b - 1)
// (PooledNoiseVariance, eval/methods.md §4), and that pooled value stands in
// for s2_b of the single-trial conditions in SP (see SignalPower). If no
// condition has two held-out trials, SP, ExplainableFraction, FEV, SignalF and
// every ratio by SP are NaN.
//
// SignalF = (SSbetween/(B-1)) / (SSwithin/(M-B)) over the B conditions with a
// held-out trial and the M held-out trials, SSbetween = SStot - SSwithin, with
// SignalDF1 = B-1 and SignalDF2 = M-B. SignalF is +Inf when the trials vary
// only between conditions.
//
// SplitHalf: within each condition the held-out trials, in the order they
// appear in trials, are dealt alternately to half A (1st, 3rd, ...) and half
// B (2nd, 4th, ...); conditions with fewer than two held-out trials are left
// out.
//
// Work is split over blocks of neurons run in parallel; each neuron's scores
// are computed by one goroutine in a fixed order, so the result does not
// depend on scheduling. ScorePopulation panics with an "eval: " message if the
// shapes disagree, a trial index is out of range or a condition is outside
// [0, nbins).
func ScorePopulation(dst []Scores, y []float32, n int, trials, cond []int, pred []float64, nbins int) {
	if n <= 0 || len(y)%n != 0 {
		panic("eval: ScorePopulation: len(y) is not a multiple of n")
	}
	checkLen(len(dst), n, "ScorePopulation dst")
	checkLen(len(pred), len(trials)*n, "ScorePopulation pred")
	if nbins <= 0 {
		panic("eval: ScorePopulation: nbins must be positive")
	}
	sh := newShared("ScorePopulation", y, n, trials, cond, pred, nbins)
	eachBlock(dst, sh, func(sc *scorer, dst []Scores, n0, w int) { sc.block(dst, sh, n0, w) })
}

// newShared checks the inputs of a scoring call (panicking with an "eval: "
// message naming fn) and assigns each held-out trial its condition and
// split half.
func newShared(fn string, y []float32, n int, trials, cond []int, pred []float64, nbins int) *shared {
	T := len(y) / n
	if len(cond) < T {
		panic("eval: " + fn + ": cond shorter than the number of rows of y")
	}
	sh := &shared{
		y: y, n: n, trials: trials, pred: pred, nbins: nbins,
		ci:     make([]int, len(trials)),
		half:   make([]bool, len(trials)),
		counts: make([]int, nbins),
		cntA:   make([]int, nbins),
	}
	for i, r := range trials {
		if r < 0 || r >= T {
			panic("eval: " + fn + ": trial index out of range")
		}
		c := cond[r]
		if c < 0 || c >= nbins {
			panic("eval: " + fn + ": condition out of range")
		}
		sh.ci[i] = c
		sh.half[i] = sh.counts[c]%2 == 1 // false: half A, true: half B
		if !sh.half[i] {
			sh.cntA[c]++
		}
		sh.counts[c]++
	}
	return sh
}

// eachBlock scores the neurons in blocks of scoreBlock, the blocks shared
// out to one worker per core, each with its own scratch space. Each
// neuron is scored by one goroutine in a fixed order, so the result does
// not depend on scheduling. A fault in a worker reaches the caller as
// forBlocks says.
func eachBlock(dst []Scores, sh *shared, score func(sc *scorer, dst []Scores, n0, w int)) {
	forBlocks(sh.n, scoreBlock, func() *scorer { return newScorer(sh.nbins) }, func(sc *scorer, n0, n1 int) {
		score(sc, dst[n0:n1], n0, n1-n0)
	})
}

// forBlocks runs do over the neuron blocks [n0, n1) of size block that
// cover n neurons, on one worker per core (at most one per block), each
// with its own scratch from newScratch. Which worker takes a block
// depends on scheduling, so do must write only its block's values.
//
// The responses may be a mapped file: a worker that panics (a memory
// fault when the file is truncated, which debug.SetPanicOnFault turns
// into a panic in each worker) stops, and the first panic value is raised
// again on the caller's goroutine after every worker has ended, where the
// caller's format.Guard turns a fault into an error naming the file.
func forBlocks[S any](n, block int, newScratch func() S, do func(s S, n0, n1 int)) {
	nblocks := (n + block - 1) / block
	workers := min(runtime.GOMAXPROCS(0), nblocks)
	var next atomic.Int64
	var wg sync.WaitGroup
	var saved struct {
		sync.Mutex
		v any
	}
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			defer func() {
				if r := recover(); r != nil {
					saved.Lock()
					if saved.v == nil {
						saved.v = r
					}
					saved.Unlock()
				}
			}()
			debug.SetPanicOnFault(true)
			sc := newScratch()
			for {
				blk := int(next.Add(1) - 1)
				if blk >= nblocks {
					return
				}
				n0 := blk * block
				do(sc, n0, min(n0+block, n))
			}
		}()
	}
	wg.Wait()
	if saved.v != nil {
		panic(saved.v)
	}
}

// shared holds the per-call data common to all neurons.
type shared struct {
	y      []float32
	n      int
	trials []int
	pred   []float64
	nbins  int
	ci     []int  // condition of held-out trial i
	half   []bool // split-half assignment of held-out trial i
	counts []int  // held-out trials per condition
	cntA   []int  // of which in half A
}

// scorer is the scratch space of one worker: per-condition accumulators of
// shape nbins x scoreBlock and per-neuron accumulators of length scoreBlock.
type scorer struct {
	sumY, sumP, sumA, ssw                  []float64 // nbins x scoreBlock
	sq                                     []float64 // nbins x scoreBlock, sums of squares (ScoreConditions only)
	totY, totP, ssTot, ssP, cYP, sse, sseC []float64 // scoreBlock
	refY, refP                             []float64 // scoreBlock
	ybar, yhat, vars, hA, hB               []float64 // nbins
	cnt                                    []int     // nbins
}

func newScorer(nbins int) *scorer {
	m := nbins * scoreBlock
	f := func(k int) []float64 { return make([]float64, k) }
	return &scorer{
		sumY: f(m), sumP: f(m), sumA: f(m), ssw: f(m),
		totY: f(scoreBlock), totP: f(scoreBlock), ssTot: f(scoreBlock), ssP: f(scoreBlock),
		cYP: f(scoreBlock), sse: f(scoreBlock), sseC: f(scoreBlock),
		refY: f(scoreBlock), refP: f(scoreBlock),
		ybar: f(nbins), yhat: f(nbins), vars: f(nbins),
		hA: f(nbins), hB: f(nbins),
		cnt: make([]int, nbins),
	}
}

func zero(x []float64) {
	for i := range x {
		x[i] = 0
	}
}

// block scores neurons n0..n0+w-1 into dst[0:w].
func (s *scorer) block(dst []Scores, sh *shared, n0, w int) {
	const nb = scoreBlock
	for _, a := range [][]float64{s.sumY, s.sumP, s.sumA, s.ssw, s.totY, s.totP, s.ssTot, s.ssP, s.cYP, s.sse, s.sseC} {
		zero(a)
	}
	n := sh.n
	// All sums are taken relative to the first held-out trial of each neuron
	// (refY, refP): a constant prediction then has exactly zero spread, and
	// precision does not depend on the response offset. Every score below is
	// invariant to these shifts except the residual y - pred, which adds
	// refY - refP back.
	if len(sh.trials) == 0 {
		for j := range dst {
			dst[j] = s.finish(sh, j, 0)
		}
		return
	}
	r0 := sh.trials[0]
	for j := 0; j < w; j++ {
		s.refY[j] = float64(sh.y[r0*n+n0+j])
		s.refP[j] = sh.pred[n0+j]
	}
	refY, refP := s.refY[:w], s.refP[:w]
	// Pass 1: sums per condition, per half and overall.
	for i, r := range sh.trials {
		c := sh.ci[i]
		yr := sh.y[r*n+n0 : r*n+n0+w]
		pr := sh.pred[i*n+n0 : i*n+n0+w]
		sy := s.sumY[c*nb : c*nb+w]
		sp := s.sumP[c*nb : c*nb+w]
		ty := s.totY[:w]
		tp := s.totP[:w]
		for j, v := range yr {
			yv := float64(v) - refY[j]
			p := pr[j] - refP[j]
			sy[j] += yv
			sp[j] += p
			ty[j] += yv
			tp[j] += p
		}
		if !sh.half[i] {
			sa := s.sumA[c*nb : c*nb+w]
			for j, v := range yr {
				sa[j] += float64(v) - refY[j]
			}
		}
	}
	M := float64(len(sh.trials))
	for c, k := range sh.counts {
		if k == 0 {
			continue
		}
		inv := 1 / float64(k)
		sy := s.sumY[c*nb : c*nb+w]
		sp := s.sumP[c*nb : c*nb+w]
		for j := range sy {
			sy[j] *= inv // now the condition mean of y
			sp[j] *= inv // and of pred
		}
	}
	for j := 0; j < w; j++ {
		s.totY[j] /= M
		s.totP[j] /= M
	}
	// Pass 2: centred sums of squares.
	gy, gp := s.totY[:w], s.totP[:w]
	for i, r := range sh.trials {
		c := sh.ci[i]
		yr := sh.y[r*n+n0 : r*n+n0+w]
		pr := sh.pred[i*n+n0 : i*n+n0+w]
		my := s.sumY[c*nb : c*nb+w]
		ssw := s.ssw[c*nb : c*nb+w]
		ssTot, ssP, cYP, sse, sseC := s.ssTot[:w], s.ssP[:w], s.cYP[:w], s.sse[:w], s.sseC[:w]
		for j, v := range yr {
			yv := float64(v) - refY[j]
			p := pr[j] - refP[j]
			dw := yv - my[j]
			ssw[j] += dw * dw
			dy := yv - gy[j]
			dp := p - gp[j]
			ssTot[j] += dy * dy
			ssP[j] += dp * dp
			cYP[j] += dy * dp
			e := yv - p + (refY[j] - refP[j])
			sse[j] += e * e
			ec := dy - dp
			sseC[j] += ec * ec
		}
	}
	for j := 0; j < w; j++ {
		dst[j] = s.finish(sh, j, M)
	}
}

// finish computes the scores of neuron j of the current block.
func (s *scorer) finish(sh *shared, j int, M float64) Scores {
	const nb = scoreBlock
	nan := math.NaN()
	var out Scores
	ssTot := s.ssTot[j]
	if ssTot > 0 {
		out.TestR2 = 1 - s.sse[j]/ssTot
		out.EVScore = 1 - s.sseC[j]/ssTot
	} else {
		out.TestR2, out.EVScore = nan, nan
	}
	if ssTot > 0 && s.ssP[j] > 0 {
		out.TestR = math.Max(-1, math.Min(1, s.cYP[j]/math.Sqrt(ssTot*s.ssP[j])))
	} else {
		out.TestR = nan
	}
	// Gather the present conditions.
	k, kh := 0, 0
	var ssw, dfw float64 // within-condition sum of squares and its degrees of freedom
	for c, cnt := range sh.counts {
		if cnt == 0 {
			continue
		}
		s.cnt[k] = cnt
		s.ybar[k] = s.sumY[c*nb+j]
		s.yhat[k] = s.sumP[c*nb+j]
		v := nan
		if cnt >= 2 {
			v = s.ssw[c*nb+j] / float64(cnt-1)
			ssw += s.ssw[c*nb+j]
			dfw += float64(cnt - 1)
			na := sh.cntA[c]
			sa := s.sumA[c*nb+j]
			s.hA[kh] = sa / float64(na)
			s.hB[kh] = (s.ybar[k]*float64(cnt) - sa) / float64(cnt-na)
			kh++
		}
		s.vars[k] = v
		k++
	}
	trialVar := ssTot / M
	out.SignalF = nan
	if dfw > 0 {
		noise := ssw / dfw // PooledNoiseVariance from the sums of squares
		out.ExplainableFraction = ExplainableFraction(trialVar, noise)
		out.FEV = FEV(s.sse[j]/M, trialVar, noise)
		if k >= 2 {
			out.SignalF = anovaF(ssTot, ssw, k, dfw)
			out.SignalDF1, out.SignalDF2 = float64(k-1), dfw
		}
	} else {
		out.ExplainableFraction, out.FEV = nan, nan
	}
	ybar, yhat := s.ybar[:k], s.yhat[:k]
	out.SP = SignalPower(s.cnt[:k], ybar, s.vars[:k])
	out.CCAbs = CCAbs(ybar, yhat)
	out.CCMax = CCMax(out.SP, ybar)
	out.CCNorm = CCNorm(ybar, yhat, out.SP)
	out.SPE = SPE(ybar, yhat, out.SP)
	out.SplitHalf = nan
	if kh >= 2 {
		out.SplitHalf = SpearmanBrown(Pearson(s.hA[:kh], s.hB[:kh]), 2)
	}
	return out
}

// anovaF returns the one-way ANOVA F statistic from the total and
// within-condition sums of squares, k conditions and dfw = M - k
// within-condition degrees of freedom. Rounding can make ssTot a hair below
// ssw; the between-condition sum is then taken as 0.
func anovaF(ssTot, ssw float64, k int, dfw float64) float64 {
	ssb := math.Max(0, ssTot-ssw)
	switch {
	case ssw > 0:
		return (ssb / float64(k-1)) / (ssw / dfw)
	case ssb > 0:
		return math.Inf(1)
	}
	return math.NaN()
}
