package train

import (
	"github.com/strialab/stria/train/settings"
	"math"
	"slices"
	"testing"

	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/nn"
)

// popPrepared prepares a population with the stria defaults edited by edit.
func popPrepared(t testing.TB, s synth.DiscreteConfig, edit func(*settings.Config)) (*Prepared, []float64) {
	t.Helper()
	rec, truth := synth.Discrete(s)
	cfg := settings.Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = settings.AxisConfig{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 360 / float64(s.Bins), Encoding: settings.OneHot}
	cfg.Split.KeepBlocks = false
	if s.Poisson {
		cfg.Model.Loss, cfg.Model.Output, cfg.Split.ZScore = settings.Poisson, nn.Softplus, false
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
