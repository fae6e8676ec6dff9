package state

import (
	"math"
	"math/rand/v2"
)

// SimConfig describes a synthetic population with planted state effects
// (see Simulate). DefaultSim gives realistic values.
type SimConfig struct {
	Neurons, Conditions, Repeats int
	// Fano is the noise variance over the tuning value, Var = Fano f_n(s).
	Fano float64
	// LatentSD is the standard deviation of the unobserved shared gain l_t.
	LatentSD float64
	// GainMean, GainSD: normal distribution of each neuron's gain change per
	// standard deviation of running speed (a_n).
	GainMean, GainSD float64
	// OffsetMean, OffsetSD: normal distribution of each neuron's offset per
	// standard deviation of running speed (o_n), in response units.
	OffsetMean, OffsetSD float64
	// CouplingMin, CouplingMax: uniform range of each neuron's coupling to the
	// latent gain (beta_n).
	CouplingMin, CouplingMax float64
	// SpeedLink in [0, 1) ties running to the stimulus: the probability of
	// running in condition b is 0.4 (1 + SpeedLink cos(2 pi b / B)). 0 makes
	// speed independent of the stimulus; only then do the predictions of
	// Predicted hold.
	SpeedLink float64
	Seed      uint64
}

// DefaultSim returns the configuration the tests use: 200 neurons, 16
// directions, 40 repeats; rates of 1-20 per trial, Poisson-like noise (Fano
// 1); running speeds up the gain by 10% +- 10% and shifts the response by
// 0.3 +- 0.6 per standard deviation; a latent shared gain of SD 0.15 with
// couplings 0.5-1.5. These are the orders of magnitude reported for mouse
// visual cortex [practice], not fitted to any recording.
func DefaultSim() SimConfig {
	return SimConfig{Neurons: 200, Conditions: 16, Repeats: 40, Fano: 1, LatentSD: 0.15,
		GainMean: 0.20, GainSD: 0.15, OffsetMean: 0.3, OffsetSD: 0.6, CouplingMin: 0.5, CouplingMax: 1.5}
}

// Sim is a synthetic recording with planted state effects. Trial t (T =
// Conditions x Repeats) shows condition t mod B. Running speed v_t (cm/s) is
// 0-2 (uniform) when standing and 5-35 (uniform) when running; z_t =
// (v_t - SpeedMean) / SpeedSD uses the population mean 8.6 and standard
// deviation sqrt(116.84) of that mixture. Responses
//
//	y_tn = (1 + a_n z_t + beta_n l_t) f_n(s_t) + o_n z_t + e_tn,   e_tn ~ N(0, Fano f_n(s_t)),
//
// with von Mises tuning f_n (baseline 1-4, amplitude 4-16, kappa 1-3,
// random preferred direction) and the latent gain l_t ~ N(0, LatentSD^2),
// independent of speed and stimulus.
type Sim struct {
	Config                 SimConfig
	Y                      []float32 // T x N
	Cond                   []int     // T
	Speed                  []float64 // T, cm/s
	Latent                 []float64 // T, l_t
	Tuning                 []float64 // B x N, f_n at each condition
	GainPerSD, OffsetPerSD []float64 // N: a_n, o_n
	Coupling               []float64 // N: beta_n
	SpeedMean, SpeedSD     float64
}

