package state

import (
	"encoding/binary"
	"fmt"
	"hash/fnv"
	"math"
	"sort"
)

// SplitHalves deals the neurons into two halves by identity: half[n] is true
// for half A. Each id is hashed (64-bit FNV-1a of the seed's 8 bytes followed
// by the id); the neurons sorted by hash (ties by id) fill half A with the
// first ceil(N/2) and half B with the rest. The split therefore depends only
// on the seed and the set of ids, not on the column order of the neurons,
// and the halves differ in size by at most one. It returns an error for an
// empty or repeated id.
func SplitHalves(ids []string, seed uint64) ([]bool, error) {
	type key struct {
		h  uint64
		id string
		n  int
	}
	keys := make([]key, len(ids))
	seen := make(map[string]int, len(ids))
	var sb [8]byte
	binary.LittleEndian.PutUint64(sb[:], seed)
	for n, id := range ids {
		if id == "" {
			return nil, fmt.Errorf("state: neuron %d (0-based) has an empty id", n)
		}
		if m, ok := seen[id]; ok {
			return nil, fmt.Errorf("state: neurons %d and %d (0-based) share the id %q", m, n, id)
		}
		seen[id] = n
		h := fnv.New64a()
		h.Write(sb[:])
		h.Write([]byte(id))
		keys[n] = key{h.Sum64(), id, n}
	}
	sort.Slice(keys, func(i, j int) bool {
		if keys[i].h != keys[j].h {
			return keys[i].h < keys[j].h
		}
		return keys[i].id < keys[j].id
	})
	half := make([]bool, len(ids))
	for i, k := range keys {
		half[k.n] = i < (len(ids)+1)/2
	}
	return half, nil
}

// PopulationState estimates, for every trial, the shared state of a group of
// neurons from their responses alone. dst is T x P row-major, P = 1 (gain
// only) or P = 2 (gain and offset, additive = true). use[n] selects the
// neurons of the group, w[n] >= 0 weights them (see NoiseWeights); f is B x N
// (the stimulus tuning, fitted on training trials), cond[t] the condition of
// row t.
//
// Trial t is fitted by weighted least squares over the group, with
// r_tn = y_tn - f_n(s_t):
//
//	gain only:       minimise sum_n w_n (r_tn - alpha_t f_n(s_t))^2,
//	                 alpha_t = sum_n w_n f_n r_tn / sum_n w_n f_n^2;
//	gain and offset: minimise sum_n w_n (r_tn - alpha_t f_n(s_t) - beta_t)^2,
//	                 a 2 x 2 system [derived: normal equations].
//
// The trial's population gain is 1 + alpha_t (alpha_t is written), beta_t the
// shared additive offset in response units. With w_n = 1 / sigma2_n (the
// inverse noise variance) this is the Gauss-Markov (minimum-variance linear
// unbiased) estimate for independent noise of unequal variance [pub:
// Aitken's generalised least squares, textbook]; for Poisson-like noise,
// sigma2_n proportional to f_n, the gain-only estimate becomes
// sum_n r_tn / sum_n f_n, the ratio of summed residuals to summed tuning,
// which is the maximum-likelihood gain of Poisson counts y_tn ~ Poisson(g_t
// f_n) [derived]. Plain least squares (w = 1) lets the neurons with the
// largest responses dominate.
//
// It returns an error naming the trial when the group's system is singular
// on that trial (every selected neuron has f = 0 or weight 0 there; for the
// offset form, also when all selected f are equal), and naming trial and
// neuron for a NaN or infinite response. It panics on shape mismatches.
func PopulationState(dst []float64, y []float32, n int, f []float64, cond []int, use []bool, w []float64, additive bool) error {
	if n <= 0 || len(y)%n != 0 || len(f)%n != 0 || len(use) != n || len(w) != len(f) {
		panic("state: PopulationState: shape mismatch")
	}
	T := len(y) / n
	B := len(f) / n
	P := 1
	if additive {
		P = 2
	}
	if len(dst) != T*P || len(cond) < T {
		panic("state: PopulationState: shape mismatch")
	}
	for t := 0; t < T; t++ {
		b := cond[t]
		if b < 0 || b >= B {
			return fmt.Errorf("state: trial %d (0-based) has condition %d, outside [0, %d)", t, b, B)
		}
		fb := f[b*n : b*n+n]
		wb := w[b*n : b*n+n]
		var sff, sf, s1, sfr, sr float64
		for j, v := range y[t*n : t*n+n] {
			if !use[j] || wb[j] == 0 {
				continue
			}
			yv := float64(v)
			if math.IsNaN(yv) || math.IsInf(yv, 0) {
				return fmt.Errorf("state: response of neuron %d (0-based) is %g at trial %d (0-based)", j, yv, t)
			}
			r := yv - fb[j]
			wf := wb[j] * fb[j]
			sff += wf * fb[j]
			sf += wf
			s1 += wb[j]
			sfr += wf * r
			sr += wb[j] * r
		}
		if !additive {
			if !(sff > 0) {
				return fmt.Errorf("state: trial %d (0-based): no neuron of the group has a nonzero tuning value and weight in condition %d", t, b)
			}
			dst[t] = sfr / sff
			continue
		}
		det := sff*s1 - sf*sf
		if !(det > 1e-12*sff*s1) {
			return fmt.Errorf("state: trial %d (0-based): gain and offset cannot be separated in condition %d (the group's tuning values are all equal or zero)", t, b)
		}
		dst[2*t] = (s1*sfr - sf*sr) / det
		dst[2*t+1] = (sff*sr - sf*sfr) / det
	}
	return nil
}

