package synth

import (
	"fmt"
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/stat/distuv"

	"github.com/strialab/stria/data"
)

// BumpsConfig describes a synthetic population of cells with one to three
// von Mises bumps each at random places on a periodic stimulus (0..360
// deg): the benchmark scenario for shared-filter encoders, where cells
// share bump shapes but not positions. Model, for neuron n and trial t:
//
//	f_n(th) = sum_k A_nk exp(kappa_nk (cos(th - p_nk) - 1)),  k = 1..K_n, K_n in {1, 2, 3}
//	mu_tn   = b_n + g_t f_n(th_t),  g_t = max(0, 1 + GainSD z_t)
//
// kappa drawn log-uniformly in [2, 16], amplitudes log-normal around 1,
// a share UntunedFrac with f = 0. Responses are mu + NoiseSD e (Gaussian)
// or Poisson counts with mean Scale*mu when Poisson is set. Stimulus values
// are drawn uniformly and continuously on [0, 360).
type BumpsConfig struct {
	Neurons, Trials int
	Bins            int     // bins of the returned axis, e.g. 60
	UntunedFrac     float64 // share of untuned cells
	GainSD          float64 // shared multiplicative gain fluctuation, e.g. 0.15
	NoiseSD         float64 // Gaussian noise s.d. (ignored with Poisson)
	Poisson         bool
	Scale           float64 // Poisson: mean count per unit of mu (0: 3)
	Seed            uint64
}

// Bumps draws a recording of the BumpsConfig scenario. It returns the
// recording, its axis and the noise-free bin means (Bins x N, the mean of
// mu over the bin and over the gain, i.e. b_n + E[g] f_n averaged over the
// bin), the oracle that no stimulus model can beat in expectation. It
// panics on a config with sizes < 1.
func Bumps(cfg BumpsConfig) (*data.Recording, *data.Axis, []float64) {
	if cfg.Neurons < 1 || cfg.Trials < 1 || cfg.Bins < 1 {
		panic(fmt.Sprintf("data: Bumps with %d neurons, %d trials, %d bins", cfg.Neurons, cfg.Trials, cfg.Bins))
	}
	if cfg.Scale == 0 {
		cfg.Scale = 3
	}
	src := rand.NewPCG(cfg.Seed, 0x73747269615f6262) // second word: "stria_bb"
	rng := rand.New(src)
	N, T, B := cfg.Neurons, cfg.Trials, cfg.Bins
	type bump struct{ a, kappa, p float64 }
	bumps := make([][]bump, N)
	base := make([]float64, N)
	for n := range bumps {
		base[n] = 0.2 + 0.3*rng.Float64()
		if rng.Float64() < cfg.UntunedFrac {
			continue
		}
		k := 1 + rng.IntN(3)
		for range k {
			bumps[n] = append(bumps[n], bump{
				a:     math.Exp(0.3 * rng.NormFloat64()),
				kappa: 2 * math.Exp(math.Log(8)*rng.Float64()),
				p:     2 * math.Pi * rng.Float64(),
			})
		}
	}
	f := func(n int, thDeg float64) float64 {
		th := thDeg * math.Pi / 180
		var s float64
		for _, b := range bumps[n] {
			s += b.a * math.Exp(b.kappa*(math.Cos(th-b.p)-1))
		}
		return s
	}
	// E[g] with g = max(0, 1 + s z): 1 up to the clipped tail, which is
	// below 1e-10 for s <= 0.15; the bin means use 1.
	const sub = 32
	w := 360.0 / float64(B)
	means := make([]float64, B*N)
	for b := 0; b < B; b++ {
		for n := 0; n < N; n++ {
			var s float64
			for k := 0; k < sub; k++ {
				s += f(n, w*(float64(b)+(float64(k)+0.5)/sub))
			}
			m := base[n] + s/sub
			if cfg.Poisson {
				m *= cfg.Scale
			}
			means[b*N+n] = m
		}
	}
	rec := &data.Recording{
		Y: data.NewMatrix(T, N), Stim: make([]float64, T), Neurons: make([]string, N),
		Source: data.Source{Responses: fmt.Sprintf("synthetic-bumps(seed=%d)", cfg.Seed)},
	}
	for n := range rec.Neurons {
		rec.Neurons[n] = fmt.Sprintf("cell%04d", n)
	}
	pois := distuv.Poisson{Src: src}
	for t := 0; t < T; t++ {
		th := 360 * rng.Float64()
		if th >= 360 {
			th = 0
		}
		rec.Stim[t] = th
		g := math.Max(0, 1+cfg.GainSD*rng.NormFloat64())
		row := rec.Y.Row(t)
		for n := range row {
			mu := base[n] + g*f(n, th)
			if cfg.Poisson {
				pois.Lambda = cfg.Scale * mu
				row[n] = float32(pois.Rand())
				continue
			}
			row[n] = float32(mu + cfg.NoiseSD*rng.NormFloat64())
		}
	}
	ax := &data.Axis{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: B}
	return rec, ax, means
}
