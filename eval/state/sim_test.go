package state

import (
	"fmt"
	"math"
	"testing"

	"github.com/strialab/stria/eval"
)

// simSplit holds out every fifth repeat of each condition (8 of 40).
func simSplit(s *Sim) (train, test []int) {
	B := s.Config.Conditions
	for t := range s.Cond {
		if (t/B)%5 == 4 {
			test = append(test, t)
		} else {
			train = append(train, t)
		}
	}
	return train, test
}

// speedFit fits the running-speed model of a simulation with the tuning
// held at the training condition means and scores it on the test trials.
func speedFit(t testing.TB, s *Sim, train, test []int, ridge float64) (*Standardizer, *Params, []HeldOut) {
	t.Helper()
	T, N, B := len(s.Cond), s.Config.Neurons, s.Config.Conditions
	cov, err := NewCovariates([]string{"speed"}, [][]float64{s.Speed}, T)
	if err != nil {
		t.Fatal(err)
	}
	sc, err := NewStandardizer(cov, train)
	if err != nil {
		t.Fatal(err)
	}
	z := make([]float64, T)
	sc.Apply(z, cov)
	st, err := NewStats(s.Y, N, z, 1, s.Cond, B, train)
	if err != nil {
		t.Fatal(err)
	}
	f := st.Mean
	p := FitAffine(st, f, ridge)
	if bad := p.Failed(); len(bad) > 0 {
		t.Fatalf("neurons %v not fitted", bad)
	}
	pred := make([]float64, len(test)*N)
	Predict(pred, p, f, z, s.Cond, test)
	h := make([]HeldOut, N)
	ScoreHeldOut(h, s.Y, N, s.Cond, test, f, pred)
	return sc, p, h
}

// predictedDelta is the held-out R^2 that running speed should add to
// neuron n [derived from Sim.Predict]: the speed term's variance S = E_s[(a
// f + o)^2] E[z^2] enters Var(y) = V, and the test set realises E[z^2] as q
// (its mean of z^2), so the gain is q S / (V - S + q S); fitting p = 3 more
// parameters on W training trials costs about p (1 - R^2_state) / W of
// held-out R^2 (the excess test error of least squares, [practice]).
func predictedDelta(pr Predicted, q float64, W int) float64 {
	S := pr.Speed * pr.Total
	V := pr.Total - S + q*S
	return q*S/V - 3*(1-pr.Stim-pr.Speed)/float64(W)
}

func testZ2(s *Sim, test []int) float64 {
	var q float64
	for _, t := range test {
		z := (s.Speed[t] - s.SpeedMean) / s.SpeedSD
		q += z * z
	}
	return q / float64(len(test))
}

// TestSimRecovery: the running-speed gains and offsets recovered by
// FitAffine, mapped back to raw units, correlate with the planted ones
// above 0.9 (task requirement) at Poisson-like noise, with the unobserved
// latent gain left in the residual.
func TestSimRecovery(t *testing.T) {
	for _, seed := range []uint64{1, 2} {
		t.Run(fmt.Sprint("seed", seed), func(t *testing.T) {
			cfg := DefaultSim()
			cfg.Seed = seed
			s := Simulate(cfg)
			train, test := simSplit(s)
			sc, p, _ := speedFit(t, s, train, test, 0)
			raw := sc.Raw(p)
			N := cfg.Neurons
			aT, oT := make([]float64, N), make([]float64, N)
			for n := 0; n < N; n++ {
				aT[n] = s.GainPerSD[n] / s.SpeedSD
				oT[n] = s.OffsetPerSD[n] / s.SpeedSD
			}
			ra, ro := eval.Pearson(aT, raw.Gain), eval.Pearson(oT, raw.Offset)
			t.Logf("correlation with planted: gain %.4f, offset %.4f", ra, ro)
			if ra < 0.9 || ro < 0.9 {
				t.Errorf("got correlations gain %.4f offset %.4f, want both > 0.9", ra, ro)
			}
		})
	}
}

// TestSimHeldOutGain: the held-out R^2 added by running speed matches the
// amount predicted from the simulation's variances (predictedDelta),
// averaged over neurons. Tolerance 0.025: three times the standard
// deviation (0.008) of the difference across 30 seeds, measured once
// (the 200 neurons share the same test trials, so their errors do not
// average out).
func TestSimHeldOutGain(t *testing.T) {
	cfg := DefaultSim()
	cfg.Seed = 1
	s := Simulate(cfg)
	train, test := simSplit(s)
	_, _, h := speedFit(t, s, train, test, 0)
	N := cfg.Neurons
	pr := make([]Predicted, N)
	s.Predict(pr)
	q := testZ2(s, test)
	want, got := make([]float64, N), make([]float64, N)
	var mw, mg float64
	for n := range pr {
		want[n] = predictedDelta(pr[n], q, len(train))
		got[n] = h[n].Delta
		mw += want[n]
		mg += got[n]
	}
	mw /= float64(N)
	mg /= float64(N)
	r := eval.Pearson(want, got)
	t.Logf("mean held-out R^2 gain: got %.4f want %.4f (q = %.3f); per-neuron correlation %.3f", mg, mw, q, r)
	if math.Abs(mg-mw) > 0.025 {
		t.Errorf("got mean R^2 gain %.4f, want %.4f +- 0.025", mg, mw)
	}
	if r < 0.9 {
		t.Errorf("got per-neuron correlation of predicted and measured gains %.3f, want > 0.9", r)
	}
}