// Simulate draws a population from cfg with its seed (PCG); the same
// configuration gives the same numbers.
func Simulate(cfg SimConfig) *Sim {
	N, B, R := cfg.Neurons, cfg.Conditions, cfg.Repeats
	if N <= 0 || B <= 0 || R <= 0 {
		panic("state: Simulate: Neurons, Conditions and Repeats must be positive")
	}
	T := B * R
	rng := rand.New(rand.NewPCG(cfg.Seed, 0x5747e))
	s := &Sim{Config: cfg, Y: make([]float32, T*N), Cond: make([]int, T), Speed: make([]float64, T),
		Latent: make([]float64, T), Tuning: make([]float64, B*N), GainPerSD: make([]float64, N),
		OffsetPerSD: make([]float64, N), Coupling: make([]float64, N)}
	// Mixture moments: E v = 0.4*20 + 0.6*1; E v^2 = 0.4*(75+400) + 0.6*(4/3);
	// the cosine term averages to 0 over the conditions.
	s.SpeedMean = 8.6
	s.SpeedSD = math.Sqrt(190.8 - 8.6*8.6)
	for n := 0; n < N; n++ {
		base := 1 + 3*rng.Float64()
		amp := 4 + 12*rng.Float64()
		kappa := 1 + 2*rng.Float64()
		pref := 2 * math.Pi * rng.Float64()
		for b := 0; b < B; b++ {
			th := 2 * math.Pi * float64(b) / float64(B)
			s.Tuning[b*N+n] = base + amp*math.Exp(kappa*(math.Cos(th-pref)-1))
		}
		s.GainPerSD[n] = cfg.GainMean + cfg.GainSD*rng.NormFloat64()
		s.OffsetPerSD[n] = cfg.OffsetMean + cfg.OffsetSD*rng.NormFloat64()
		s.Coupling[n] = cfg.CouplingMin + (cfg.CouplingMax-cfg.CouplingMin)*rng.Float64()
	}
	for t := 0; t < T; t++ {
		b := t % B
		s.Cond[t] = b
		pRun := 0.4 * (1 + cfg.SpeedLink*math.Cos(2*math.Pi*float64(b)/float64(B)))
		if rng.Float64() < pRun {
			s.Speed[t] = 5 + 30*rng.Float64()
		} else {
			s.Speed[t] = 2 * rng.Float64()
		}
		s.Latent[t] = cfg.LatentSD * rng.NormFloat64()
		z := (s.Speed[t] - s.SpeedMean) / s.SpeedSD
		for n := 0; n < N; n++ {
			f := s.Tuning[b*N+n]
			mu := (1+s.GainPerSD[n]*z+s.Coupling[n]*s.Latent[t])*f + s.OffsetPerSD[n]*z
			s.Y[t*N+n] = float32(mu + math.Sqrt(cfg.Fano*f)*rng.NormFloat64())
		}
	}
	return s
}

// Predicted are the population values of one simulated neuron's variance
// shares [derived in the package documentation]: Total is Var(y_n); Stim the
// R^2 of the true tuning, Var_s(f)/Total; Speed the R^2 that knowing running
// speed adds, E_s[(a f + o)^2]/Total; Latent what knowing the latent gain
// adds beyond that, beta^2 LatentSD^2 E_s[f^2]/Total.
type Predicted struct {
	Total, Stim, Speed, Latent float64
}

// Predict writes each neuron's predicted variance shares into dst (length
// N). With z independent of s, E z = 0, E z^2 = 1, l independent of both and
// the noise independent of everything,
//
//	Var(y_n) = Var_s(f) + E_s[(a f + o)^2] + beta^2 sigma_l^2 E_s[f^2] + Fano E_s[f],
//
// all cross terms having zero mean; E_s and Var_s average over the
// conditions with equal weight (ddof 0) [derived]. Valid only for
// SpeedLink = 0.
func (s *Sim) Predict(dst []Predicted) {
	N, B := s.Config.Neurons, s.Config.Conditions
	if len(dst) != N {
		panic("state: Sim.Predict: len(dst) != N")
	}
	sl2 := s.Config.LatentSD * s.Config.LatentSD
	for n := 0; n < N; n++ {
		var m, m2, ao2 float64
		for b := 0; b < B; b++ {
			f := s.Tuning[b*N+n]
			m += f
			m2 += f * f
			g := s.GainPerSD[n]*f + s.OffsetPerSD[n]
			ao2 += g * g
		}
		m /= float64(B)
		m2 /= float64(B)
		ao2 /= float64(B)
		vs := m2 - m*m
		lat := s.Coupling[n] * s.Coupling[n] * sl2 * m2
		tot := vs + ao2 + lat + s.Config.Fano*m
		dst[n] = Predicted{Total: tot, Stim: vs / tot, Speed: ao2 / tot, Latent: lat / tot}
	}
}

// SharedGain writes the planted population gain change of every trial into
// dst (length T): abar z_t + betabar l_t, with abar and betabar the means of
// a_n and beta_n over the neurons, the gain a population of average neurons
// shares on trial t. It panics if len(dst) != T.
func (s *Sim) SharedGain(dst []float64) {
	if len(dst) != len(s.Cond) {
		panic("state: Sim.SharedGain: len(dst) != T")
	}
	var abar, bbar float64
	for n := range s.GainPerSD {
		abar += s.GainPerSD[n]
		bbar += s.Coupling[n]
	}
	abar /= float64(len(s.GainPerSD))
	bbar /= float64(len(s.Coupling))
	for t := range dst {
		dst[t] = abar*(s.Speed[t]-s.SpeedMean)/s.SpeedSD + bbar*s.Latent[t]
	}
}
