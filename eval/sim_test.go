package eval_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/tuning"
)

// simPopulation draws R independent replicate "neurons" that share the tuning
// curve s (length B) with Gaussian noise of standard deviation sigma, nPer
// trials per condition. Rows are trials (condition-major), columns replicates.
func simPopulation(rng *rand.Rand, s []float64, sigma float64, nPer, R int) (y []float32, cond []int) {
	B := len(s)
	T := B * nPer
	y = make([]float32, T*R)
	cond = make([]int, T)
	for t := 0; t < T; t++ {
		b := t % B
		cond[t] = b
		for r := 0; r < R; r++ {
			y[t*R+r] = float32(s[b] + sigma*rng.NormFloat64())
		}
	}
	return y, cond
}

func vonMisesCurve(B int, b, a, kappa float64) []float64 {
	s := make([]float64, B)
	for i := range s {
		x := 2 * math.Pi * (float64(i) + 0.5) / float64(B)
		s[i] = b + a*math.Exp(kappa*(math.Cos(x-1)-1))
	}
	return s
}

func var0(x []float64) float64 {
	var m, v float64
	for _, a := range x {
		m += a
	}
	m /= float64(len(x))
	for _, a := range x {
		v += (a - m) * (a - m)
	}
	return v / float64(len(x))
}

type simStats struct {
	meanEF, seEF, meanCCMax, seCCMax, meanCCNorm, seCCNorm float64
	nanFrac                                                float64
}

// runSim scores R replicates whose prediction is the true curve s, and
// averages the noise-ceiling estimates over replicates (NaN left out).
func runSim(seed uint64, s []float64, sigma float64, nPer, R int) simStats {
	rng := rand.New(rand.NewPCG(seed, 99))
	y, cond := simPopulation(rng, s, sigma, nPer, R)
	T := len(cond)
	trials := make([]int, T)
	pred := make([]float64, T*R)
	for t := range trials {
		trials[t] = t
		for r := 0; r < R; r++ {
			pred[t*R+r] = s[cond[t]]
		}
	}
	sc := make([]eval.Scores, R)
	eval.ScorePopulation(sc, y, R, trials, cond, pred, len(s))
	avg := func(f func(eval.Scores) float64) (m, se float64, nan int) {
		var sum, sum2 float64
		n := 0
		for _, x := range sc {
			v := f(x)
			if math.IsNaN(v) {
				nan++
				continue
			}
			sum += v
			sum2 += v * v
			n++
		}
		m = sum / float64(n)
		return m, math.Sqrt((sum2/float64(n) - m*m) / float64(n)), nan
	}
	var st simStats
	st.meanEF, st.seEF, _ = avg(func(x eval.Scores) float64 { return x.ExplainableFraction })
	var nan int
	st.meanCCMax, st.seCCMax, nan = avg(func(x eval.Scores) float64 { return x.CCMax })
	st.meanCCNorm, st.seCCNorm, _ = avg(func(x eval.Scores) float64 { return x.CCNorm })
	st.nanFrac = float64(nan) / float64(R)
	return st
}

