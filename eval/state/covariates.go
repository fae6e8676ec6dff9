package state

import (
	"fmt"
	"math"
)

// Covariates is a validated table of per-trial state covariates (running
// speed, pupil area, ...): Values is T x K row-major, Values[t*K+k] the value
// of covariate k (named Names[k]) on trial t. Build it with NewCovariates,
// which refuses bad values; code that already holds a checked T x K slice may
// fill the struct directly.
type Covariates struct {
	Names  []string
	T, K   int
	Values []float64
}

// CovariateError reports a covariate that cannot be used. Column is the
// covariate's name; Trial is the 0-based trial (row) of the first offending
// value, or -1 when the problem concerns the whole column; Count is how many
// trials share the problem.
type CovariateError struct {
	Column string
	Trial  int
	Count  int
	Reason string
}

func (e *CovariateError) Error() string {
	if e.Trial < 0 {
		return fmt.Sprintf("state: covariate %q: %s", e.Column, e.Reason)
	}
	more := ""
	if e.Count > 1 {
		more = fmt.Sprintf(" (%d trials in all)", e.Count)
	}
	return fmt.Sprintf("state: covariate %q: %s at trial %d (0-based)%s", e.Column, e.Reason, e.Trial, more)
}

// NewCovariates checks and stacks covariate columns into a T x K table.
//
// names[k] names column cols[k]; trials is the number of trials T of the
// responses the covariates belong to. It returns a *CovariateError (naming
// the column, and the first trial where there is one) when
//   - a name is empty or repeated, or len(names) != len(cols);
//   - a column's length differs from trials (wrong length);
//   - a value is NaN or infinite (the error names the first such trial and
//     counts the others);
//   - a column is constant over all trials (it carries no state information
//     and cannot be standardised).
//
// A column that varies over all trials but is constant over the training
// trials is refused later, by NewStandardizer. No column is dropped silently.
func NewCovariates(names []string, cols [][]float64, trials int) (*Covariates, error) {
	if len(names) != len(cols) {
		return nil, fmt.Errorf("state: %d covariate names for %d columns", len(names), len(cols))
	}
	if trials < 0 {
		return nil, fmt.Errorf("state: negative trial count %d", trials)
	}
	seen := map[string]bool{}
	for k, nm := range names {
		if nm == "" {
			return nil, &CovariateError{Column: fmt.Sprintf("#%d", k), Trial: -1, Reason: fmt.Sprintf("column %d (0-based) has an empty name", k)}
		}
		if seen[nm] {
			return nil, &CovariateError{Column: nm, Trial: -1, Reason: "name used twice"}
		}
		seen[nm] = true
	}
	K := len(cols)
	c := &Covariates{Names: append([]string(nil), names...), T: trials, K: K, Values: make([]float64, trials*K)}
	for k, col := range cols {
		if len(col) != trials {
			return nil, &CovariateError{Column: names[k], Trial: -1,
				Reason: fmt.Sprintf("has %d values, the responses have %d trials", len(col), trials)}
		}
		first, count := -1, 0
		for t, v := range col {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				if first < 0 {
					first = t
				}
				count++
			}
			c.Values[t*K+k] = v
		}
		if count > 0 {
			return nil, &CovariateError{Column: names[k], Trial: first, Count: count,
				Reason: fmt.Sprintf("value %g", col[first])}
		}
		if trials > 0 && isConstant(col) {
			return nil, &CovariateError{Column: names[k], Trial: -1,
				Reason: fmt.Sprintf("constant (%g) over all %d trials", col[0], trials)}
		}
	}
	return c, nil
}

func isConstant(x []float64) bool {
	for _, v := range x[1:] {
		if v != x[0] {
			return false
		}
	}
	return true
}

// Standardizer maps covariates to z-scores computed on the training trials:
//
//	z_tk = (c_tk - Mean[k]) / Scale[k],
//
// Mean[k] the mean and Scale[k] the standard deviation (ddof 0, the
// single-trial convention of eval/methods.md §0) of covariate k over the
// training trials only, so that no test trial informs the fit.
//
// Why: (1) centring makes the tuning f the response at the average training
// state, so the state-free stimulus fit and the state model describe the same
// f and the gain 1 + a.z is 1 on average; (2) scaling makes each gain a_k
// the fractional change of the stimulus-driven response per standard
// deviation of covariate k and each offset o_k the change of the response
// per standard deviation, comparable across covariates in different units
// (cm/s, mm^2); (3) the ridge (see FitAffine) then treats all covariates
// alike, and the normal equations are well conditioned. Raw maps fitted
// coefficients back to the covariates' own units.
type Standardizer struct {
	Names       []string
	Mean, Scale []float64
}

