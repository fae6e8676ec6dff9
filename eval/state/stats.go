package state

import (
	"fmt"
	"math"
)

// Stats holds the sufficient statistics of the training trials for every fit
// of this package. With them a fit costs O(B K^2) per neuron whatever the
// number of trials; building them is the only pass over the trials.
//
// Shapes (B conditions, K covariates, N neurons, all row-major):
//
//	Count  B          N_b, training trials of condition b
//	S1     B x K      sum_{t in b} z_tk
//	S2     B x K x K  sum_{t in b} z_tk z_tl
//	Mean   B x N      ybar_bn, mean response of neuron n over condition b (0 if N_b = 0)
//	SSW    B x N      sum_{t in b} (y_tn - ybar_bn)^2
//	Cross  B x K x N  sum_{t in b} (y_tn - ybar_bn) z_tk, at (b*K+k)*N+n
//
// z are the standardised covariates (Standardizer). The responses enter only
// centred within their condition, so the objective computed from these sums
// (Objective) keeps its precision when the residuals are small against the
// responses themselves.
type Stats struct {
	B, K, N, W int
	Count      []float64
	S1, S2     []float64
	Mean, SSW  []float64
	Cross      []float64
}

// NewStats builds the statistics of the training trials.
//
// y is T x n row-major (responses as loaded, float32); z is T x k row-major
// (standardised covariates; k may be 0, and z nil, for statistics of the
// responses alone); cond[t] in [0, nbins) is the condition of row t; trials
// lists the training rows (0-based). It returns an error naming the trial
// and neuron of a NaN or infinite response, the trial and column of a NaN or
// infinite covariate, or a trial whose condition is outside [0, nbins). It
// panics on inconsistent shapes.
func NewStats(y []float32, n int, z []float64, k int, cond []int, nbins int, trials []int) (*Stats, error) {
	if n <= 0 || len(y)%n != 0 {
		panic("state: NewStats: len(y) is not a positive multiple of n")
	}
	T := len(y) / n
	if k < 0 || len(z) != T*k {
		panic("state: NewStats: len(z) != T*k")
	}
	if len(cond) < T {
		panic("state: NewStats: len(cond) < T")
	}
	if nbins <= 0 {
		panic("state: NewStats: nbins must be positive")
	}
	s := &Stats{B: nbins, K: k, N: n, W: len(trials),
		Count: make([]float64, nbins), S1: make([]float64, nbins*k), S2: make([]float64, nbins*k*k),
		Mean: make([]float64, nbins*n), SSW: make([]float64, nbins*n), Cross: make([]float64, nbins*k*n)}
	for _, t := range trials {
		if t < 0 || t >= T {
			return nil, fmt.Errorf("state: training trial %d (0-based) outside [0, %d)", t, T)
		}
		b := cond[t]
		if b < 0 || b >= nbins {
			return nil, fmt.Errorf("state: trial %d (0-based) has condition %d, outside [0, %d)", t, b, nbins)
		}
		zt := z[t*k : t*k+k]
		for i, v := range zt {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("state: covariate column %d (0-based) is %g at trial %d (0-based)", i, v, t)
			}
		}
		s.Count[b]++
		s1 := s.S1[b*k : b*k+k]
		s2 := s.S2[b*k*k : (b+1)*k*k]
		for i, zi := range zt {
			s1[i] += zi
			for j, zj := range zt {
				s2[i*k+j] += zi * zj
			}
		}
		m := s.Mean[b*n : b*n+n]
		for j, v := range y[t*n : t*n+n] {
			m[j] += float64(v)
		}
	}
	for b := 0; b < nbins; b++ {
		if s.Count[b] == 0 {
			continue
		}
		m := s.Mean[b*n : b*n+n]
		for j := range m {
			if math.IsNaN(m[j]) || math.IsInf(m[j], 0) {
				return nil, s.badResponse(y, n, cond, trials, b, j)
			}
			m[j] /= s.Count[b]
		}
	}
	// Second pass: centred within-condition sums.
	for _, t := range trials {
		b := cond[t]
		m := s.Mean[b*n : b*n+n]
		ssw := s.SSW[b*n : b*n+n]
		yt := y[t*n : t*n+n]
		for j, v := range yt {
			d := float64(v) - m[j]
			ssw[j] += d * d
		}
		for i := 0; i < k; i++ {
			zi := z[t*k+i]
			cr := s.Cross[(b*k+i)*n : (b*k+i+1)*n]
			for j, v := range yt {
				cr[j] += (float64(v) - m[j]) * zi
			}
		}
	}
	return s, nil
}

// badResponse finds the first non-finite response of neuron j in condition b.
func (s *Stats) badResponse(y []float32, n int, cond, trials []int, b, j int) error {
	for _, t := range trials {
		if cond[t] != b {
			continue
		}
		v := float64(y[t*n+j])
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("state: response of neuron %d (0-based) is %g at trial %d (0-based)", j, v, t)
		}
	}
	return fmt.Errorf("state: responses of neuron %d (0-based) in condition %d overflow", j, b)
}

// NoiseVariance writes into dst (length N) each neuron's pooled
// within-condition variance over the training trials,
//
//	sigma2_n = sum_b SSW_bn / sum_b (N_b - 1)   (conditions with N_b >= 2),
//
// the noise variance of eval/methods.md §4. It is NaN when no condition has
// two training trials. Note that it counts state-driven variance as noise.
func (s *Stats) NoiseVariance(dst []float64) {
	if len(dst) != s.N {
		panic("state: NoiseVariance: len(dst) != N")
	}
	var dof float64
	for _, c := range s.Count {
		if c >= 2 {
			dof += c - 1
		}
	}
	for j := range dst {
		var ss float64
		for b, c := range s.Count {
			if c >= 2 {
				ss += s.SSW[b*s.N+j]
			}
		}
		if dof > 0 {
			dst[j] = ss / dof
		} else {
			dst[j] = math.NaN()
		}
	}
}
