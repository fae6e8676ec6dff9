package eval

import (
	"math"
)

func checkLen(a, b int, what string) {
	if a != b {
		panic("eval: length mismatch in " + what)
	}
}

// mean returns (1/n) sum x_i, NaN for an empty slice.
func mean(x []float64) float64 {
	x0, m := shiftMean(x)
	return x0 + m
}

// shiftMean returns x0 = x[0] and the mean of x_i - x0. Deviations are taken
// as (x_i - x0) - m, which are exactly zero for constant data (a plain mean
// of n equal values can miss the value by an ulp and make a constant look
// variable) and lose less precision for data far from zero.
func shiftMean(x []float64) (x0, m float64) {
	if len(x) == 0 {
		return math.NaN(), 0
	}
	x0 = x[0]
	for _, v := range x {
		m += v - x0
	}
	return x0, m / float64(len(x))
}

// moments returns the ddof-0 variances of x and y and their ddof-0 covariance,
// computed with two passes.
func moments(x, y []float64) (vx, vy, cxy float64) {
	x0, mx := shiftMean(x)
	y0, my := shiftMean(y)
	for i, a := range x {
		dx, dy := (a-x0)-mx, (y[i]-y0)-my
		vx += dx * dx
		vy += dy * dy
		cxy += dx * dy
	}
	n := float64(len(x))
	return vx / n, vy / n, cxy / n
}

// variance0 returns the ddof-0 variance of x.
func variance0(x []float64) float64 {
	x0, m := shiftMean(x)
	var s float64
	for _, v := range x {
		d := (v - x0) - m
		s += d * d
	}
	return s / float64(len(x))
}

// residualMoments returns the ddof-0 variance of y and of the residual y - p
// about its mean, and the mean squared residual.
func residualMoments(y, p []float64) (vy, ve, mse float64) {
	y0, my := shiftMean(y)
	n := float64(len(y))
	var me float64
	for i, v := range y {
		me += v - p[i]
	}
	me /= n
	for i, v := range y {
		d := (v - y0) - my
		e := v - p[i]
		vy += d * d
		ve += (e - me) * (e - me)
		mse += e * e
	}
	return vy / n, ve / n, mse / n
}

// R2 returns the coefficient of determination of the predictions yhat for
// the observations y:
//
//	R2 = 1 - sum_i (y_i - yhat_i)^2 / sum_i (y_i - mean(y))^2.
//
// R2 is negative when yhat is worse than the constant mean(y), and NaN when y
// is constant or empty. It penalises a constant offset between y and yhat
// (compare ExplainedVarianceScore). Source: eval/methods.md §5, the scikit-learn
// user guide entry for r2_score. R2 panics if len(y) != len(yhat).
func R2(y, yhat []float64) float64 {
	checkLen(len(y), len(yhat), "R2")
	if len(y) == 0 {
		return math.NaN()
	}
	vy, _, mse := residualMoments(y, yhat)
	if vy == 0 {
		return math.NaN()
	}
	return 1 - mse/vy
}

// ExplainedVarianceScore returns
//
//	EV = 1 - Var(y - yhat) / Var(y),
//
// which, unlike R2, ignores a constant offset between y and yhat. It is NaN
// when y is constant or empty. Source: eval/methods.md §5, the scikit-learn user
// guide entry for explained_variance_score. It panics if len(y) != len(yhat).
func ExplainedVarianceScore(y, yhat []float64) float64 {
	checkLen(len(y), len(yhat), "ExplainedVarianceScore")
	if len(y) == 0 {
		return math.NaN()
	}
	vy, ve, _ := residualMoments(y, yhat)
	if vy == 0 {
		return math.NaN()
	}
	return 1 - ve/vy
}