// Weighting chooses how PopulationState weights the neurons of a group.
type Weighting uint8

const (
	// WeightRate weights neuron n in condition b by 1 / f_bn (0 where
	// f_bn <= 0): the right weights for Poisson-like noise, whose variance
	// grows with the rate, and then the gain-only estimate is the ratio of
	// summed residuals to summed tuning, the Poisson maximum-likelihood gain
	// (see PopulationState). It needs responses on a rate or count scale.
	WeightRate Weighting = iota
	// WeightNoise weights neuron n by 1 / sigma2_n, its pooled
	// within-condition variance on the training trials (eval/methods.md §4).
	// That variance includes the shared state's own contribution, which
	// grows with f^2, so it down-weights strongly driven neurons more than
	// their private noise warrants; use it for responses that are not rates
	// (z-scored, deconvolved with negative values).
	WeightNoise
	// WeightUniform: plain least squares; the most strongly driven neurons
	// dominate.
	WeightUniform
)

func (w Weighting) String() string {
	switch w {
	case WeightRate:
		return "rate"
	case WeightNoise:
		return "noise"
	case WeightUniform:
		return "uniform"
	}
	return fmt.Sprintf("Weighting(%d)", uint8(w))
}

// Weights writes the B x N weights of PopulationState into dst, from the
// tuning f (B x N) and the training statistics st. It returns the 0-based
// neurons that get weight 0 in every condition (zero or undefined noise
// variance, or no positive tuning value), so the caller can report them.
func Weights(dst []float64, st *Stats, f []float64, kind Weighting) (leftOut []int) {
	B, N := st.B, st.N
	if len(dst) != B*N || len(f) != B*N {
		panic("state: Weights: shape mismatch")
	}
	var sig []float64
	if kind == WeightNoise {
		sig = make([]float64, N)
		st.NoiseVariance(sig)
	}
	for j := 0; j < N; j++ {
		any := false
		for b := 0; b < B; b++ {
			var w float64
			switch kind {
			case WeightRate:
				if fb := f[b*N+j]; fb > 0 {
					w = 1 / fb
				}
			case WeightNoise:
				if v := sig[j]; v > 0 && !math.IsInf(v, 0) {
					w = 1 / v
				}
			case WeightUniform:
				w = 1
			default:
				panic("state: Weights: unknown weighting")
			}
			dst[b*N+j] = w
			any = any || w > 0
		}
		if !any {
			leftOut = append(leftOut, j)
		}
	}
	return leftOut
}

// CrossOptions control CrossGain.
type CrossOptions struct {
	Additive  bool      // estimate a shared offset beside the shared gain
	Ridge     float64   // ridge of the per-neuron coupling fit (FitAffine)
	Weighting Weighting // weights of the neurons in PopulationState (default WeightRate)
}

// CrossResult is the outcome of CrossGain. Per-neuron slices are in the
// neurons' column order.
type CrossResult struct {
	P int // shared terms per trial: 1 (gain) or 2 (gain, offset)
	// FromA and FromB (T x P) are the per-trial shared terms (alpha_t, beta_t
	// of PopulationState) estimated from half A and from half B; half A's
	// neurons are predicted with FromB and the other way round.
	FromA, FromB []float64
	Half         []bool           // half[n]: neuron n in half A
	Params       *Params          // per-neuron coupling to the other half's terms, standardised (see Scale)
	Scale        [2]*Standardizer // [0] standardises FromB (for half A), [1] FromA (for half B)
	Scores       []HeldOut        // held-out scores, stimulus-only and with the shared terms
	Pred         []float64        // M x N prediction of the test trials, row i for test[i]
	LeftOut      []int            // neurons with weight 0 everywhere, left out of the estimates (still scored)
}

