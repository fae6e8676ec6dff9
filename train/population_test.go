package train

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/nn"
)

// popSpec describes a synthetic population for the solver tests and
// benchmarks, a scenario of our own: cells on a periodic direction axis
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
type popSpec struct {
	Neurons, Trials, Bins int
	Poisson               bool
	GainSD, NoiseSD       float64
	UntunedFrac           float64
	RareBins              int
	Seed                  uint64
}

// makePopulation draws a recording and its B x N truth.
func makePopulation(s popSpec) (*data.Recording, []float64) {
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

// popPrepared prepares a population with the stria defaults edited by edit.
func popPrepared(t testing.TB, s popSpec, edit func(*Config)) (*Prepared, []float64) {
	t.Helper()
	rec, truth := makePopulation(s)
	cfg := Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = AxisConfig{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 360 / float64(s.Bins), Encoding: OneHot}
	cfg.Split.KeepBlocks = false
	if s.Poisson {
		cfg.Model.Loss, cfg.Model.Output, cfg.Split.ZScore = Poisson, nn.Softplus, false
	}
	if edit != nil {
		edit(&cfg)
	}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := PrepareRecording(&cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	return p, truth
}

// testR2 returns each neuron's R^2 on the test trials of per-bin
// predictions pred (B x N, recording units): 1 - SSE/SST, SST about the
// test mean (NaN where SST is 0).
func testR2(p *Prepared, pred []float64) []float64 {
	N := p.Neurons()
	st := condstats.New(p.Rec.Y, p.Cond, p.Test, p.NBins)
	sse, tot, grand := make([]float64, N), make([]float64, N), make([]float64, N)
	for b, c := range st.Count {
		if c == 0 {
			continue
		}
		cnt := float64(c)
		for n := 0; n < N; n++ {
			f, s, q := pred[b*N+n], st.Sum[b*N+n], st.SumSq[b*N+n]
			sse[n] += q - 2*f*s + cnt*f*f
			tot[n] += q
			grand[n] += s
		}
	}
	r2 := make([]float64, N)
	for n := range r2 {
		sst := tot[n] - grand[n]*grand[n]/float64(len(p.Test))
		r2[n] = math.NaN()
		if sst > 0 {
			r2[n] = 1 - sse[n]/sst
		}
	}
	return r2
}

// condMeanPred is the condition-mean model of the training and validation
// trials (all the trials a fit sees), B x N; bins without such trials get
// the grand mean.
func condMeanPred(p *Prepared) []float64 {
	N := p.Neurons()
	seen := append(slices.Clone(p.Train), p.Val...)
	st := condstats.New(p.Rec.Y, p.Cond, seen, p.NBins)
	out := make([]float64, p.NBins*N)
	grand := make([]float64, N)
	for b, c := range st.Count {
		for n := 0; n < N; n++ {
			grand[n] += st.Sum[b*N+n]
			if c > 0 {
				out[b*N+n] = st.Sum[b*N+n] / float64(c)
			}
		}
	}
	for b, c := range st.Count {
		if c == 0 {
			for n := 0; n < N; n++ {
				out[b*N+n] = grand[n] / float64(len(seen))
			}
		}
	}
	return out
}

// gapShare returns the share of the gap between the condition-mean model
// and the oracle that a model closes on the test trials, pooled over
// neurons on the R^2 scale: sum_n (R2_model - R2_cm) / sum_n (R2_oracle -
// R2_cm), neurons with an undefined R^2 left out.
func gapShare(model, cm, oracle []float64) float64 {
	var num, den float64
	for n := range model {
		if math.IsNaN(model[n]) || math.IsNaN(cm[n]) || math.IsNaN(oracle[n]) {
			continue
		}
		num += model[n] - cm[n]
		den += oracle[n] - cm[n]
	}
	return num / den
}

// nanMedian is the median of the finite values of x.
func nanMedian(x []float64) float64 {
	var v []float64
	for _, a := range x {
		if !math.IsNaN(a) {
			v = append(v, a)
		}
	}
	return median(v)
}

// condPred returns the net's per-bin predictions in recording units.
func condPred(net *nn.Net, p *Prepared) []float64 {
	out := PredictConditions(net, p.NBins)
	p.Norm.InvertRows(out)
	return out
}