// NewStandardizer computes the training-trial mean and standard deviation of
// every covariate. trials lists the training rows (0-based). It returns a
// *CovariateError naming the column when a covariate is constant over the
// training trials (standard deviation 0), and an error when trials is empty
// or holds a row outside [0, c.T).
func NewStandardizer(c *Covariates, trials []int) (*Standardizer, error) {
	if len(trials) == 0 {
		return nil, fmt.Errorf("state: no training trials to standardise the covariates on")
	}
	K := c.K
	s := &Standardizer{Names: append([]string(nil), c.Names...), Mean: make([]float64, K), Scale: make([]float64, K)}
	for _, t := range trials {
		if t < 0 || t >= c.T {
			return nil, fmt.Errorf("state: training trial %d (0-based) outside [0, %d)", t, c.T)
		}
	}
	W := float64(len(trials))
	for k := 0; k < K; k++ {
		// Two passes: mean, then the centred sum of squares.
		var m float64
		for _, t := range trials {
			m += c.Values[t*K+k]
		}
		m /= W
		var ss float64
		for _, t := range trials {
			d := c.Values[t*K+k] - m
			ss += d * d
		}
		sd := math.Sqrt(ss / W)
		if !(sd > 0) || sd < 1e-12*math.Abs(m) {
			return nil, &CovariateError{Column: c.Names[k], Trial: -1,
				Reason: fmt.Sprintf("constant (%g) over the %d training trials; it cannot be standardised", m, len(trials))}
		}
		s.Mean[k], s.Scale[k] = m, sd
	}
	return s, nil
}

// Apply writes the z-scores of every trial of c into dst (T x K row-major).
// It panics if len(dst) != c.T*c.K or c.K differs from the standardizer's.
func (s *Standardizer) Apply(dst []float64, c *Covariates) {
	if c.K != len(s.Mean) {
		panic("state: Standardizer.Apply: covariate count differs from the standardizer's")
	}
	if len(dst) != c.T*c.K {
		panic("state: Standardizer.Apply: len(dst) != T*K")
	}
	K := c.K
	for t := 0; t < c.T; t++ {
		for k := 0; k < K; k++ {
			dst[t*K+k] = (c.Values[t*K+k] - s.Mean[k]) / s.Scale[k]
		}
	}
}

// RawParams are the state terms in the covariates' own units. For neuron n
// the fitted model reads
//
//	y_tn = (Base[n] + sum_k Gain[n*K+k] c_tk) f_n(s_t) + sum_k Offset[n*K+k] c_tk + Bias[n]
//
// with raw covariate values c_tk. Base is the gain at c = 0 (for running
// speed: standing still), Gain the change of gain per unit of covariate (per
// cm/s, ...), Offset the change of response per unit, Bias the offset at
// c = 0.
type RawParams struct {
	N, K                     int
	Base, Gain, Offset, Bias []float64
}

// Raw maps standardised coefficients back to raw units: with z_k =
// (c_k - m_k) / s_k,
//
//	Gain_k = a_k / s_k,  Base = 1 - sum_k a_k m_k / s_k,
//	Offset_k = o_k / s_k,  Bias = b - sum_k o_k m_k / s_k [derived].
//
// NaN coefficients (a neuron whose fit failed) stay NaN. It panics if p.K
// differs from the standardizer's covariate count.
func (s *Standardizer) Raw(p *Params) *RawParams {
	K := len(s.Mean)
	if p.K != K {
		panic("state: Standardizer.Raw: covariate count differs")
	}
	r := &RawParams{N: p.N, K: K, Base: make([]float64, p.N), Gain: make([]float64, p.N*K),
		Offset: make([]float64, p.N*K), Bias: make([]float64, p.N)}
	for n := 0; n < p.N; n++ {
		base, bias := 1.0, p.Bias[n]
		for k := 0; k < K; k++ {
			a, o := p.Gain[n*K+k], p.Offset[n*K+k]
			r.Gain[n*K+k] = a / s.Scale[k]
			r.Offset[n*K+k] = o / s.Scale[k]
			base -= a * s.Mean[k] / s.Scale[k]
			bias -= o * s.Mean[k] / s.Scale[k]
		}
		r.Base[n], r.Bias[n] = base, bias
	}
	return r
}

