package eval

import (
	"math"
	"testing"
)

func near(got, want, tol float64) bool {
	if math.IsNaN(want) {
		return math.IsNaN(got)
	}
	return math.Abs(got-want) <= tol
}

// E3 of eval/methods.md §9: four repeats (rows) x five conditions.
var (
	e3Trials = [][]float64{
		{9, 5, 4, 2, 7},
		{7, 2, 7, 2, 10},
		{8, 3, 6, 5, 7},
		{6, 3, 7, 3, 7},
	}
	e3Yhat = []float64{6, 5, 7, 3, 7}
	e3Ybar = []float64{15.0 / 2, 13.0 / 4, 6, 3, 31.0 / 4} // eval/methods.md §9 E3 [computed]
)

// e3Stats returns counts, condition means and ddof-1 variances of E3.
func e3Stats() ([]int, []float64, []float64) {
	counts := make([]int, 5)
	means := make([]float64, 5)
	vars := make([]float64, 5)
	for b := 0; b < 5; b++ {
		counts[b] = 4
		for _, row := range e3Trials {
			means[b] += row[b] / 4
		}
		for _, row := range e3Trials {
			d := row[b] - means[b]
			vars[b] += d * d / 3
		}
	}
	return counts, means, vars
}

// Tolerance 1e-12 for values computed with a handful of float64 operations
// from small integers: rounding error is a few ulps of numbers of order 1.
const exactTol = 1e-12

func TestWorkedValues(t *testing.T) {
	counts, means, vars := e3Stats()
	for b := range means {
		if !near(means[b], e3Ybar[b], exactTol) {
			t.Fatalf("E3 ybar[%d] = %v, want %v", b, means[b], e3Ybar[b])
		}
	}
	spEq := SignalPowerEqual(e3Trials)
	half1 := []float64{8, 3.5, 5.5, 2, 8.5} // mean of repeats 1,2
	half2 := []float64{7, 3, 6.5, 4, 7}     // mean of repeats 3,4
	var mse, all []float64
	for _, row := range e3Trials {
		for b, v := range row {
			mse = append(mse, (v-e3Yhat[b])*(v-e3Yhat[b]))
			all = append(all, v)
		}
	}
	trialVar := variance0(all)
	noiseVar := PooledNoiseVariance(counts, vars)
	cases := []struct {
		name      string
		got, want float64
		tol       float64
	}{
		// eval/methods.md §9 E1 [computed]: exact fractions.
		{"E1 SB(0.5,2)", SpearmanBrown(0.5, 2), 2.0 / 3, exactTol},
		{"E1 SB(0.6,2)", SpearmanBrown(0.6, 2), 3.0 / 4, exactTol},
		{"E1 SB(0.25,4)", SpearmanBrown(0.25, 4), 4.0 / 7, exactTol},
		// eval/methods.md §9 E2 [computed]: sqrt(2/3), sqrt(8/9).
		{"E2 CCmax(0.5)", CCMaxSplitHalf(0.5), math.Sqrt(2.0 / 3), exactTol},
		{"E2 CCmax(0.8)", CCMaxSplitHalf(0.8), math.Sqrt(8.0 / 9), exactTol},
		{"E2 CCmax(0.8) printed", CCMaxSplitHalf(0.8), 0.9428090416, 1e-10}, // 10 printed digits
		// eval/methods.md §9 E3 [computed].
		{"E3 SP equal-repeat", spEq, 11.0 / 3, exactTol},
		// eval/methods.md §9 E3 gives the ANOVA form without the (B-1)/B
		// factor, 73/20 = Var(ybar) - mean(s2)/N = 33/8 - 19/40. SignalPower
		// multiplies the noise term by (B-1)/B = 4/5 (derivation on
		// SignalPower): 33/8 - (4/5)(19/40) = 749/200 [derived, exact fractions].
		{"E3 SP ANOVA", SignalPower(counts, means, vars), 749.0 / 200, exactTol},
		{"E3 SP ANOVA without the factor", variance0(e3Ybar) - mean(vars)/4, 73.0 / 20, exactTol},
		// eval/methods.md §9 E8 [computed]: pooled 28/3, the plain mean 15/2.
		{"E8 pooled noise", PooledNoiseVariance([]int{2, 3}, []float64{2, 13}), 28.0 / 3, exactTol},
		{"E8 plain mean", mean([]float64{2, 13}), 15.0 / 2, exactTol},
		{"E3 Var(ybar)", variance0(e3Ybar), 33.0 / 8, exactTol},
		{"E3 Var(yhat)", variance0(e3Yhat), 56.0 / 25, exactTol},
		{"E3 CC_abs", CCAbs(e3Ybar, e3Yhat), 0.8224396187, 1e-10},              // printed to 10 digits
		{"E3 CC_max", CCMax(spEq, e3Ybar), 0.9428090416, 1e-10},                // sqrt(8/9), printed
		{"E3 CC_max exact", CCMax(spEq, e3Ybar), math.Sqrt(8.0 / 9), exactTol}, // (11/3)/(33/8) = 8/9
		{"E3 CC_norm", CCNorm(e3Ybar, e3Yhat, spEq), 0.8723289472, 1e-10},
		{"E3 CC_norm = CC_abs/CC_max", CCNorm(e3Ybar, e3Yhat, spEq), CCAbs(e3Ybar, e3Yhat) / CCMax(spEq, e3Ybar), exactTol},
		{"E3 SPE", SPE(e3Ybar, e3Yhat, spEq), 207.0 / 275, exactTol},
		{"E3 CC_half", Pearson(half1, half2), 37.0 / 42, exactTol},
		{"E3 CC_max split", CCMaxSplitHalf(Pearson(half1, half2)), math.Sqrt(74.0 / 79), exactTol},
		{"E3 sigma2_noise", noiseVar, 19.0 / 10, exactTol},
		{"E3 MSE", mean(mse), 14.0 / 5, exactTol},
		{"E3 Var[r]", trialVar, 111.0 / 20, exactTol},
		{"E3 FEV", FEV(mean(mse), trialVar, noiseVar), 55.0 / 73, exactTol},
		{"E3 explainable fraction", ExplainableFraction(trialVar, noiseVar), 73.0 / 111, exactTol},
		// eval/methods.md §9 E4 [pub: scikit-learn user guide]: 443/467 and 447/467.
		{"E4 R2", R2([]float64{3, -0.5, 2, 7}, []float64{2.5, 0, 2, 8}), 443.0 / 467, exactTol},
		{"E4 EV score", ExplainedVarianceScore([]float64{3, -0.5, 2, 7}, []float64{2.5, 0, 2, 8}), 447.0 / 467, exactTol},
		{"E4 R2 printed", R2([]float64{3, -0.5, 2, 7}, []float64{2.5, 0, 2, 8}), 0.9486081370, 1e-10},
		{"E4 EV printed", ExplainedVarianceScore([]float64{3, -0.5, 2, 7}, []float64{2.5, 0, 2, 8}), 0.9571734475, 1e-10},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if !near(c.got, c.want, c.tol) {
				t.Errorf("got %.12g, want %.12g (tol %g)", c.got, c.want, c.tol)
			}
		})
	}
}