// Pearson returns the Pearson correlation coefficient of x and y,
//
//	r = Cov(x, y) / sqrt(Var(x) Var(y)),
//
// NaN when either is constant or the slices are empty. It panics if
// len(x) != len(y).
func Pearson(x, y []float64) float64 {
	checkLen(len(x), len(y), "Pearson")
	if len(x) == 0 {
		return math.NaN()
	}
	vx, vy, c := moments(x, y)
	if vx == 0 || vy == 0 {
		return math.NaN()
	}
	r := c / math.Sqrt(vx*vy)
	// Rounding can push |r| a hair past 1.
	return math.Max(-1, math.Min(1, r))
}

// SignalPower returns the signal power of one neuron from condition statistics
// in an ANOVA form for unequal repeat counts:
//
//	SP = Var_b(ybar_b) - (B-1)/B * mean_b(s2_b / N_b),
//
// with B the number of conditions with N_b >= 1, Var_b over them (ddof 0) and
// s2_b the within-condition variance (ddof 1). Conditions with counts[b] == 0
// are skipped. A condition with a single trial has no within-condition
// variance of its own: vars[b] is then ignored and the pooled noise variance
// of the conditions with N_b >= 2 (PooledNoiseVariance) stands in for it. SP
// is NaN when no condition has two trials or fewer than two conditions have a
// trial, and may be <= 0 for an unreliable neuron.
//
// The factor (B-1)/B makes SP unbiased for the ddof-0 variance of the true
// condition means, V = Var_b(mu_b) [derived]: with ybar_b = mu_b + e_b,
// Var(e_b) = sigma2_b/N_b and the e_b independent,
//
//	E[Var_b(ybar)] = V + (1/B) sum_b (1 - 1/B) sigma2_b/N_b = V + (B-1)/B mean_b(sigma2_b/N_b),
//
// and E[s2_b] = sigma2_b. The form without the factor (eval/methods.md §1,
// check value E3: 73/20) is biased low by mean_b(sigma2_b/N_b)/B, which
// makes CC_norm of a perfect model exceed 1 when conditions are few and
// held-out trials per condition are few (TestSignalPowerUnbiased). With equal
// N_b the Sahani-Linden form (SignalPowerEqual, unbiased as well) equals
// Var_b(ybar) - mean_b(s2_b)/N + sum_n ebar_n^2/(N(N-1)), ebar_n the mean over
// conditions of repeat n's deviation from its condition mean: a term that
// depends on which trial is called repeat n and whose expectation is
// mean_b(sigma2_b/N)/B. The form here replaces that term by its expectation,
// so it does not depend on the labelling; on E3 it gives 749/200 (the
// Sahani-Linden form 11/3). SignalPower panics if the slice lengths differ.
func SignalPower(counts []int, means, vars []float64) float64 {
	checkLen(len(counts), len(means), "SignalPower")
	checkLen(len(counts), len(vars), "SignalPower")
	pooled := PooledNoiseVariance(counts, vars)
	var nCond int
	var sum float64
	for b, c := range counts {
		if c >= 1 {
			nCond++
			sum += means[b]
		}
	}
	if math.IsNaN(pooled) || nCond < 2 {
		return math.NaN()
	}
	m := sum / float64(nCond)
	var vbar, noise float64
	for b, c := range counts {
		if c < 1 {
			continue
		}
		d := means[b] - m
		vbar += d * d
		s2 := pooled
		if c >= 2 {
			s2 = vars[b]
		}
		noise += s2 / float64(c)
	}
	B := float64(nCond)
	return (vbar - noise*(B-1)/B) / B
}

// PooledNoiseVariance returns the pooled within-condition variance, the
// within-group mean square of a one-way ANOVA (eval/methods.md §4):
//
//	sigma2_noise = sum_b (N_b - 1) s2_b / sum_b (N_b - 1),
//
// over the conditions with N_b >= 2 (s2_b, ddof 1, is ignored for the others).
// With equal counts it is the plain mean of s2_b; with unequal counts the plain
// mean over-weights rare conditions (check value E8: [1, 3] and [2, 4, 9] give
// 28/3, the plain mean 15/2). NaN when no condition has two trials. It panics
// if the lengths differ.
func PooledNoiseVariance(counts []int, vars []float64) float64 {
	checkLen(len(counts), len(vars), "PooledNoiseVariance")
	var num, den float64
	for b, c := range counts {
		if c >= 2 {
			w := float64(c - 1)
			num += w * vars[b]
			den += w
		}
	}
	if den == 0 {
		return math.NaN()
	}
	return num / den
}