// DefaultShareThreshold is the condition share (eta squared) of a covariate
// above which StimulusLinked warns: 0.1 lies between what is usually called
// a medium (0.06) and a large (0.14) effect [practice; the benchmarks are
// Cohen's, from memory].
const DefaultShareThreshold = 0.1

// ConditionShare writes into dst (length K) the share of each covariate's
// variance over the given trials that the stimulus condition explains, eta
// squared of a one-way ANOVA [practice]:
//
//	eta2_k = sum_b N_b (cbar_bk - cbar_k)^2 / sum_t (c_tk - cbar_k)^2,
//
// cbar_bk the mean over the trials of condition b, cbar_k over all of them.
// 0 means the covariate is unrelated to the condition on average, 1 that it
// is a function of the condition. Even an unrelated covariate gives a
// positive value: with B non-empty conditions and M trials its expectation
// is about (B - 1) / (M - 1) (see NullShare). A constant covariate gives
// NaN. It panics on shape errors or a condition outside [0, nbins).
func ConditionShare(dst []float64, c *Covariates, cond []int, nbins int, trials []int) {
	K := c.K
	if len(dst) != K {
		panic("state: ConditionShare: len(dst) != K")
	}
	sum := make([]float64, nbins)
	cnt := make([]float64, nbins)
	for k := 0; k < K; k++ {
		clear(sum)
		clear(cnt)
		var m float64
		for _, t := range trials {
			b := cond[t]
			if b < 0 || b >= nbins {
				panic(fmt.Sprintf("state: ConditionShare: trial %d (0-based) has condition %d outside [0, %d)", t, b, nbins))
			}
			v := c.Values[t*K+k]
			sum[b] += v
			cnt[b]++
			m += v
		}
		m /= float64(len(trials))
		var tot, between float64
		for _, t := range trials {
			d := c.Values[t*K+k] - m
			tot += d * d
		}
		for b := range sum {
			if cnt[b] > 0 {
				d := sum[b]/cnt[b] - m
				between += cnt[b] * d * d
			}
		}
		if tot > 0 {
			dst[k] = between / tot
		} else {
			dst[k] = math.NaN()
		}
	}
}

// NullShare is the expected condition share of a covariate unrelated to the
// condition, (B - 1) / (M - 1) for B non-empty conditions and M trials
// [derived: for Gaussian values the ratio is Beta((B-1)/2, (M-B)/2)].
func NullShare(nonEmpty, trials int) float64 {
	if trials < 2 {
		return math.NaN()
	}
	return float64(nonEmpty-1) / float64(trials-1)
}

// Link is one covariate's link to the stimulus condition: Share its eta
// squared (ConditionShare), Null the share expected by chance (NullShare).
type Link struct {
	Name        string
	Share, Null float64
}

// StimulusLinked returns the covariates whose condition share on the given
// trials exceeds threshold (use DefaultShareThreshold unless the user set
// one), in column order; nil when none does. Such a covariate can take over
// stimulus-driven variance: its state terms are fitted partly on differences
// between conditions, which the tuning f should explain (see the package
// documentation). Callers print a warning naming each returned covariate.
func StimulusLinked(c *Covariates, cond []int, nbins int, trials []int, threshold float64) []Link {
	share := make([]float64, c.K)
	ConditionShare(share, c, cond, nbins, trials)
	seen := make([]bool, nbins)
	nonEmpty := 0
	for _, t := range trials {
		if !seen[cond[t]] {
			seen[cond[t]] = true
			nonEmpty++
		}
	}
	null := NullShare(nonEmpty, len(trials))
	var out []Link
	for k, s := range share {
		if s > threshold {
			out = append(out, Link{Name: c.Names[k], Share: s, Null: null})
		}
	}
	return out
}