// CrossGain scores how much of each neuron's held-out variance a shared
// state read from the rest of the population explains, with no covariate
// file. The neurons are split into halves A and B (half, e.g. from
// SplitHalves). For every trial, PopulationState estimates the shared gain
// (and offset) from half B; these per-trial terms, standardised on the
// training trials, are the covariates of half A's neurons in FitAffine
// (fitted on the training trials, tuning f held fixed), and the fitted model
// predicts half A's test trials from half B's responses on those same
// trials. Half B is scored the same way with the terms from half A. So no
// neuron's own test response informs its prediction: its coupling comes
// from training trials, and the test-trial state from the other half.
//
// y is T x N (float32, as loaded), cond[t] the condition of row t, f the
// B x N stimulus tuning fitted on the training trials (train), test the
// held-out rows. opt.Weighting picks the weights (Weights).
//
// Why the score can pass the noise ceiling: the explainable fraction of
// eval/methods.md §4 counts all within-condition variance as noise, and the
// state-driven part of it is predictable from the other neurons. A stimulus
// model cannot beat the ceiling; this one can, and a FEV above 1 is then
// expected rather than a fault. Report its R^2, not its FEV.
//
// Errors: those of NewStats and PopulationState, and a *CovariateError when
// a half's shared term is constant over the training trials. Panics on shape
// mismatches.
func CrossGain(y []float32, n int, f []float64, cond []int, nbins int, train, test []int, half []bool, opt CrossOptions) (*CrossResult, error) {
	if n <= 0 || len(y)%n != 0 || len(f) != nbins*n || len(half) != n {
		panic("state: CrossGain: shape mismatch")
	}
	T := len(y) / n
	st0, err := NewStats(y, n, nil, 0, cond, nbins, train)
	if err != nil {
		return nil, err
	}
	w := make([]float64, nbins*n)
	res := &CrossResult{P: 1, Half: append([]bool(nil), half...)}
	res.LeftOut = Weights(w, st0, f, opt.Weighting)
	if opt.Additive {
		res.P = 2
	}
	P := res.P
	res.FromA = make([]float64, T*P)
	res.FromB = make([]float64, T*P)
	inB := make([]bool, n)
	for j, a := range half {
		inB[j] = !a
	}
	if err := PopulationState(res.FromA, y, n, f, cond, half, w, opt.Additive); err != nil {
		return nil, fmt.Errorf("half A: %w", err)
	}
	if err := PopulationState(res.FromB, y, n, f, cond, inB, w, opt.Additive); err != nil {
		return nil, fmt.Errorf("half B: %w", err)
	}
	names := []string{"population_gain", "population_offset"}[:P]
	res.Params = newParams(n, P, true)
	res.Scores = make([]HeldOut, n)
	res.Pred = make([]float64, len(test)*n)
	for side := 0; side < 2; side++ {
		// side 0: half A's neurons, predicted from half B's terms.
		est := res.FromB
		label := "half B"
		if side == 1 {
			est, label = res.FromA, "half A"
		}
		var cols []int
		for j, a := range half {
			if a == (side == 0) {
				cols = append(cols, j)
			}
		}
		if len(cols) == 0 {
			continue
		}
		cov := &Covariates{Names: names, T: T, K: P, Values: est}
		sc, err := NewStandardizer(cov, train)
		if err != nil {
			return nil, fmt.Errorf("shared terms from %s: %w", label, err)
		}
		res.Scale[side] = sc
		z := make([]float64, T*P)
		sc.Apply(z, cov)
		m := len(cols)
		ys := make([]float32, T*m)
		fs := make([]float64, nbins*m)
		for t := 0; t < T; t++ {
			for i, j := range cols {
				ys[t*m+i] = y[t*n+j]
			}
		}
		for b := 0; b < nbins; b++ {
			for i, j := range cols {
				fs[b*m+i] = f[b*n+j]
			}
		}
		st, err := NewStats(ys, m, z, P, cond, nbins, train)
		if err != nil {
			return nil, err
		}
		p := FitAffine(st, fs, opt.Ridge)
		pred := make([]float64, len(test)*m)
		Predict(pred, p, fs, z, cond, test)
		sco := make([]HeldOut, m)
		ScoreHeldOut(sco, ys, m, cond, test, fs, pred)
		for i, j := range cols {
			for r := range test {
				res.Pred[r*n+j] = pred[r*m+i]
			}
			res.Scores[j] = sco[i]
			copy(res.Params.Gain[j*P:j*P+P], p.Gain[i*P:i*P+P])
			copy(res.Params.Offset[j*P:j*P+P], p.Offset[i*P:i*P+P])
			copy(res.Params.Penalty[j*2*P:(j+1)*2*P], p.Penalty[i*2*P:(i+1)*2*P])
			res.Params.Bias[j] = p.Bias[i]
			res.Params.Status[j] = p.Status[i]
		}
	}
	return res, nil
}