// TestNoiseCeilingSimulation checks the explainable fraction and CC_max
// against their analytic values for a known curve and known noise.
//
// Analytic values [derived here]: trials r = s_b + e, e ~ N(0, sigma^2), N
// trials in each of B conditions, Vs = Var_b(s) with ddof 0. Then
//
//	explainable fraction (population) = Vs / (Vs + sigma^2)
//	CC_max (population)               = sqrt(Vs / (Vs + sigma^2/N))
//
// The estimators are ratios of unbiased-up-to-O(1/(BN)) quantities:
// E[Var[r]] = Vs + sigma^2 (1 - 1/(BN)), E[sigma2_noise] = sigma^2,
// E[Var_b(ybar)] = Vs + sigma^2 (B-1)/(BN), E[SP] = Vs - sigma^2/(BN). The
// tolerance is 4 standard errors of the replicate mean (sampling error) plus
// the gap between the population value and the ratio of these expectations
// (the known finite-sample shift); the ratio's own bias is second order,
// O(1/(BN)^2) here, and below 1e-4.
func TestNoiseCeilingSimulation(t *testing.T) {
	const B, N, R = 60, 20, 400
	s := vonMisesCurve(B, 1, 2, 2)
	sigma := 1.5
	vs := var0(s)
	s2 := sigma * sigma
	T := float64(B * N)
	ef := vs / (vs + s2)
	efExp := (vs - s2/T) / (vs + s2*(1-1/T))
	ccmax := math.Sqrt(vs / (vs + s2/N))
	ccmaxExp := math.Sqrt((vs - s2/T) / (vs + s2*float64(B-1)/T))
	st := runSim(1, s, sigma, N, R)
	tolEF := 4*st.seEF + math.Abs(ef-efExp) + 1e-4
	tolCC := 4*st.seCCMax + math.Abs(ccmax-ccmaxExp) + 1e-4
	if math.Abs(st.meanEF-ef) > tolEF {
		t.Errorf("explainable fraction: mean %.5f over %d replicates, analytic %.5f (tol %.5f)", st.meanEF, R, ef, tolEF)
	}
	if math.Abs(st.meanCCMax-ccmax) > tolCC {
		t.Errorf("CC_max: mean %.5f, analytic %.5f (tol %.5f)", st.meanCCMax, ccmax, tolCC)
	}
	// The true curve as prediction: CC_norm near 1; Jensen's inequality makes
	// sqrt(Vs/SP) biased upward by about (3/8) Var(SP)/Vs^2, i.e. < 1e-3
	// here. Tolerance 4 SE + 2e-3.
	if math.Abs(st.meanCCNorm-1) > 4*st.seCCNorm+2e-3 {
		t.Errorf("CC_norm of the true curve: mean %.5f, want 1 (tol %.5f)", st.meanCCNorm, 4*st.seCCNorm+2e-3)
	}
	if st.nanFrac != 0 {
		t.Errorf("%.3f of replicates had SP <= 0 with a strong signal", st.nanFrac)
	}
}

// TestNoiseCeilingFewTrials prints how the estimates behave with 2 and 20
// trials per condition, for a strong and a weak signal (the README quotes
// this table). Run with -v to see it. It asserts only what must hold: the
// estimates approach the analytic values as N grows.
func TestNoiseCeilingFewTrials(t *testing.T) {
	const B, R = 60, 400
	sigma := 1.5
	for _, amp := range []float64{2, 0.5} {
		s := vonMisesCurve(B, 1, amp, 2)
		vs := var0(s)
		ef := vs / (vs + sigma*sigma)
		var errs []float64
		for _, N := range []int{2, 5, 20} {
			ccmax := math.Sqrt(vs / (vs + sigma*sigma/float64(N)))
			st := runSim(uint64(10*N)+uint64(amp*10), s, sigma, N, R)
			t.Logf("amp %.1f N_b=%2d: expl.frac %.4f (analytic %.4f)  CC_max %.4f (analytic %.4f)  CC_norm(true curve) %.4f  SP<=0: %.1f%%",
				amp, N, st.meanEF, ef, st.meanCCMax, ccmax, st.meanCCNorm, 100*st.nanFrac)
			errs = append(errs, math.Abs(st.meanCCNorm-1))
		}
		if !(errs[2] < errs[0]) {
			t.Errorf("amp %v: CC_norm bias did not shrink from N=2 (%v) to N=20 (%v)", amp, errs[0], errs[2])
		}
	}
}

