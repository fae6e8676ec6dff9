package eval

import (
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"
)

// HeldOutSums are the sufficient statistics of a set of held-out trials
// for scoring a model whose prediction depends only on the condition
// (one-hot input). For condition b in [0, B) and neuron n in [0, N):
//
//	Count[b]      N_b, the held-out trials of condition b
//	CountA[b]     of which in half A (see below)
//	Ref[n]        r_n, the response of one held-out trial, the reference
//	RefCond       the condition of that trial (-1 when there are no trials)
//	Sum[b*N+n]    sum over the trials of condition b of (y_tn - r_n)
//	SumA[b*N+n]   the same over the trials of half A only
//	SumSq[b*N+n]  sum over the trials of condition b of (y_tn - r_n)^2
//
// Split halves as in ScorePopulation: within each condition the trials, in
// the order ScoreConditions would take them, are dealt alternately to half
// A (1st, 3rd, ...) and half B. With the trials in ascending order and r
// the values of the first one, these are exactly the sums ScoreConditions
// forms, and ScoreSums returns its scores.
//
// The per-condition sums of squares are needed, not only their total over
// conditions: the pooled noise variance and the F test need only the
// within-condition sum of squares sum_b (SumSq_b - Sum_b^2/N_b) and so
// the total, but SignalPower weights each condition's ddof-1 variance
// s2_b = (SumSq_b - Sum_b^2/N_b)/(N_b - 1) by 1/N_b (eval/methods.md §1),
// which with unequal counts does not follow from the total.
//
// condstats.PartStats, accumulated with CondSquares and Halves, has these
// fields under the same names (and RefCond).
type HeldOutSums struct {
	B, N    int
	Count   []int
	CountA  []int
	Ref     []float64
	RefCond int
	Sum     []float64
	SumA    []float64
	SumSq   []float64
}

// check panics with an "eval: " message if the shapes disagree.
func (h *HeldOutSums) check(fn string, npred int) {
	B, N := h.B, h.N
	bad := func(what string) { panic(fmt.Sprintf("eval: %s: %s", fn, what)) }
	switch {
	case B <= 0 || N <= 0:
		bad(fmt.Sprintf("B = %d and N = %d must be positive", B, N))
	case len(h.Count) != B || len(h.CountA) != B:
		bad(fmt.Sprintf("Count and CountA have lengths %d and %d, want B = %d", len(h.Count), len(h.CountA), B))
	case len(h.Ref) != N:
		bad(fmt.Sprintf("Ref has length %d, want N = %d", len(h.Ref), N))
	case len(h.Sum) != B*N || len(h.SumA) != B*N || len(h.SumSq) != B*N:
		bad(fmt.Sprintf("Sum, SumA and SumSq have lengths %d, %d and %d, want B*N = %d", len(h.Sum), len(h.SumA), len(h.SumSq), B*N))
	case npred != B*N:
		bad(fmt.Sprintf("pred has length %d, want B*N = %d", npred, B*N))
	}
	M := 0
	for b, k := range h.Count {
		if na := h.CountA[b]; k < 0 || na < 0 || na > k || (k >= 2 && (na == 0 || na == k)) {
			bad(fmt.Sprintf("condition %d has %d trials of which %d in half A", b, k, h.CountA[b]))
		}
		M += k
	}
	if M > 0 && (h.RefCond < 0 || h.RefCond >= B || h.Count[h.RefCond] == 0) {
		bad(fmt.Sprintf("RefCond %d is not a condition with trials", h.RefCond))
	}
}

// ScoreSums writes into dst (length N) the scores ScoreConditions gives
// for the one-hot predictions pred (B x N, row b the prediction for every
// trial of condition b) on the trials summarised by h: every field of
// Scores, from the sums alone, without the responses.
//
// It follows ScoreConditions step by step, so with the sums
// ScoreConditions forms (trials ascending, Ref their first trial) the
// results are the same numbers; sums accumulated in another order (other
// reference, other trial order) agree to rounding, about 1e-13 relative
// for float32 responses. Neurons are scored in blocks on all cores, each
// neuron by one goroutine in a fixed order. It panics with an "eval: "
// message if the shapes disagree.
func ScoreSums(dst []Scores, h *HeldOutSums, pred []float64) {
	h.check("ScoreSums", len(pred))
	checkLen(len(dst), h.N, "ScoreSums dst")
	const blk = scoreBlock
	nblocks := (h.N + blk - 1) / blk
	workers := min(runtime.GOMAXPROCS(0), nblocks)
	var next atomic.Int64
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			cs := newCondSummary(h.B)
			for {
				i := int(next.Add(1) - 1)
				if i >= nblocks {
					return
				}
				for j := i * blk; j < min((i+1)*blk, h.N); j++ {
					cs.fromSums(h, pred, j)
					dst[j] = cs.scores()
				}
			}
		}()
	}
	wg.Wait()
}