// SignalPowerEqual returns the signal power of one neuron recorded with an
// equal number N of repeats of every condition, trials[n][b] being repeat n
// of condition b (Sahani & Linden 2003; eval/methods.md §1 [pub]):
//
//	SP = (Var_b(sum_n R_n) - sum_n Var_b(R_n)) / (N (N - 1)),
//
// with Var_b ddof 0. It returns NaN for fewer than two repeats or fewer than
// two conditions, and panics if the rows differ in length.
func SignalPowerEqual(trials [][]float64) float64 {
	nrep := len(trials)
	if nrep < 2 || len(trials[0]) < 2 {
		return math.NaN()
	}
	nb := len(trials[0])
	sum := make([]float64, nb)
	var tp float64
	for _, row := range trials {
		checkLen(len(row), nb, "SignalPowerEqual")
		tp += variance0(row)
		for b, v := range row {
			sum[b] += v
		}
	}
	n := float64(nrep)
	return (variance0(sum) - tp) / (n * (n - 1))
}

// CCAbs returns the correlation across conditions between the condition means
// ybar and the predictions yhat (Schoppe et al. 2016; eval/methods.md §2):
//
//	CC_abs = Cov_b(ybar, yhat) / sqrt(Var_b(ybar) Var_b(yhat)).
//
// NaN when either is constant. It panics if the lengths differ.
func CCAbs(ybar, yhat []float64) float64 {
	checkLen(len(ybar), len(yhat), "CCAbs")
	return Pearson(ybar, yhat)
}

// CCMax returns the noise ceiling of CC_abs (Schoppe et al. 2016; eval/methods.md
// §2),
//
//	CC_max = sqrt(SP / Var_b(ybar)),
//
// the expected correlation between the true signal and the observed condition
// means. It is NaN if sp <= 0, sp is NaN or ybar is constant. It can exceed 1
// with finite samples (when sp > Var_b(ybar)); it is not clipped.
func CCMax(sp float64, ybar []float64) float64 {
	if !(sp > 0) || len(ybar) == 0 {
		return math.NaN()
	}
	v := variance0(ybar)
	if v == 0 {
		return math.NaN()
	}
	return math.Sqrt(sp / v)
}

// CCNorm returns the normalised correlation coefficient in its direct form
// (Schoppe et al. 2016, eval/methods.md §2 [pub]):
//
//	CC_norm = Cov_b(ybar, yhat) / sqrt(SP Var_b(yhat)) = CC_abs / CC_max.
//
// It is NaN if sp <= 0 or yhat is constant. With finite samples it can exceed
// 1; it is not clipped. It panics if the lengths differ.
func CCNorm(ybar, yhat []float64, sp float64) float64 {
	checkLen(len(ybar), len(yhat), "CCNorm")
	if !(sp > 0) || len(ybar) == 0 {
		return math.NaN()
	}
	_, vy, c := moments(ybar, yhat)
	if vy == 0 {
		return math.NaN()
	}
	return c / math.Sqrt(sp*vy)
}

// SPE returns the signal power explained (Sahani & Linden 2003; Schoppe et al.
// 2016; eval/methods.md §2):
//
//	SPE = (Var_b(ybar) - Var_b(ybar - yhat)) / SP.
//
// SPE penalises offsets in gain but not a constant shift; it is unbounded
// below and can exceed 1 with finite samples (not clipped). NaN if sp <= 0.
// It panics if the lengths differ.
func SPE(ybar, yhat []float64, sp float64) float64 {
	checkLen(len(ybar), len(yhat), "SPE")
	if !(sp > 0) || len(ybar) == 0 {
		return math.NaN()
	}
	vy, ve, _ := residualMoments(ybar, yhat)
	return (vy - ve) / sp
}