// TestCondMeanCCNorm: the condition-mean baseline fitted on training trials
// of a nearly noise-free neuron reaches CC_norm near 1 on held-out trials.
// Noise sd 0.01 against a curve with Var_b(s) ~ 0.3: the relative noise in
// the condition means is ~1e-4, so |CC_norm - 1| < 1e-3 is a loose bound.
// A constant prediction equal to the held-out grand mean gives FEV = 0 and
// R2 = 0 exactly (eval/methods.md §4 [derived]: MSE = Var[r]).
func TestCondMeanCCNorm(t *testing.T) {
	const B, N, R = 36, 8, 3
	rng := rand.New(rand.NewPCG(21, 22))
	s := vonMisesCurve(B, 2, 1.5, 1.5)
	y, cond := simPopulation(rng, s, 0.01, N, R)
	T := len(cond)
	var train, test []int
	for t := 0; t < T; t++ {
		if (t/B)%4 == 3 { // one repeat in four held out
			test = append(test, t)
		} else {
			train = append(train, t)
		}
	}
	pred := make([]float64, len(test)*R)
	constPred := make([]float64, len(test)*R)
	for r := 0; r < R; r++ {
		counts := make([]int, B)
		means := make([]float64, B)
		for _, tr := range train {
			counts[cond[tr]]++
			means[cond[tr]] += float64(y[tr*R+r])
		}
		for b := range means {
			means[b] /= float64(counts[b])
		}
		m := tuning.NewCondMean(B).(*tuning.CondMean)
		if err := m.Fit(counts, means); err != nil {
			t.Fatal(err)
		}
		bins := make([]int, len(test))
		for i, tr := range test {
			bins[i] = cond[tr]
		}
		p := make([]float64, len(test))
		m.PredictBins(p, bins)
		var gm float64
		for _, tr := range test {
			gm += float64(y[tr*R+r])
		}
		gm /= float64(len(test))
		for i := range test {
			pred[i*R+r] = p[i]
			constPred[i*R+r] = gm
		}
	}
	sc := make([]eval.Scores, R)
	eval.ScorePopulation(sc, y, R, test, cond, pred, B)
	for r, x := range sc {
		if math.Abs(x.CCNorm-1) > 1e-3 {
			t.Errorf("replicate %d: CC_norm %.6f, want 1 +- 1e-3", r, x.CCNorm)
		}
	}
	eval.ScorePopulation(sc, y, R, test, cond, constPred, B)
	for r, x := range sc {
		// 1e-9: MSE and Var[r] are the same sum computed two ways in float64.
		if math.Abs(x.FEV) > 1e-9 || math.Abs(x.TestR2) > 1e-9 {
			t.Errorf("replicate %d: constant prediction FEV %v, R2 %v, want 0", r, x.FEV, x.TestR2)
		}
		if !math.IsNaN(x.CCNorm) || !math.IsNaN(x.TestR) {
			t.Errorf("replicate %d: constant prediction should give NaN CC_norm and r", r)
		}
	}
}

// ExampleSummarize shows the median, quartiles and NaN count of a score column.
func ExampleSummarize() {
	s := eval.Summarize([]float64{0.2, math.NaN(), 0.5, 0.9, 0.4})
	fmt.Printf("median %.2f, IQR [%.3f, %.3f], %d neurons, %d NaN\n", s.Median, s.Q1, s.Q3, s.N, s.NaN)
	// Output: median 0.45, IQR [0.350, 0.600], 4 neurons, 1 NaN
}

// placePop simulates R place cells on a track of B bins with Poisson counts:
// rate 0.3 + peak exp(-(x - c)^2 / (2 w^2)) with the field centre c in the
// middle half of the track, so the end bins are nearly silent. Condition b
// has counts[b] trials. It returns the responses (T x R, condition-major),
// the conditions and the true rates (B x R).
func placePop(rng *rand.Rand, counts []int, R int) (y []float32, cond []int, rate []float64) {
	B := len(counts)
	rate = make([]float64, B*R)
	for r := 0; r < R; r++ {
		c := float64(B)/4 + rng.Float64()*float64(B)/2
		w := 1 + 2*rng.Float64()
		peak := 4 + 10*rng.Float64()
		for b := 0; b < B; b++ {
			d := float64(b) + 0.5 - c
			rate[b*R+r] = 0.3 + peak*math.Exp(-d*d/(2*w*w))
		}
	}
	for b, k := range counts {
		for i := 0; i < k; i++ {
			cond = append(cond, b)
		}
	}
	y = make([]float32, len(cond)*R)
	for t, b := range cond {
		for r := 0; r < R; r++ {
			y[t*R+r] = float32(poisson(rng, rate[b*R+r]))
		}
	}
	return y, cond, rate
}

