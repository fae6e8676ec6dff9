package synth

import (
	"fmt"
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/stat/distuv"

	"github.com/strialab/stria/data"
)

// Config describes a synthetic heading-tuned population: cells of a
// rodent exploring a virtual arena, each firing for some heading directions
// (0..360 deg, periodic). It is the demo scenario and the ground truth for
// recovery tests.
//
// Model, for neuron n on trial t with heading th_t:
//
//	f_n(th)  = A_n exp(kappa_n (cos(th - p_n) - 1))                        single-peaked
//	f_n(th)  = A_n [exp(kappa_n (cos(th - p_n) - 1))
//	             + r_n exp(kappa_n (cos(th - p_n - pi) - 1))]               two peaks half a period apart
//	f_n(th)  = 0                                                           untuned
//	mu_tn    = b_n + g_t f_n(th_t) + d_n (2 t/(T-1) - 1)
//
// with a shared gain g_t = max(0, 1 + GainSD z_t) and a slow linear drift of
// size d_n = DriftSD a_n s_n over the session (s_n standard normal, a_n the
// cell's amplitude scale). Responses are mu_tn + NoiseSD a_n e_tn with
// Gaussian e (dF/F-like, can dip below zero), or Poisson counts with mean
// max(0, mu_tn) when Poisson is set. Headings are drawn uniformly and
// continuously on [0, 360); trials are in time order and cut into Blocks
// consecutive blocks.
type Config struct {
	Neurons, Trials int
	Bins            int     // heading bins of the returned axis, e.g. 60 (6 deg)
	TwoPeakFrac     float64 // share of two-peaked cells, e.g. 0.25
	UntunedFrac     float64 // share of untuned cells, e.g. 0.1
	GainSD          float64 // shared multiplicative gain fluctuation across trials, e.g. 0.15
	NoiseSD         float64 // Gaussian per-trial noise relative to each cell's amplitude, e.g. 0.5
	DriftSD         float64 // slow drift over the session relative to amplitude, e.g. 0.05 (0: none)
	Blocks          int     // blocks in time order (0: 10)
	Poisson         bool    // Poisson counts instead of Gaussian dF/F-like values
	Seed            uint64
}

// DefaultConfig returns the demo scenario: 400 cells, 1200 trials,
// 60 bins of 6 deg, 25% two-peaked and 10% untuned cells.
func DefaultConfig() Config {
	return Config{Neurons: 400, Trials: 1200, Bins: 60, TwoPeakFrac: 0.25, UntunedFrac: 0.1,
		GainSD: 0.15, NoiseSD: 0.5, DriftSD: 0.05, Blocks: 10, Seed: 1}
}

