package train

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/tuning"
)

// CompareConfig is the compare section of a config: which models to
// cross-validate.
type CompareConfig struct {
	// Baselines are per-neuron models: condmean, vonmises, vonmises2,
	// gaussian, smoothlinear. Empty: the ones that suit the axis.
	Baselines []string `yaml:"baselines"`
	// Starts is the number of starting points of each curve fit.
	Starts int `yaml:"starts"`
	// SmoothLambda is the smoothlinear penalty, in units of trials.
	SmoothLambda float64 `yaml:"smooth_lambda"`
	// Encoders are encoder specs; empty: one spec, the config's model.
	Encoders []EncoderSpec `yaml:"encoders"`
	// Output is the comparison folder.
	Output string `yaml:"output"`
}

// EncoderSpec changes the config's model and training settings for one
// encoder in a comparison. A grid expands the spec into one spec per
// combination of its values.
type EncoderSpec struct {
	Name         string               `yaml:"name"`
	Layers       []LayerConfig        `yaml:"layers"`
	ReadoutL2    *float64             `yaml:"readout_l2"`
	LearningRate *float64             `yaml:"learning_rate"`
	WeightDecay  *float64             `yaml:"weight_decay"`
	Solver       *Solver              `yaml:"solver"`
	Grid         map[string][]float64 `yaml:"grid"`
}

// gridKeys are the settings a grid may vary (channels, kernel and stride
// apply to the first conv layer).
var gridKeys = []string{"readout_l2", "learning_rate", "weight_decay", "channels", "kernel", "stride"}

// ModelSpec is one model of a comparison after grid expansion.
type ModelSpec struct {
	Name string
	// Baseline is the baseline kind; empty for an encoder.
	Baseline string
	// Cfg is the encoder's full config (nil for a baseline).
	Cfg *Config
}

func defaultBaselines(ax AxisConfig) []string {
	if !ax.Periodic {
		return []string{"condmean", "gaussian", "smoothlinear"}
	}
	if ax.Max-ax.Min == 360 {
		return []string{"condmean", "vonmises", "vonmises2", "smoothlinear"}
	}
	return []string{"condmean", "vonmises", "smoothlinear"}
}