// TestPerfectModelFEV: a model that predicts the true rates reaches FEV = 1
// on a recording whose rarely visited end bins (3 trials, against 12 in the
// middle) are nearly silent, so that their noise variance differs from the
// rest. Analytic expectation [derived here], per neuron, with sigma2_b the
// true (Poisson) noise variance = the rate, T trials, N_b per condition:
//
//	E[MSE of the true rates]  = sum_b N_b sigma2_b / T           (trial-weighted)
//	E[pooled sigma2_noise]    = sum_b (N_b - 1) sigma2_b / (T - B)
//	E[plain-mean sigma2]      = mean_b sigma2_b
//	E[Var[r]]                 = Sw + (1 - 1/T) sum_b N_b sigma2_b / T
//
// with Sw the trial-weighted variance of the true rates. FEV's expectation is
// taken as 1 - (E[MSE] - E[sigma2])/(E[Var[r]] - E[sigma2]) per neuron (the
// ratio's own bias is second order; the tolerance covers it), averaged over
// neurons. The pooled estimate (eval/methods.md §4) must give a mean FEV
// within 4 standard errors + 0.002 of that, and within 0.01 of 1: pooling
// weighs condition b by N_b - 1 where the MSE weighs it by N_b, so with
// Poisson noise (variance = rate) and silent rare conditions the pooled
// variance exceeds the perfect model's expected MSE a little and FEV comes
// out about 1.008 here (exactly 1 in expectation for equal noise variances).
// The plain mean over conditions (the previous estimator, about 0.94 here)
// and the trial-weighted sum_b N_b s2_b / T (unbiased for E[MSE] whatever
// the noise variances) are logged for comparison.
func TestPerfectModelFEV(t *testing.T) {
	const B, R = 20, 2000
	counts := make([]int, B)
	for b := range counts {
		counts[b] = 12
		if b < 3 || b >= B-3 {
			counts[b] = 3
		}
	}
	rng := rand.New(rand.NewPCG(5, 77))
	y, cond, rate := placePop(rng, counts, R)
	T := len(cond)
	trials := make([]int, T)
	pred := make([]float64, T*R)
	for i := range trials {
		trials[i] = i
		for r := 0; r < R; r++ {
			pred[i*R+r] = rate[cond[i]*R+r]
		}
	}
	sc := make([]eval.Scores, R)
	eval.ScorePopulation(sc, y, R, trials, cond, pred, B)

	var sumFEV, sumFEV2, sumPlain, sumTW, sumExp, sumExpPlain float64
	vars := make([]float64, B)
	means := make([]float64, B)
	for r := 0; r < R; r++ {
		sumFEV += sc[r].FEV
		sumFEV2 += sc[r].FEV * sc[r].FEV
		// The previous estimator: plain mean of the within-condition variances.
		clear(vars)
		clear(means)
		var mse, gm float64
		for i, c := range cond {
			v := float64(y[i*R+r])
			means[c] += v / float64(counts[c])
			gm += v / float64(T)
			mse += (v - rate[c*R+r]) * (v - rate[c*R+r]) / float64(T)
		}
		var vr float64
		for i, c := range cond {
			v := float64(y[i*R+r])
			vars[c] += (v - means[c]) * (v - means[c]) / float64(counts[c]-1)
			vr += (v - gm) * (v - gm) / float64(T)
		}
		plain, tw := 0.0, 0.0
		for b, v := range vars {
			plain += v / B
			tw += float64(counts[b]) * v / float64(T)
		}
		sumPlain += eval.FEV(mse, vr, plain)
		sumTW += eval.FEV(mse, vr, tw)
		// Expectations.
		var eMSE, ePooled, ePlain, mw float64
		for b, k := range counts {
			s2 := rate[b*R+r]
			eMSE += float64(k) * s2 / float64(T)
			ePooled += float64(k-1) * s2 / float64(T-B)
			ePlain += s2 / B
			mw += float64(k) * rate[b*R+r] / float64(T)
		}
		var sw float64
		for b, k := range counts {
			d := rate[b*R+r] - mw
			sw += float64(k) * d * d / float64(T)
		}
		eVar := sw + (1-1/float64(T))*eMSE
		sumExp += 1 - (eMSE-ePooled)/(eVar-ePooled)
		sumExpPlain += 1 - (eMSE-ePlain)/(eVar-ePlain)
	}
	m := sumFEV / R
	se := math.Sqrt((sumFEV2/R - m*m) / R)
	exp := sumExp / R
	t.Logf("perfect model, mean FEV over %d neurons: pooled noise %.4f (SE %.4f, expected %.4f); plain mean over conditions %.4f (expected %.4f); trial-weighted %.4f",
		R, m, se, exp, sumPlain/R, sumExpPlain/R, sumTW/R)
	if math.Abs(m-exp) > 4*se+0.002 {
		t.Errorf("mean FEV %.4f, expected %.4f (tol %.4f)", m, exp, 4*se+0.002)
	}
	if math.Abs(exp-1) > 0.01 || math.Abs(m-1) > 4*se+0.01 {
		t.Errorf("perfect model: mean FEV %.4f (expected %.4f), want 1 within 0.01", m, exp)
	}
}