// Validate checks the configuration; errors name the field.
func (c Config) Validate() error {
	bad := func(f string, v any, want string) error {
		return fmt.Errorf("data: synthetic %s = %v: %s", f, v, want)
	}
	fin := func(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
	switch {
	case c.Neurons < 1 || c.Neurons > 1<<20:
		return bad("neurons", c.Neurons, "must be between 1 and 1048576")
	case c.Trials < 2 || c.Trials > 1<<22:
		return bad("trials", c.Trials, "must be between 2 and 4194304")
	case c.Neurons*c.Trials > 1<<31:
		return bad("neurons x trials", c.Neurons*c.Trials, "is too large")
	case c.Bins < 1 || c.Bins > data.MaxBins:
		return bad("bins", c.Bins, fmt.Sprintf("must be between 1 and %d", data.MaxBins))
	case !fin(c.TwoPeakFrac) || !fin(c.UntunedFrac) || c.TwoPeakFrac < 0 || c.UntunedFrac < 0 || c.TwoPeakFrac+c.UntunedFrac > 1:
		return bad("two_peak_frac + untuned_frac", c.TwoPeakFrac+c.UntunedFrac, "both must be >= 0 with a sum <= 1")
	case !fin(c.GainSD) || c.GainSD < 0:
		return bad("gain_sd", c.GainSD, "must be >= 0")
	case !fin(c.NoiseSD) || c.NoiseSD < 0:
		return bad("noise_sd", c.NoiseSD, "must be >= 0")
	case !fin(c.DriftSD) || c.DriftSD < 0:
		return bad("drift_sd", c.DriftSD, "must be >= 0")
	case c.Blocks < 0 || c.Blocks > c.Trials:
		return bad("blocks", c.Blocks, "must be between 0 (default 10) and the number of trials")
	}
	return nil
}

// Truth is the ground truth of a synthetic recording.
type Truth struct {
	// Mean is B x N: the noise-free expected response of a trial whose
	// heading falls in bin b, b_n + (average of f_n over the bin). Gain and
	// drift have zero mean and do not enter it. (Averaging over the bin
	// rather than taking f_n at the centre makes Mean exactly what the
	// empirical condition means estimate.)
	Mean      []float64
	Preferred []float64 // preferred heading p_n in deg (NaN for untuned)
	Kind      []string  // "single", "double", "untuned"
	Kappa     []float64 // NaN for untuned
	Amp       []float64 // A_n (0 for untuned)
	Base      []float64 // b_n
	Ratio     []float64 // r_n, the second peak relative to the first (0 unless "double")
	Noise     []float64 // Gaussian noise SD NoiseSD a_n (0 in Poisson mode)
	Gain      []float64 // g_t per trial
}

// Tuning returns b_n + f_n(th) for heading th in degrees.
func (tr *Truth) Tuning(n int, th float64) float64 {
	return tr.Base[n] + tr.bump(n, th)
}

func (tr *Truth) bump(n int, th float64) float64 {
	if tr.Kind[n] == "untuned" {
		return 0
	}
	d := (th - tr.Preferred[n]) * math.Pi / 180
	k := tr.Kappa[n]
	f := math.Exp(k * (math.Cos(d) - 1))
	if tr.Kind[n] == "double" {
		f += tr.Ratio[n] * math.Exp(k*(math.Cos(d-math.Pi)-1))
	}
	return tr.Amp[n] * f
}

// Population generates a synthetic recording with its heading axis (0..360 deg,
// periodic, cfg.Bins bins) and ground truth. The same config gives the same
// result on every machine. Neuron names are "hd000", "hd001", ...; Cond is
// nil (bin Stim with the axis); Block holds the time-order block of each
// trial. It panics if cfg.Validate fails; check user values with Validate
// first.
//
// Parameters, drawn per cell in a fixed order: the numbers of untuned and
// two-peaked cells are round(frac * Neurons), placed at random; p_n uniform
// on [0, 360); kappa_n log-uniform on [1, 8]; a_n log-normal with median 1
// (median 5 for Poisson); A_n = a_n for tuned cells; b_n uniform on
// [0.05, 0.3] (x5 for Poisson); r_n uniform on [0.4, 0.8].
func Population(cfg Config) (*data.Recording, *data.Axis, *Truth) {
	if err := cfg.Validate(); err != nil {
		panic(err.Error())
	}
	if cfg.Blocks == 0 {
		cfg.Blocks = min(10, cfg.Trials)
	}
	src := rand.NewPCG(cfg.Seed, 0x73747269615f7379) // second word: "stria_sy"
	rng := rand.New(src)
	N, T, B := cfg.Neurons, cfg.Trials, cfg.Bins
	scale := 1.0
	if cfg.Poisson {
		scale = 5
	}

	tr := &Truth{
		Mean: make([]float64, B*N), Preferred: make([]float64, N), Kind: make([]string, N),
		Kappa: make([]float64, N), Amp: make([]float64, N), Base: make([]float64, N),
		Ratio: make([]float64, N), Noise: make([]float64, N), Gain: make([]float64, T),
	}
	nUn := int(math.Round(cfg.UntunedFrac * float64(N)))
	nTwo := min(int(math.Round(cfg.TwoPeakFrac*float64(N))), N-nUn)
	perm := rng.Perm(N)
	drift := make([]float64, N)
	for i, n := range perm {
		switch {
		case i < nUn:
			tr.Kind[n] = "untuned"
		case i < nUn+nTwo:
			tr.Kind[n] = "double"
		default:
			tr.Kind[n] = "single"
		}
	}
	for n := 0; n < N; n++ {
		p := 360 * rng.Float64()
		kappa := math.Exp(math.Log(8) * rng.Float64())
		a := scale * math.Exp(0.4*rng.NormFloat64())
		base := scale * (0.05 + 0.25*rng.Float64())
		ratio := 0.4 + 0.4*rng.Float64()
		s := rng.NormFloat64()
		tr.Base[n] = base
		drift[n] = cfg.DriftSD * a * s
		if !cfg.Poisson {
			tr.Noise[n] = cfg.NoiseSD * a
		}
		switch tr.Kind[n] {
		case "untuned":
			tr.Preferred[n], tr.Kappa[n] = math.NaN(), math.NaN()
		case "double":
			tr.Ratio[n] = ratio
			fallthrough
		default:
			tr.Preferred[n], tr.Kappa[n], tr.Amp[n] = p, kappa, a
		}
	}

	// Bin-averaged tuning by the midpoint rule on 64 points per bin; for
	// kappa <= 8 the error is below h^2/24 max|f"| < 1e-5 A (h = bin/64 in rad).
	const sub = 64
	w := 360.0 / float64(B)
	for b := 0; b < B; b++ {
		row := tr.Mean[b*N : (b+1)*N]
		for n := range row {
			var s float64
			for k := 0; k < sub; k++ {
				s += tr.bump(n, w*(float64(b)+(float64(k)+0.5)/sub))
			}
			row[n] = tr.Base[n] + s/sub
		}
	}

	rec := &data.Recording{
		Y:       data.NewMatrix(T, N),
		Stim:    make([]float64, T),
		Block:   make([]int, T),
		Neurons: make([]string, N),
		Source:  data.Source{Responses: fmt.Sprintf("synthetic(seed=%d)", cfg.Seed)},
	}
	for n := range rec.Neurons {
		rec.Neurons[n] = fmt.Sprintf("hd%03d", n)
	}
	pois := distuv.Poisson{Src: src}
	for t := 0; t < T; t++ {
		th := 360 * rng.Float64()
		if th >= 360 {
			th = 0
		}
		rec.Stim[t] = th
		rec.Block[t] = t * cfg.Blocks / T
		g := math.Max(0, 1+cfg.GainSD*rng.NormFloat64())
		tr.Gain[t] = g
		tt := 2*float64(t)/float64(T-1) - 1
		row := rec.Y.Row(t)
		for n := range row {
			mu := tr.Base[n] + g*tr.bump(n, th) + drift[n]*tt
			if cfg.Poisson {
				if mu > 0 {
					pois.Lambda = mu
					row[n] = float32(pois.Rand())
				}
			} else {
				row[n] = float32(mu + tr.Noise[n]*rng.NormFloat64())
			}
		}
	}
	ax := &data.Axis{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: B}
	return rec, ax, tr
}
