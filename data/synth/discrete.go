package synth

import (
	"fmt"
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/stat/distuv"

	"github.com/strialab/stria/data"
)

// DiscreteConfig describes a population recorded at discrete conditions,
// the scenario of the solver tests and benchmarks (a scenario of our own): cells on a periodic direction axis
// (0..360 deg, Bins conditions at the bin centres), each with 1 to 3 von
// Mises bumps at random places (untuned cells: a flat rate), and a gain
// shared by all cells that fluctuates from trial to trial:
//
//	rate_n(th) = base_n + sum_j A_nj exp(kappa_nj (cos(th - p_nj) - 1))
//	y_tn       = Poisson(g_t rate_n(th_t))                    counts
//	y_tn       = g_t rate_n(th_t) + NoiseSD a_n e_tn            Gaussian
//	g_t        = max(0, 1 + GainSD z_t)
//
// Conditions are drawn at random, RareBins of them 2.5 times less often
// than the others. The truth (oracle) is rate_n at each condition: the gain
// has mean 1 (its clipping at 0 is a 5-sigma event at GainSD 0.2).
type DiscreteConfig struct {
	Neurons, Trials, Bins int
	Poisson               bool
	GainSD, NoiseSD       float64
	UntunedFrac           float64
	RareBins              int
	Seed                  uint64
}

// Discrete draws a recording of the DiscreteConfig scenario and its truth,
// the noise-free rate of every condition (B x N). The stimulus of each
// trial is its condition's bin centre in degrees.
func Discrete(s DiscreteConfig) (*data.Recording, []float64) {
	src := rand.NewPCG(s.Seed, 0x706f70)
	rng := rand.New(src)
	B, N, T := s.Bins, s.Neurons, s.Trials
	scale := 1.0
	if s.Poisson {
		scale = 4 // spikes per trial at the top of a typical bump
	}
	truth := make([]float64, B*N)
	amp := make([]float64, N)
	for n := 0; n < N; n++ {
		base := scale * (0.1 + 0.4*rng.Float64())
		a := scale * math.Exp(0.5*rng.NormFloat64())
		amp[n] = a
		untuned := rng.Float64() < s.UntunedFrac
		bumps := 1 + rng.IntN(3)
		type bump struct{ p, kappa, A float64 }
		var bs []bump
		for range bumps {
			bs = append(bs, bump{2 * math.Pi * rng.Float64(), math.Exp(math.Log(8) * rng.Float64()), a * (0.4 + 0.6*rng.Float64())})
		}
		for b := 0; b < B; b++ {
			th := 2 * math.Pi * (float64(b) + 0.5) / float64(B)
			v := base
			if !untuned {
				for _, q := range bs {
					v += q.A * math.Exp(q.kappa*(math.Cos(th-q.p)-1))
				}
			}
			truth[b*N+n] = v
		}
	}
	weight := make([]float64, B)
	for b := range weight {
		weight[b] = 1
	}
	for _, b := range rng.Perm(B)[:s.RareBins] {
		weight[b] = 0.4
	}
	var wsum float64
	for _, w := range weight {
		wsum += w
	}
	rec := &data.Recording{Y: data.NewMatrix(T, N), Stim: make([]float64, T), Neurons: make([]string, N),
		Source: data.Source{Responses: fmt.Sprintf("population(seed=%d)", s.Seed)}}
	for n := range rec.Neurons {
		rec.Neurons[n] = fmt.Sprintf("c%04d", n)
	}
	pois := distuv.Poisson{Src: src}
	for t := 0; t < T; t++ {
		u := wsum * rng.Float64()
		b := 0
		for b < B-1 && u >= weight[b] {
			u -= weight[b]
			b++
		}
		rec.Stim[t] = 360 * (float64(b) + 0.5) / float64(B)
		g := math.Max(0, 1+s.GainSD*rng.NormFloat64())
		row := rec.Y.Row(t)
		for n := range row {
			mu := g * truth[b*N+n]
			if s.Poisson {
				pois.Lambda = mu
				if mu > 0 {
					row[n] = float32(pois.Rand())
				}
			} else {
				row[n] = float32(mu + s.NoiseSD*amp[n]*rng.NormFloat64())
			}
		}
	}
	return rec, truth
}
