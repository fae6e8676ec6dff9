package eval

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Ceiling says whether a neuron's noise-ceiling estimate can divide a score,
// and if not, why. The zero value is CeilingUsable.
type Ceiling uint8

const (
	// CeilingUsable: the held-out trials show a condition effect (F test at
	// the chosen level) and both ceiling estimates are positive.
	CeilingUsable Ceiling = iota
	// CeilingNoRepeats: no condition has two held-out trials (or fewer than
	// two conditions have one), so there is no noise estimate.
	CeilingNoRepeats
	// CeilingNoSignal: the signal power SP or the explainable variance
	// Var[r] - sigma2_noise is <= 0.
	CeilingNoSignal
	// CeilingNotSignificant: both estimates are positive, but the condition
	// effect on the held-out trials is not significant (SignalP() >= alpha):
	// the estimate may be positive by chance and a ratio by it can take any
	// value.
	CeilingNotSignificant
)

var ceilingNames = [...]string{"usable", "no_repeats", "no_signal_power", "signal_not_significant"}

// String returns a short code for tables: "usable", "no_repeats",
// "no_signal_power" or "signal_not_significant".
func (c Ceiling) String() string {
	if int(c) < len(ceilingNames) {
		return ceilingNames[c]
	}
	return "unknown"
}

// Reason returns a sentence for reports ("" for CeilingUsable).
func (c Ceiling) Reason() string {
	switch c {
	case CeilingUsable:
		return ""
	case CeilingNoRepeats:
		return "no condition has two held-out trials, so the trial-to-trial noise cannot be estimated"
	case CeilingNoSignal:
		return "the estimated signal power or explainable variance is <= 0"
	case CeilingNotSignificant:
		return "the held-out responses do not differ significantly between conditions (one-way ANOVA F test), so the noise ceiling is indistinguishable from 0"
	}
	return "unknown"
}

// DefaultCeilingAlpha is the default level of the F test in CheckCeiling,
// 0.05, the usual level for calling a neuron "tuned" [practice]. Measured by
// simulation (TestGateBoundsRatios: 3000 Poisson neurons, 70 % untuned, 12
// conditions, 1-3 held-out trials per condition): without the test the ratio
// scores of neurons with SP > 0 spanned [-457, 62]; with it at 0.05 they
// spanned [-1.8, 1.6] and at 0.01 [-1.1, 1.2]. The untuned neurons that pass
// (about alpha of them) have bounded ratios too, because passing the test
// bounds the denominators (see CheckCeiling), so the stricter level buys
// little: it kept 140 of the 900 tuned neurons where 0.05 kept 315 (the
// others are too weakly tuned for 1-3 held-out trials per condition).
const DefaultCeilingAlpha = 0.05

// CheckCeiling says whether the noise-ceiling estimates in s can divide a
// score. The rule, in order:
//
//  1. SignalF is NaN (no condition with two held-out trials, or fewer than
//     two conditions): CeilingNoRepeats.
//  2. SP <= 0 or the explainable fraction <= 0 (Var[r] <= sigma2_noise), or
//     either is NaN: CeilingNoSignal (eval/methods.md §1: report NaN).
//  3. The F test of "no condition effect" does not reject at level alpha
//     (SignalP() >= alpha, i.e. SignalF at or below the critical value):
//     CeilingNotSignificant.
//
// Why the F test [derived]: with B conditions, M held-out trials and MS_w the
// pooled noise variance, the explainable variance is
//
//	Var[r] - sigma2_noise = MS_w ((B-1) F - B) / M,
//
// so FEV's denominator is a multiple of MS_w that grows with F, and for a
// neuron with a condition effect only by chance (F near 1) it is a difference
// of two noisy estimates, near 0, and FEV = 1 - (MSE - sigma2)/that can take
// any value. Likewise Var_b(ybar)/SP is about F/(F - 1) for equal counts, and
// |CC_norm| <= sqrt(Var_b(ybar)/SP). Requiring F to pass the test of "no
// condition effect" at level alpha bounds both denominators away from 0 in
// units of the noise, which is what a ratio needs. alpha <= 0 or >= 1 skips
// step 3.
func CheckCeiling(s Scores, alpha float64) Ceiling {
	var g critCache
	return g.check(s, alpha)
}