// TestScorePopulationE3 runs the E3 table through ScorePopulation: one neuron,
// 20 trials, rows in repeat order 1,3,2,4 so that the alternating split-half
// puts repeats 1,2 in half A and 3,4 in half B, as in E3.
func TestScorePopulationE3(t *testing.T) {
	var y []float32
	var cond, trials []int
	var pred []float64
	for _, rep := range []int{0, 2, 1, 3} {
		for b, v := range e3Trials[rep] {
			trials = append(trials, len(y))
			y = append(y, float32(v))
			cond = append(cond, b)
			pred = append(pred, e3Yhat[b])
		}
	}
	dst := make([]Scores, 1)
	ScorePopulation(dst, y, 1, trials, cond, pred, 5)
	s := dst[0]
	half := 37.0 / 42
	// Expected values: eval/methods.md §9 E3 [computed]; SP is the ANOVA
	// form with the (B-1)/B factor, 749/200 (TestWorkedValues), so CC_max,
	// CC_norm and SPE use 749/200 rather than the equal-repeat 11/3.
	sp := 749.0 / 200
	cases := []struct {
		name      string
		got, want float64
	}{
		{"SP", s.SP, sp},
		{"CCAbs", s.CCAbs, 0.8224396187},
		{"CCMax", s.CCMax, math.Sqrt(sp / (33.0 / 8))},
		{"CCNorm", s.CCNorm, (5.0 / 2) / math.Sqrt(sp*56.0/25)},
		{"SPE", s.SPE, (33.0/8 - 1.365) / sp}, // Var(ybar - yhat) = 1.365 by hand
		{"FEV", s.FEV, 55.0 / 73},
		{"ExplainableFraction", s.ExplainableFraction, 73.0 / 111},
		{"SplitHalf", s.SplitHalf, 2 * half / (1 + half)},
		{"TestR2", s.TestR2, 1 - (14.0/5)/(111.0/20)}, // 1 - MSE/Var[r]
	}
	for _, c := range cases {
		// 1e-10: inputs pass through float32 exactly (small integers) and
		// the ANOVA sums add a few rounding steps; CCAbs is printed to 10 digits.
		if !near(c.got, c.want, 1e-10) {
			t.Errorf("%s = %.12g, want %.12g", c.name, c.got, c.want)
		}
	}
	// Trial-level scores equal the direct functions on the same vectors.
	yy := make([]float64, len(y))
	for i, v := range y {
		yy[i] = float64(v)
	}
	if !near(s.TestR, Pearson(yy, pred), exactTol) || !near(s.EVScore, ExplainedVarianceScore(yy, pred), exactTol) {
		t.Errorf("trial-level scores %v %v disagree with Pearson/ExplainedVarianceScore", s.TestR, s.EVScore)
	}
}