func neuronIDs(n int) []string {
	ids := make([]string, n)
	for i := range ids {
		ids[i] = fmt.Sprintf("cell%04d", i)
	}
	return ids
}

// crossSim runs CrossGain on a simulation with the training condition means
// as tuning.
func crossSim(t testing.TB, s *Sim, opt CrossOptions) (*CrossResult, []int, []int) {
	t.Helper()
	N, B := s.Config.Neurons, s.Config.Conditions
	train, test := simSplit(s)
	half, err := SplitHalves(neuronIDs(N), 11)
	if err != nil {
		t.Fatal(err)
	}
	st, err := NewStats(s.Y, N, nil, 0, s.Cond, B, train)
	if err != nil {
		t.Fatal(err)
	}
	res, err := CrossGain(s.Y, N, st.Mean, s.Cond, B, train, test, half, opt)
	if err != nil {
		t.Fatal(err)
	}
	return res, train, test
}

// TestSimSharedGain: the per-trial gain read from one half of the
// population correlates with the planted shared gain (Sim.SharedGain) above
// 0.9 with enough neurons (task requirement; 100 per half here), and less
// with few. The held-out R^2 the shared terms add is positive for most
// neurons and at most what knowing speed and the latent gain exactly would
// add (Sim.Predict: Speed + Latent), within the 0.025 tolerance of
// TestSimHeldOutGain.
func TestSimSharedGain(t *testing.T) {
	for _, tc := range []struct {
		neurons int
		minCorr float64
	}{
		{20, 0.6},
		{200, 0.9},
	} {
		t.Run(fmt.Sprint(tc.neurons, " neurons"), func(t *testing.T) {
			cfg := DefaultSim()
			cfg.Neurons, cfg.Seed = tc.neurons, 7
			s := Simulate(cfg)
			res, _, test := crossSim(t, s, CrossOptions{})
			T := len(s.Cond)
			g := make([]float64, T)
			s.SharedGain(g)
			ca, cb := eval.Pearson(res.FromA, g), eval.Pearson(res.FromB, g)
			pr := make([]Predicted, tc.neurons)
			s.Predict(pr)
			var most float64
			q := testZ2(s, test)
			for _, p := range pr {
				most += (q*p.Speed*p.Total + p.Latent*p.Total) / (p.Total + (q-1)*p.Speed*p.Total)
			}
			most /= float64(tc.neurons)
			sum := SummarizeGain(res.Scores)
			t.Logf("correlation with the planted gain: from A %.3f, from B %.3f; held-out R^2 gain mean %.4f median %.4f (at most %.4f), positive for %.0f%%",
				ca, cb, sum.MeanDelta, sum.Delta.Median, most, 100*sum.FracPositive)
			if ca < tc.minCorr || cb < tc.minCorr {
				t.Errorf("got correlations %.3f and %.3f, want > %v", ca, cb, tc.minCorr)
			}
			if sum.MeanDelta > most+0.025 || sum.FracPositive < 0.8 {
				t.Errorf("got mean R^2 gain %.4f (want <= %.4f + 0.025), positive for %.2f (want >= 0.8)", sum.MeanDelta, most, sum.FracPositive)
			}
		})
	}
}

// TestSimBeyondCeiling: the shared-gain model beats the stimulus-only noise
// ceiling (the explainable fraction of eval/methods.md §4, which counts
// state-driven variance as noise) for most neurons, as the package
// documentation states. The stimulus-only model passes its own ceiling for
// about half the neurons, as an unbiased estimate near a true value should.
func TestSimBeyondCeiling(t *testing.T) {
	cfg := DefaultSim()
	cfg.Seed = 5
	s := Simulate(cfg)
	res, _, test := crossSim(t, s, CrossOptions{})
	N := cfg.Neurons
	pred := make([]float64, len(test)*N)
	copy(pred, res.Pred)
	sc := make([]eval.Scores, N)
	eval.ScorePopulation(sc, s.Y, N, test, s.Cond, pred, cfg.Conditions)
	above, stimAbove := 0, 0
	for n := range sc {
		if res.Scores[n].R2State > sc[n].ExplainableFraction {
			above++
		}
		if res.Scores[n].R2Stim > sc[n].ExplainableFraction {
			stimAbove++
		}
	}
	t.Logf("R^2 above the explainable fraction: state model %d of %d neurons, stimulus-only %d", above, N, stimAbove)
	if above < 3*N/4 || above <= stimAbove {
		t.Errorf("got %d of %d neurons above the ceiling (stimulus-only %d), want at least three quarters and more than stimulus-only", above, N, stimAbove)
	}
}

