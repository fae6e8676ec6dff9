package train

import (
	"context"
	"fmt"
	"github.com/strialab/stria/train/settings"
	"math/rand/v2"
	"runtime"
	"sync"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/tuning"
)

// ModelSpec is one model of a comparison after grid expansion.
type ModelSpec struct {
	Name string
	// Baseline is the baseline kind; empty for an encoder.
	Baseline string
	// Cfg is the encoder's full config (nil for a baseline).
	Cfg *settings.Config
	// State, when not empty, makes the model a state variant of the
	// encoder or baseline above (VariantState or VariantPopGain; see
	// state_compare.go).
	State string
}

// FoldResult is one model's scores on one fold.
type FoldResult struct {
	Model  string
	Fold   int
	Scores []eval.Scores
	// Curves is the model's prediction for every bin (B x N, recording
	// units), for tuning descriptors and figures.
	Curves []float64
	// Epochs is the encoder's training length (0 for baselines).
	Epochs int
}

// Folds returns the cross-validation folds of a prepared recording as
// (train, validation, test) trial sets.
func Folds(p *Prepared) ([][3][]int, error) {
	blocks := p.Blocks
	sp, err := data.KFold(p.Cond, blocks, p.NBins, p.Cfg.Split.Folds, p.Cfg.Seed)
	if err != nil {
		return nil, fmt.Errorf("folds: %w", err)
	}
	out := make([][3][]int, len(sp))
	for f, s := range sp {
		coverageWarnings(p.Report, s, p.Cond, &p.Axis, fmt.Sprintf("fold %d", f+1))
		tr, val, err := carve(p.Cond, blocks, s.Train, p.NBins, p.Cfg.Split.ValidationFraction, p.Cfg.Seed+uint64(f)+1)
		if err != nil {
			return nil, fmt.Errorf("fold %d: validation split: %w", f+1, err)
		}
		out[f] = [3][]int{tr, val, s.Test}
	}
	return out, nil
}

// RunUnit fits one model on one fold and scores it on the fold's test
// trials, with the noise ceilings gated as in a fit (Ceilings). It is
// RunFoldUnit on a fold of its own.
func RunUnit(ctx context.Context, p *Prepared, spec ModelSpec, fold int, sets [3][]int) (*FoldResult, error) {
	return RunFoldUnit(ctx, spec, fold, NewFold(p, sets))
}

// RunFoldUnit fits one model on fold f and scores it on the fold's test
// trials, with the noise ceilings gated as in a fit (Ceilings). The models
// of one fold share f's per-condition statistics and test sums (see Fold);
// the numbers do not depend on which units share it or in which order
// they run.
func RunFoldUnit(ctx context.Context, spec ModelSpec, fold int, f *Fold) (*FoldResult, error) {
	p, sets := f.p, f.Sets
	res := &FoldResult{Model: spec.Name, Fold: fold}
	var pred []float64
	var pf *Prepared
	if spec.Baseline == "" {
		q := *p
		q.Cfg = spec.Cfg
		pf = q.withSplitStats(sets[0], sets[1], sets[2], f.trainStats(), f.valStats())
		// The fold reads only the curves unless the input is soft.
		fitted, err := Fit(ctx, pf, Hooks{CurvesOnly: !p.Soft()}, nil)
		if err != nil {
			return nil, fmt.Errorf("%s, fold %d: %w", spec.Name, fold+1, err)
		}
		res.Epochs = len(fitted.Log)
		res.Curves = fitted.Curves
		if res.Curves == nil {
			res.Curves = PredictConditions(fitted.Net, p.NBins)
		}
		pf.Norm.InvertRows(res.Curves)
		if p.Soft() {
			pred = PredictTrials(fitted.Net, pf, sets[2])
		}
	} else {
		pf = f.baselineSplit()
		curves, err := fitBaseline(pf, spec.Baseline)
		if err != nil {
			return nil, fmt.Errorf("%s, fold %d: %w", spec.Name, fold+1, err)
		}
		res.Curves = curves
	}
	if spec.State != "" {
		var err error
		if pred, err = stateUnit(ctx, pf, spec, res); err != nil {
			return nil, fmt.Errorf("%s, fold %d: %w", spec.Name, fold+1, err)
		}
	}
	res.Scores = make([]eval.Scores, p.Neurons())
	if pred != nil {
		eval.ScorePopulation(res.Scores, p.Rec.Y.Data, p.Neurons(), sets[2], p.Cond, pred, p.NBins)
	} else {
		// eval.ScoreConditions' scores, bit for bit, from the fold's sums.
		eval.ScoreSums(res.Scores, f.testSums(), res.Curves)
	}
	// The same gate as a fit's scores (scores.ceiling_alpha of the
	// recording's config: baselines have no config of their own).
	Ceilings(p, res.Scores)
	return res, nil
}

// newBaseline builds one baseline model; rng is reseeded per neuron by the
// caller.
func newBaseline(kind string, p *Prepared, rng *rand.Rand) tuning.Model {
	cc := p.Cfg.Compare
	centers := p.Axis.Centers()
	period := 0.0
	if p.Axis.Periodic {
		period = p.Axis.Max - p.Axis.Min
	}
	switch kind {
	case "condmean":
		return tuning.NewCondMeanAt(centers, period)
	case "vonmises":
		return tuning.NewVonMises(centers, period, cc.Starts, rng)
	case "vonmises2":
		return tuning.NewVonMisesTwoPeak(centers, period, cc.Starts, rng)
	case "gaussian":
		return tuning.NewGaussianBump(centers, cc.Starts, rng)
	case "smoothlinear":
		return tuning.NewSmoothLinear(centers, period, cc.SmoothLambda)
	}
	panic("train: unknown baseline " + kind)
}

// fitBaseline fits a baseline to every neuron on p.Train (z-scored when
// the config says so) and returns its curves at the bin centres (B x N,
// recording units). Neurons are split across cores; each neuron's random
// starts are seeded by (seed, neuron), so the result does not depend on
// the number of cores.
func fitBaseline(p *Prepared, kind string) ([]float64, error) {
	b, n := p.NBins, p.Neurons()
	st := p.TrainStats()
	curves := make([]float64, b*n)
	centers := p.Axis.Centers()
	workers := min(runtime.GOMAXPROCS(0), max(1, n/64))
	var wg sync.WaitGroup
	errs := make([]error, workers)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			pcg := rand.NewPCG(0, 0)
			m := newBaseline(kind, p, rand.New(pcg))
			means := make([]float64, b)
			curve := make([]float64, b)
			for j := w; j < n; j += workers {
				pcg.Seed(p.Cfg.Seed, uint64(j))
				mu, inv := p.Norm.Affine(j)
				for c := 0; c < b; c++ {
					if st.Count[c] > 0 {
						means[c] = (st.Sum[c*n+j]/float64(st.Count[c]) - mu) * inv
					} else {
						means[c] = 0
					}
				}
				if err := m.Fit(st.Count, means); err != nil {
					errs[w] = fmt.Errorf("neuron %d: %w", j, err)
					return
				}
				m.Predict(curve, centers)
				for c := 0; c < b; c++ {
					curves[c*n+j] = curve[c]/inv + mu
				}
			}
		}(w)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	return curves, nil
}

// ExcludedNeurons maps the neurons left out of every score (constant
// responses) to the reason.
func ExcludedNeurons(p *Prepared) map[int]string {
	ex := map[int]string{}
	for _, j := range p.Report.Constant {
		ex[j] = "constant response over all trials"
	}
	return ex
}