// Specs expands the compare section into model specs, baselines last.
// Errors name the field.
func (c *Config) Specs() ([]ModelSpec, error) {
	var specs []ModelSpec
	encs := c.Compare.Encoders
	if len(encs) == 0 {
		encs = []EncoderSpec{{Name: "encoder"}}
	}
	seen := map[string]bool{}
	add := func(s ModelSpec) error {
		if seen[s.Name] {
			return fmt.Errorf("compare: two models are called %q", s.Name)
		}
		seen[s.Name] = true
		specs = append(specs, s)
		return nil
	}
	for i, e := range encs {
		if e.Name == "" {
			e.Name = fmt.Sprintf("encoder%d", i+1)
		}
		base := *c
		base.Model.Layers = slices.Clone(c.Model.Layers)
		if len(e.Layers) > 0 {
			base.Model.Layers = slices.Clone(e.Layers)
			for k := range base.Model.Layers {
				if base.Model.Layers[k].Stride == 0 {
					base.Model.Layers[k].Stride = 1
				}
			}
		}
		if e.ReadoutL2 != nil {
			base.Model.ReadoutL2 = *e.ReadoutL2
		}
		if e.LearningRate != nil {
			base.Train.LearningRate = *e.LearningRate
		}
		if e.WeightDecay != nil {
			base.Train.WeightDecay = *e.WeightDecay
		}
		if e.Solver != nil {
			base.Train.Solver = *e.Solver
		}
		keys := make([]string, 0, len(e.Grid))
		for k, v := range e.Grid {
			if !slices.Contains(gridKeys, k) {
				return nil, fmt.Errorf("compare.encoders[%d].grid: unknown key %q (want one of %s)", i, k, strings.Join(gridKeys, ", "))
			}
			if len(v) == 0 {
				return nil, fmt.Errorf("compare.encoders[%d].grid.%s: no values", i, k)
			}
			keys = append(keys, k)
		}
		sort.Strings(keys)
		combos := [][]float64{nil}
		for _, k := range keys {
			var next [][]float64
			for _, c := range combos {
				for _, v := range e.Grid[k] {
					next = append(next, append(slices.Clone(c), v))
				}
			}
			combos = next
		}
		for _, combo := range combos {
			cfg := base
			cfg.Model.Layers = slices.Clone(base.Model.Layers)
			name := e.Name
			var parts []string
			for ki, k := range keys {
				v := combo[ki]
				parts = append(parts, k+"="+strconv.FormatFloat(v, 'g', -1, 64))
				switch k {
				case "readout_l2":
					cfg.Model.ReadoutL2 = v
				case "learning_rate":
					cfg.Train.LearningRate = v
				case "weight_decay":
					cfg.Train.WeightDecay = v
				case "channels":
					cfg.Model.Layers[0].Channels = int(v)
				case "kernel":
					cfg.Model.Layers[0].Kernel = int(v)
				case "stride":
					cfg.Model.Layers[0].Stride = int(v)
				}
			}
			if len(parts) > 0 {
				name += "[" + strings.Join(parts, ",") + "]"
			}
			if err := cfg.Validate(); err != nil {
				return nil, fmt.Errorf("compare model %s: %w", name, err)
			}
			if err := add(ModelSpec{Name: name, Cfg: &cfg}); err != nil {
				return nil, err
			}
		}
	}
	bl := c.Compare.Baselines
	if len(bl) == 0 {
		bl = defaultBaselines(c.Axis)
	}
	for _, b := range bl {
		switch b {
		case "condmean", "smoothlinear":
		case "vonmises", "vonmises2":
			if !c.Axis.Periodic {
				return nil, fmt.Errorf("compare.baselines: %s needs a periodic axis", b)
			}
		case "gaussian":
			if c.Axis.Periodic {
				return nil, fmt.Errorf("compare.baselines: gaussian is for a non-periodic axis (use vonmises)")
			}
		default:
			return nil, fmt.Errorf("compare.baselines: unknown model %q (want condmean, vonmises, vonmises2, gaussian or smoothlinear)", b)
		}
		if err := add(ModelSpec{Name: b, Baseline: b}); err != nil {
			return nil, err
		}
	}
	return specs, nil
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
// trials.
func RunUnit(ctx context.Context, p *Prepared, spec ModelSpec, fold int, sets [3][]int) (*FoldResult, error) {
	res := &FoldResult{Model: spec.Name, Fold: fold}
	var pred []float64
	if spec.Baseline == "" {
		q := *p
		q.Cfg = spec.Cfg
		pf := q.WithSplit(sets[0], sets[1], sets[2])
		f, err := Fit(ctx, pf, Hooks{}, nil)
		if err != nil {
			return nil, fmt.Errorf("%s, fold %d: %w", spec.Name, fold+1, err)
		}
		res.Epochs = len(f.Log)
		res.Curves = f.Curves
		if res.Curves == nil {
			res.Curves = PredictConditions(f.Net, p.NBins)
		}
		pf.Norm.InvertRows(res.Curves)
		if p.Soft() {
			pred = PredictTrials(f.Net, pf, sets[2])
		}
	} else {
		pf := p.WithSplit(append(slices.Clone(sets[0]), sets[1]...), nil, sets[2])
		curves, err := fitBaseline(pf, spec.Baseline)
		if err != nil {
			return nil, fmt.Errorf("%s, fold %d: %w", spec.Name, fold+1, err)
		}
		res.Curves = curves
	}
	res.Scores = make([]eval.Scores, p.Neurons())
	if pred != nil {
		eval.ScorePopulation(res.Scores, p.Rec.Y.Data, p.Neurons(), sets[2], p.Cond, pred, p.NBins)
	} else {
		eval.ScoreConditions(res.Scores, p.Rec.Y.Data, p.Neurons(), sets[2], p.Cond, res.Curves, p.NBins)
	}
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

// CompareMetrics are the metrics summarised and tested in a comparison.
var CompareMetrics = []string{"test_r2", "test_r", "fev", "cc_norm"}

func metricOf(s eval.Scores, name string) float64 {
	switch name {
	case "test_r2":
		return s.TestR2
	case "test_r":
		return s.TestR
	case "fev":
		return s.FEV
	case "cc_norm":
		return s.CCNorm
	case "explainable_fraction":
		return s.ExplainableFraction
	}
	return math.NaN()
}

// PairTest is the comparison of two models on one metric across neurons.
type PairTest struct {
	A, B   string
	Metric string
	// BeatsA is the share of neurons (with both scores defined) where A
	// scores higher than B.
	ShareA float64
	eval.Wilcoxon
}

// Comparison is the outcome of a cross-validated comparison.
type Comparison struct {
	// Recording names the recording ("" for a single one, "pooled" for
	// neurons pooled across recordings).
	Recording string
	Models    []string
	Folds     int
	Neurons   int
	// Excluded counts the neurons left out (constant responses).
	Excluded int
	// PerNeuron[model][metric] is each neuron's score averaged over the
	// folds (NaN folds left out; NaN for excluded neurons).
	PerNeuron map[string]map[string][]float64
	Summary   map[string]map[string]Spread
	Pairs     []PairTest
	// Winner is the model with the highest median, per metric.
	Winner map[string]string
}

// Summarise averages each neuron's scores over folds and compares models.
func Summarise(models []string, folds, neurons int, results []*FoldResult, excluded map[int]string) *Comparison {
	c := &Comparison{Models: models, Folds: folds, Neurons: neurons, Excluded: len(excluded), PerNeuron: map[string]map[string][]float64{}}
	for _, m := range models {
		c.PerNeuron[m] = map[string][]float64{}
		for _, k := range CompareMetrics {
			sum := make([]float64, neurons)
			cnt := make([]int, neurons)
			for _, r := range results {
				if r.Model != m {
					continue
				}
				for j, s := range r.Scores {
					if v := metricOf(s, k); !math.IsNaN(v) {
						sum[j] += v
						cnt[j]++
					}
				}
			}
			avg := make([]float64, neurons)
			for j := range avg {
				avg[j] = math.NaN()
				if _, ex := excluded[j]; !ex && cnt[j] > 0 {
					avg[j] = sum[j] / float64(cnt[j])
				}
			}
			c.PerNeuron[m][k] = avg
		}
	}
	c.compare()
	return c
}

// Pool pools the neurons of several comparisons, for the models that all
// of them share.
func Pool(cmps []*Comparison) *Comparison {
	var models []string
	for _, m := range cmps[0].Models {
		all := true
		for _, c := range cmps[1:] {
			all = all && slices.Contains(c.Models, m)
		}
		if all {
			models = append(models, m)
		}
	}
	p := &Comparison{Recording: "pooled", Models: models, Folds: cmps[0].Folds, PerNeuron: map[string]map[string][]float64{}}
	for _, c := range cmps {
		p.Neurons += c.Neurons
		p.Excluded += c.Excluded
	}
	for _, m := range models {
		p.PerNeuron[m] = map[string][]float64{}
		for _, k := range CompareMetrics {
			var v []float64
			for _, c := range cmps {
				v = append(v, c.PerNeuron[m][k]...)
			}
			p.PerNeuron[m][k] = v
		}
	}
	p.compare()
	return p
}

// compare fills the summaries, winners and pairwise tests from PerNeuron;
// excluded neurons (NaN throughout) are not counted as NaN scores.
func (c *Comparison) compare() {
	excluded := c.Excluded
	c.Summary = map[string]map[string]Spread{}
	c.Winner = map[string]string{}
	c.Pairs = nil
	for _, m := range c.Models {
		c.Summary[m] = map[string]Spread{}
		for _, k := range CompareMetrics {
			sm := eval.Summarize(c.PerNeuron[m][k])
			c.Summary[m][k] = Spread{Median: Num(sm.Median), Q1: Num(sm.Q1), Q3: Num(sm.Q3), N: sm.N, NaN: sm.NaN - excluded}
		}
	}
	for _, k := range CompareMetrics {
		best, bestV := "", math.Inf(-1)
		for _, m := range c.Models {
			if v := float64(c.Summary[m][k].Median); v > bestV {
				best, bestV = m, v
			}
		}
		c.Winner[k] = best
		for i, a := range c.Models {
			for _, b := range c.Models[i+1:] {
				x, y := c.PerNeuron[a][k], c.PerNeuron[b][k]
				var wins, both int
				for j := range x {
					if math.IsNaN(x[j]) || math.IsNaN(y[j]) {
						continue
					}
					both++
					if x[j] > y[j] {
						wins++
					}
				}
				pt := PairTest{A: a, B: b, Metric: k, ShareA: math.NaN(), Wilcoxon: eval.WilcoxonSignedRank(x, y)}
				if both > 0 {
					pt.ShareA = float64(wins) / float64(both)
				}
				c.Pairs = append(c.Pairs, pt)
			}
		}
	}
}