// TestSimStimulusLinkedBias: when running follows the stimulus (SpeedLink
// 0.9, condition share about 0.3), the fixed-tuning fit loses part of the
// speed effect to the tuning: the recovered gains shrink and correlate less
// with the planted ones, and StimulusLinked warns. This is the caution of
// the package documentation, measured.
func TestSimStimulusLinkedBias(t *testing.T) {
	type out struct{ corr, meanFit, meanTrue float64 }
	run := func(link float64) (out, []Link) {
		cfg := DefaultSim()
		cfg.Seed, cfg.SpeedLink = 1, link
		s := Simulate(cfg)
		train, test := simSplit(s)
		sc, p, _ := speedFit(t, s, train, test, 0)
		raw := sc.Raw(p)
		N := cfg.Neurons
		aT := make([]float64, N)
		var o out
		for n := range aT {
			aT[n] = s.GainPerSD[n] / s.SpeedSD
			o.meanTrue += aT[n] / float64(N)
			o.meanFit += raw.Gain[n] / float64(N)
		}
		o.corr = eval.Pearson(aT, raw.Gain)
		cov := &Covariates{Names: []string{"speed"}, T: len(s.Cond), K: 1, Values: s.Speed}
		return o, StimulusLinked(cov, s.Cond, cfg.Conditions, train, DefaultShareThreshold)
	}
	free, lf := run(0)
	tied, lt := run(0.9)
	t.Logf("independent: corr %.3f, mean gain %.4f (planted %.4f); tied: corr %.3f, mean gain %.4f (planted %.4f), share %.3f",
		free.corr, free.meanFit, free.meanTrue, tied.corr, tied.meanFit, tied.meanTrue, lt[0].Share)
	if len(lf) != 0 || len(lt) != 1 {
		t.Fatalf("got warnings %v (independent) and %v (tied), want none and one", lf, lt)
	}
	if !(tied.corr < free.corr-0.1) || !(tied.meanFit < 0.8*tied.meanTrue) {
		t.Errorf("tied speed: got corr %.3f (independent %.3f) and mean gain %.4f of planted %.4f, want a clear loss", tied.corr, free.corr, tied.meanFit, tied.meanTrue)
	}
}

// TestSimFreeUnbiased: with the tuning fixed at the training condition
// means, the chance between-condition part of running speed carries no
// signal (the means absorbed it), so FitAffine's gains shrink, by about the
// covariate's condition share and more; FitFree, which fits tuning and state
// terms together, does not shrink them. Mean ratio of fitted to planted
// mean gain over 10 seeds: FitFree within 3% of 1 (measured 1.001 over 20
// seeds), FitAffine below FitFree (measured 0.927).
func TestSimFreeUnbiased(t *testing.T) {
	const S = 10
	var fixed, free float64
	for seed := uint64(1); seed <= S; seed++ {
		cfg := DefaultSim()
		cfg.Seed = seed
		s := Simulate(cfg)
		train, test := simSplit(s)
		sc, p, _ := speedFit(t, s, train, test, 0)
		cov := &Covariates{Names: []string{"speed"}, T: len(s.Cond), K: 1, Values: s.Speed}
		z := make([]float64, len(s.Cond))
		sc.Apply(z, cov)
		st, err := NewStats(s.Y, cfg.Neurons, z, 1, s.Cond, cfg.Conditions, train)
		if err != nil {
			t.Fatal(err)
		}
		fit := FitFree(st, st.Mean, FreeOptions{})
		if !fit.Converged() {
			t.Fatalf("seed %d: FitFree did not converge", seed)
		}
		rawFixed, rawFree := sc.Raw(p), sc.Raw(fit.Params)
		var mt, mf, mff float64
		for n := range rawFixed.Gain {
			mt += s.GainPerSD[n] / s.SpeedSD
			mf += rawFixed.Gain[n]
			mff += rawFree.Gain[n]
		}
		fixed += mf / mt / S
		free += mff / mt / S
	}
	t.Logf("fitted / planted mean gain: fixed tuning %.4f, free tuning %.4f", fixed, free)
	if math.Abs(free-1) > 0.03 || fixed >= free {
		t.Errorf("got ratios %.4f (fixed) and %.4f (free), want free within 0.03 of 1 and fixed below it", fixed, free)
	}
}