// condSummary is everything the per-neuron scores are computed from: the
// present conditions' counts, (shifted) means, predictions, variances and
// split-half means, and the trial-level sums of squares. To add a score,
// add what it needs here (filled by fromSums), and compute it in scores.
type condSummary struct {
	// Present conditions, in condition order (k of them).
	cnt              []int
	ybar, yhat, vars []float64 // condition means and predictions (shifted), ddof-1 variances (NaN if N_b < 2)
	// Conditions with N_b >= 2 (kh of them): the two halves' means.
	hA, hB []float64
	k, kh  int
	// Trial level: M trials; sums of squares of y about its mean (ssTot),
	// of the prediction (ssP), their cross product (cYP), of the residual
	// (sse) and of the centred residual (sseC).
	M                           float64
	ssTot, ssP, cYP, sse, sseC  float64
	ssw, dfw                    float64   // within-condition sum of squares and its degrees of freedom
	scratchY, scratchP, scratch []float64 // per condition
}

func newCondSummary(B int) *condSummary {
	f := func() []float64 { return make([]float64, B) }
	return &condSummary{cnt: make([]int, B), ybar: f(), yhat: f(), vars: f(), hA: f(), hB: f(),
		scratchY: f(), scratchP: f(), scratch: f()}
}

// fromSums fills cs for neuron j in the arithmetic of blockConditions:
// sums relative to Ref[j] and to the prediction of RefCond.
func (cs *condSummary) fromSums(h *HeldOutSums, pred []float64, j int) {
	N := h.N
	*cs = condSummary{cnt: cs.cnt, ybar: cs.ybar, yhat: cs.yhat, vars: cs.vars, hA: cs.hA, hB: cs.hB,
		scratchY: cs.scratchY, scratchP: cs.scratchP, scratch: cs.scratch}
	M := 0
	for _, k := range h.Count {
		M += k
	}
	if M == 0 {
		return
	}
	refY := h.Ref[j]
	refP := pred[h.RefCond*N+j]
	my, mp, ssw := cs.scratchY, cs.scratchP, cs.scratch
	var gy, gp float64
	for c, k := range h.Count {
		if k == 0 {
			continue
		}
		cnt := float64(k)
		sy := h.Sum[c*N+j]
		gy += sy
		m := sy / cnt
		ssw[c] = max(0, h.SumSq[c*N+j]-sy*m)
		my[c] = m
		mp[c] = pred[c*N+j] - refP
		gp += cnt * mp[c]
	}
	cs.M = float64(M)
	gy /= cs.M
	gp /= cs.M
	for c, k := range h.Count {
		if k == 0 {
			continue
		}
		cnt := float64(k)
		dy := my[c] - gy
		dp := mp[c] - gp
		e := my[c] - mp[c] + (refY - refP)
		ec := dy - dp
		cs.ssTot += ssw[c] + cnt*dy*dy
		cs.ssP += cnt * dp * dp
		cs.cYP += cnt * dy * dp
		cs.sse += ssw[c] + cnt*e*e
		cs.sseC += ssw[c] + cnt*ec*ec
	}
	for c, k := range h.Count {
		if k == 0 {
			continue
		}
		cs.cnt[cs.k] = k
		cs.ybar[cs.k] = my[c]
		cs.yhat[cs.k] = mp[c]
		v := math.NaN()
		if k >= 2 {
			v = ssw[c] / float64(k-1)
			cs.ssw += ssw[c]
			cs.dfw += float64(k - 1)
			na := h.CountA[c]
			sa := h.SumA[c*N+j]
			cs.hA[cs.kh] = sa / float64(na)
			cs.hB[cs.kh] = (my[c]*float64(k) - sa) / float64(k-na)
			cs.kh++
		}
		cs.vars[cs.k] = v
		cs.k++
	}
}

// scores computes every field of Scores from the summary, as
// scorer.finish does (eval/methods.md §1-§5; the F test of CheckCeiling).
func (cs *condSummary) scores() Scores {
	nan := math.NaN()
	var out Scores
	if cs.ssTot > 0 {
		out.TestR2 = 1 - cs.sse/cs.ssTot
		out.EVScore = 1 - cs.sseC/cs.ssTot
	} else {
		out.TestR2, out.EVScore = nan, nan
	}
	if cs.ssTot > 0 && cs.ssP > 0 {
		out.TestR = math.Max(-1, math.Min(1, cs.cYP/math.Sqrt(cs.ssTot*cs.ssP)))
	} else {
		out.TestR = nan
	}
	trialVar := cs.ssTot / cs.M
	out.SignalF = nan
	if cs.dfw > 0 {
		noise := cs.ssw / cs.dfw // PooledNoiseVariance from the sums of squares
		out.ExplainableFraction = ExplainableFraction(trialVar, noise)
		out.FEV = FEV(cs.sse/cs.M, trialVar, noise)
		if cs.k >= 2 {
			out.SignalF = anovaF(cs.ssTot, cs.ssw, cs.k, cs.dfw)
			out.SignalDF1, out.SignalDF2 = float64(cs.k-1), cs.dfw
		}
	} else {
		out.ExplainableFraction, out.FEV = nan, nan
	}
	ybar, yhat := cs.ybar[:cs.k], cs.yhat[:cs.k]
	out.SP = SignalPower(cs.cnt[:cs.k], ybar, cs.vars[:cs.k])
	out.CCAbs = CCAbs(ybar, yhat)
	out.CCMax = CCMax(out.SP, ybar)
	out.CCNorm = CCNorm(ybar, yhat, out.SP)
	out.SPE = SPE(ybar, yhat, out.SP)
	out.SplitHalf = nan
	if cs.kh >= 2 {
		out.SplitHalf = SpearmanBrown(Pearson(cs.hA[:cs.kh], cs.hB[:cs.kh]), 2)
	}
	return out
}