// critCache remembers the critical F value of the last degrees of freedom:
// all neurons scored on the same trials share them, so GateCeilings computes
// one quantile per call instead of one incomplete beta per neuron.
type critCache struct {
	df1, df2, alpha, crit float64
	ok                    bool
}

func (g *critCache) check(s Scores, alpha float64) Ceiling {
	if math.IsNaN(s.SignalF) {
		return CeilingNoRepeats
	}
	if !(s.SP > 0) || !(s.ExplainableFraction > 0) {
		return CeilingNoSignal
	}
	if !(alpha > 0 && alpha < 1) {
		return CeilingUsable
	}
	if !g.ok || g.df1 != s.SignalDF1 || g.df2 != s.SignalDF2 || g.alpha != alpha {
		g.df1, g.df2, g.alpha, g.ok = s.SignalDF1, s.SignalDF2, alpha, true
		g.crit = distuv.F{D1: s.SignalDF1, D2: s.SignalDF2}.Quantile(1 - alpha)
	}
	if !(s.SignalF > g.crit) {
		return CeilingNotSignificant
	}
	return CeilingUsable
}

// GateCeilings applies CheckCeiling with level alpha to every neuron: where
// the ceiling is not usable it sets the ratio scores FEV, CCNorm and SPE to
// NaN (the ceilings themselves, ExplainableFraction, SP and CCMax, and the
// trial-level scores are kept). It writes the verdicts into dst (allocated
// when nil) and returns dst and the number of usable neurons. Call it once
// per set of scores (per fold), after scoring: the verdict depends only on
// the held-out responses, not on the model, so every model scored on the
// same trials loses the same neurons. It panics if dst is not nil and
// len(dst) != len(scores).
func GateCeilings(dst []Ceiling, scores []Scores, alpha float64) ([]Ceiling, int) {
	if dst == nil {
		dst = make([]Ceiling, len(scores))
	}
	checkLen(len(dst), len(scores), "GateCeilings")
	usable := 0
	nan := math.NaN()
	var g critCache
	for i := range scores {
		c := g.check(scores[i], alpha)
		dst[i] = c
		if c == CeilingUsable {
			usable++
			continue
		}
		scores[i].FEV, scores[i].CCNorm, scores[i].SPE = nan, nan, nan
	}
	return dst, usable
}

// DefaultMinReliability is the default threshold of ReliableMask: a
// Spearman-Brown corrected split-half reliability of 0.3, i.e. a ceiling
// CC_max = sqrt(0.3) = 0.55 on the correlation of a perfect model with the
// observed condition means. Thresholds between 0.2 and 0.5 are common for
// "reliable" neurons [practice]; 0.3 keeps weakly but really tuned neurons
// while dropping those whose condition means are mostly noise.
const DefaultMinReliability = 0.3

// ReliableMask marks the neurons whose reliability (a Spearman-Brown corrected
// split-half reliability, eval/methods.md §3) is at least rMin: dst[i] =
// reliability[i] >= rMin; NaN is not kept. dst is allocated when nil. It
// returns dst and the number kept, for summaries, paired tests and figures
// that should be restricted to reliable neurons. It panics if dst is not nil
// and len(dst) != len(reliability).
func ReliableMask(dst []bool, reliability []float64, rMin float64) ([]bool, int) {
	if dst == nil {
		dst = make([]bool, len(reliability))
	}
	checkLen(len(dst), len(reliability), "ReliableMask")
	kept := 0
	for i, r := range reliability {
		dst[i] = r >= rMin
		if dst[i] {
			kept++
		}
	}
	return dst, kept
}