// SpearmanBrown returns the reliability of a measurement lengthened n-fold
// from one with reliability r (Spearman 1910; Brown 1910; eval/methods.md §3):
//
//	rho* = n r / (1 + (n - 1) r).
//
// NaN if the denominator is zero.
func SpearmanBrown(r, n float64) float64 {
	den := 1 + (n-1)*r
	if den == 0 {
		return math.NaN()
	}
	return n * r / den
}

// CCMaxSplitHalf returns the noise ceiling of CC_abs estimated from the
// correlation ccHalf between the condition means of two halves of the trials
// (eval/methods.md §2 [derived]):
//
//	CC_max = sqrt(2 ccHalf / (1 + ccHalf)),
//
// the square root of the Spearman-Brown corrected reliability with n = 2. NaN
// when ccHalf <= 0.
func CCMaxSplitHalf(ccHalf float64) float64 {
	if !(ccHalf > 0) {
		return math.NaN()
	}
	return math.Sqrt(SpearmanBrown(ccHalf, 2))
}

// ExplainableFraction returns the fraction of single-trial variance that any
// model of the stimulus condition could explain (Cadena et al. 2019;
// eval/methods.md §4):
//
//	(Var[r] - sigma2_noise) / Var[r],
//
// with trialVar = Var[r] the ddof-0 variance of all single trials and noiseVar
// = sigma2_noise the pooled within-condition variance (PooledNoiseVariance).
// It is NaN if trialVar <= 0, and may be negative for an unreliable
// neuron.
func ExplainableFraction(trialVar, noiseVar float64) float64 {
	if !(trialVar > 0) {
		return math.NaN()
	}
	return (trialVar - noiseVar) / trialVar
}

// FEV returns the fraction of explainable variance explained (Cadena et al.
// 2019; eval/methods.md §4):
//
//	FEV = 1 - (MSE - sigma2_noise) / (Var[r] - sigma2_noise),
//
// with mse the single-trial mean squared error of the model. A constant
// grand-mean prediction gives FEV = 0 [derived]. NaN if trialVar <= noiseVar.
// FEV can exceed 1 with finite samples (not clipped).
func FEV(mse, trialVar, noiseVar float64) float64 {
	den := trialVar - noiseVar
	if !(den > 0) {
		return math.NaN()
	}
	return 1 - (mse-noiseVar)/den
}

// Summary is the median and interquartile range of a set of scores, ignoring
// NaN. N counts the finite values summarised and NaN the values left out.
// Q1 and Q3 are the 25th and 75th percentiles with linear interpolation
// between order statistics (numpy's default "linear" method).
type Summary struct {
	Median, Q1, Q3 float64
	N, NaN         int
}

// Summarize returns the median, quartiles and NaN count of x. Infinite values
// are kept (they sort to the ends). It does not modify x.
func Summarize(x []float64) Summary {
	v := make([]float64, 0, len(x))
	nan := 0
	for _, a := range x {
		if math.IsNaN(a) {
			nan++
			continue
		}
		v = append(v, a)
	}
	s := Summary{N: len(v), NaN: nan}
	if len(v) == 0 {
		s.Median, s.Q1, s.Q3 = math.NaN(), math.NaN(), math.NaN()
		return s
	}
	s.Q1, s.Median, s.Q3 = quartiles(v)
	return s
}

// quantileSorted returns the p-quantile of sorted v with linear interpolation
// at position p (n-1).
func quantileSorted(v []float64, p float64) float64 {
	h := p * float64(len(v)-1)
	lo := int(math.Floor(h))
	if lo >= len(v)-1 {
		return v[len(v)-1]
	}
	f := h - float64(lo)
	if f == 0 || v[lo] == v[lo+1] {
		return v[lo]
	}
	return v[lo] + f*(v[lo+1]-v[lo])
}