// TestSignalPowerUnbiased: with 12 conditions and 2-4 held-out trials each
// (a typical test fold), SignalPower is unbiased for Var_b(s) (ddof 0) and
// the true curve as prediction has CC_norm near 1. Expectations [derived on
// SignalPower]: E[SP] = Var_b(s); the form without the (B-1)/B factor has
// E = Var_b(s) - mean_b(sigma2/N_b)/B. Gaussian noise, sigma known.
// Tolerance: 4 standard errors of the replicate mean.
func TestSignalPowerUnbiased(t *testing.T) {
	const B, R = 12, 4000
	rng := rand.New(rand.NewPCG(8, 9))
	s := make([]float64, B)
	for b := range s {
		s[b] = 2 + math.Cos(2*math.Pi*float64(b)/B)
	}
	vs := var0(s)
	sigma := 2.0
	counts := []int{2, 3, 4, 2, 3, 4, 2, 3, 4, 2, 3, 4}
	var cond []int
	for b, k := range counts {
		for i := 0; i < k; i++ {
			cond = append(cond, b)
		}
	}
	T := len(cond)
	y := make([]float32, T*R)
	trials := make([]int, T)
	pred := make([]float64, B*R)
	for i, c := range cond {
		trials[i] = i
		for r := 0; r < R; r++ {
			y[i*R+r] = float32(s[c] + sigma*rng.NormFloat64())
		}
	}
	for b := range s {
		for r := 0; r < R; r++ {
			pred[b*R+r] = s[b]
		}
	}
	sc := make([]eval.Scores, R)
	eval.ScoreConditions(sc, y, R, trials, cond, pred, B)
	var sum, sum2 float64
	for _, x := range sc {
		sum += x.SP
		sum2 += x.SP * x.SP
	}
	m := sum / R
	se := math.Sqrt((sum2/R - m*m) / R)
	noiseOfMeans := 0.0
	for _, k := range counts {
		noiseOfMeans += sigma * sigma / float64(k) / B
	}
	old := m - noiseOfMeans/B // the same replicates with the form without the factor
	t.Logf("B=%d, 2-4 trials per condition: mean SP %.4f (SE %.4f), Var_b(s) %.4f; without the (B-1)/B factor the mean would be %.4f (bias %.4f)",
		B, m, se, vs, old, -noiseOfMeans/B)
	if math.Abs(m-vs) > 4*se {
		t.Errorf("mean SP %.5f, want Var_b(s) = %.5f (tol %.5f)", m, vs, 4*se)
	}
}