func TestNaNRules(t *testing.T) {
	flat := []float64{2, 2, 2}
	if !math.IsNaN(R2(flat, []float64{1, 2, 3})) {
		t.Error("R2 of constant y should be NaN")
	}
	if !math.IsNaN(Pearson(flat, []float64{1, 2, 3})) {
		t.Error("Pearson of constant x should be NaN")
	}
	if !math.IsNaN(CCNorm([]float64{1, 2, 3}, []float64{1, 2, 3}, -0.1)) || !math.IsNaN(CCMax(0, []float64{1, 2})) {
		t.Error("SP <= 0 should give NaN")
	}
	if !math.IsNaN(SPE([]float64{1, 2}, []float64{1, 2}, math.NaN())) {
		t.Error("SP NaN should give NaN SPE")
	}
	// One condition with a single trial: its variance is ignored and the
	// pooled variance of the others (here 1) stands in.
	got := SignalPower([]int{2, 2, 1, 0}, []float64{0, 2, 4, 99}, []float64{1, 1, math.NaN(), math.NaN()})
	// Var_b([0,2,4]) = 8/3; noise = (1/2+1/2+1/1)/3 = 2/3, times (B-1)/B =
	// 2/3 -> SP = 8/3 - 4/9 = 20/9 [computed by hand]
	if !near(got, 20.0/9, exactTol) {
		t.Errorf("SignalPower with a single-trial condition = %v, want 20/9", got)
	}
	// The stand-in is the pooled variance, weights N_b - 1 (eval/methods.md
	// §4): counts 2 and 3 with s2 1 and 4 pool to (1*1 + 2*4)/3 = 3; the
	// single-trial condition then adds 3/1. Means [0, 3, 6]: Var_b = 6;
	// noise = (1/2 + 4/3 + 3)/3 = 29/18, times 2/3 = 29/27; SP = 6 - 29/27 =
	// 133/27 [computed by hand].
	got = SignalPower([]int{2, 3, 1}, []float64{0, 3, 6}, []float64{1, 4, math.NaN()})
	if !near(got, 133.0/27, exactTol) {
		t.Errorf("SignalPower with unequal counts and a single-trial condition = %v, want 133/27", got)
	}
	if !math.IsNaN(PooledNoiseVariance([]int{1, 0}, []float64{5, 5})) {
		t.Error("PooledNoiseVariance without a condition of two trials should be NaN")
	}
}

func TestSummarize(t *testing.T) {
	// numpy.percentile([1,2,3,4,10], [25,50,75]) = [2, 3, 4] (linear method) [computed by hand].
	s := Summarize([]float64{10, math.NaN(), 3, 1, 4, 2, math.NaN()})
	if s.Median != 3 || s.Q1 != 2 || s.Q3 != 4 || s.N != 5 || s.NaN != 2 {
		t.Errorf("Summarize = %+v", s)
	}
	// Four values 1..4: Q1 = 1.75, median 2.5, Q3 = 3.25 (linear interpolation at p(n-1)) [computed by hand].
	s = Summarize([]float64{4, 3, 2, 1})
	if s.Q1 != 1.75 || s.Median != 2.5 || s.Q3 != 3.25 {
		t.Errorf("Summarize(1..4) = %+v", s)
	}
	s = Summarize([]float64{math.NaN()})
	if !math.IsNaN(s.Median) || s.NaN != 1 || s.N != 0 {
		t.Errorf("Summarize(NaN) = %+v", s)
	}
}
