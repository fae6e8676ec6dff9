package settings

import (
	"bytes"
	"fmt"
	"math"
	"path/filepath"
	"strings"

	"gopkg.in/yaml.v3"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/nn"
)

// Config is the YAML configuration of a fit (and, with Compare, of a
// comparison). Every field has a default, filled in by Defaults; the README
// lists them. Paths are relative to the folder of the config file.
type Config struct {
	Seed  uint64      `yaml:"seed"`
	Data  DataConfig  `yaml:"data"`
	Axis  AxisConfig  `yaml:"axis"`
	Split SplitConfig `yaml:"split"`
	Model ModelConfig `yaml:"model"`
	Train TrainConfig `yaml:"train"`
	// Recordings lists several recordings for stria compare; empty: the
	// data section is the one recording.
	Recordings []RecordingConfig `yaml:"recordings"`
	// Compare lists the models of stria compare.
	Compare CompareConfig `yaml:"compare"`
	// Scores says which noise ceilings are usable and which neurons the
	// summaries of ratio metrics keep.
	Scores ScoresConfig `yaml:"scores"`
	// Acuity is the section of stria acuity (config_acuity.go).
	Acuity AcuityConfig `yaml:"acuity"`
	// State is the per-trial gain and offset on the tuning
	// (config_state.go).
	State StateConfig `yaml:"state"`
	// Output is the run folder written by stria fit.
	Output string `yaml:"output"`

	// dir is the folder of the config file; relative paths resolve there.
	dir string
	// given holds the key paths the config file set (nil for a config
	// built in code); Validate requires some of them.
	given map[string]bool
}

// DataConfig says where the recording lives.
type DataConfig struct {
	Responses       string   `yaml:"responses"`
	ResponsesArray  string   `yaml:"responses_array"`
	NeuronColumns   []string `yaml:"neuron_columns"`
	Stimulus        string   `yaml:"stimulus"`
	StimulusColumn  string   `yaml:"stimulus_column"`
	Condition       string   `yaml:"condition"`
	ConditionColumn string   `yaml:"condition_column"`
	Block           string   `yaml:"block"`
	BlockColumn     string   `yaml:"block_column"`
	// Covariates is the optional file of per-trial state covariates
	// (.npy T or T x K, .npz or CSV/TSV); empty with covariate_columns:
	// the stimulus file. The state section says how they are used.
	Covariates       string   `yaml:"covariates"`
	CovariateColumns []string `yaml:"covariate_columns"`
}

// AxisConfig declares the stimulus axis and how values become model input.
type AxisConfig struct {
	Name     string  `yaml:"name"`
	Unit     string  `yaml:"unit"`
	Min      float64 `yaml:"min"`
	Max      float64 `yaml:"max"`
	Periodic bool    `yaml:"periodic"`
	BinWidth float64 `yaml:"bin_width"`
	Bins     int     `yaml:"bins"`
	// Encoding is onehot (each trial's bin) or soft (linear
	// interpolation between the two nearest bin centres).
	Encoding Encoding `yaml:"encoding"`
}

// SplitConfig controls the held-out test set, the validation part and
// normalisation.
type SplitConfig struct {
	TestFraction       float64 `yaml:"test_fraction"`
	ValidationFraction float64 `yaml:"validation_fraction"`
	Folds              int     `yaml:"folds"`
	// KeepBlocks keeps the trials of one block on one side of every split.
	KeepBlocks bool `yaml:"keep_blocks"`
	// BlockTrials, when the recording has no block ids, makes blocks of
	// this many consecutive trials (trials in time order); 0: none.
	BlockTrials int `yaml:"block_trials"`
	// ZScore standardises each neuron with the training trials' mean and
	// standard deviation.
	ZScore bool `yaml:"zscore"`
}

// LayerConfig is one conv layer.
type LayerConfig struct {
	Channels int         `yaml:"channels"`
	Kernel   int         `yaml:"kernel"`
	Stride   int         `yaml:"stride"`
	Border   LayerBorder `yaml:"border"`
}

// ModelConfig is the shared-filter encoder.
type ModelConfig struct {
	Layers    []LayerConfig `yaml:"layers"`
	Output    nn.Activation `yaml:"output"`
	Loss      Loss          `yaml:"loss"`
	ReadoutL2 Penalty       `yaml:"readout_l2"`
	// ReadoutL2PerNeuron, with readout_l2 auto, chooses one penalty per
	// neuron (by its own C_p, eval/methods.md §12) instead of one for all
	// (default true; a fixed number is one penalty for all neurons).
	ReadoutL2PerNeuron bool `yaml:"readout_l2_per_neuron"`
}

// TrainConfig is the optimiser and the stopping rule.
type TrainConfig struct {
	Optimizer    Optimizer `yaml:"optimizer"`
	LearningRate float64   `yaml:"learning_rate"`
	Beta1        float64   `yaml:"beta1"`
	Beta2        float64   `yaml:"beta2"`
	Epsilon      float64   `yaml:"epsilon"`
	WeightDecay  float64   `yaml:"weight_decay"`
	// BatchSize 0 trains full-batch (on per-condition sums when the input
	// is one-hot); a positive value trains on mini-batches of trials.
	BatchSize       int `yaml:"batch_size"`
	MaxEpochs       int `yaml:"max_epochs"`
	Patience        int `yaml:"patience"`
	CheckpointEvery int `yaml:"checkpoint_every"`
	// Threads is the number of cores stria uses (GOMAXPROCS); 0 is all.
	Threads int `yaml:"threads"`
	// Solver is auto (the default: projected wherever the model allows
	// it, adam otherwise), adam (gradient steps on all weights, the
	// reference) or projected (for fixed filters the best readout of every
	// neuron, the filters optimised on the resulting projected loss;
	// one-hot input, full batch; MSE with identity output: closed-form
	// ridge readout; Poisson with softplus or exp output: per-neuron
	// Newton readout, the Poisson fast path).
	Solver Solver `yaml:"solver"`
}

// ScoresConfig controls how held-out scores are judged against the noise
// ceiling (eval/methods.md §14).
type ScoresConfig struct {
	// CeilingAlpha is the level of the F test of a neuron's condition
	// effect on the scored trials: where it is not significant the noise
	// ceiling is unusable and the ratio metrics (FEV, cc_norm, SPE) are
	// NaN, with the reason in the ceiling column.
	CeilingAlpha float64 `yaml:"ceiling_alpha"`
	// MinReliability is the split-half reliability (all trials,
	// Spearman-Brown stepped up) a neuron needs to enter the summaries,
	// pair tests and figures of the ratio metrics; -1 keeps all.
	MinReliability float64 `yaml:"min_reliability"`
}

// Defaults returns a Config with every default filled in and no data.
func Defaults() Config {
	return Config{
		Seed: 1,
		Axis: AxisConfig{Name: "stimulus", Encoding: OneHot},
		Split: SplitConfig{
			TestFraction:       0.2,
			ValidationFraction: 0.1,
			Folds:              5,
			KeepBlocks:         true,
			ZScore:             true,
		},
		Model: ModelConfig{
			Layers:             []LayerConfig{{Channels: 8, Kernel: 9, Stride: 1}},
			Output:             nn.Identity,
			Loss:               MSE,
			ReadoutL2:          AutoPenalty,
			ReadoutL2PerNeuron: true,
		},
		Train: TrainConfig{
			Optimizer:       OptimizerAdam,
			LearningRate:    1e-2,
			Beta1:           0.9,
			Beta2:           0.999,
			Epsilon:         1e-8,
			MaxEpochs:       3000,
			Patience:        100,
			CheckpointEvery: 100,
			Solver:          SolverAuto,
		},
		Scores:  ScoresConfig{CeilingAlpha: eval.DefaultCeilingAlpha, MinReliability: eval.DefaultMinReliability},
		Compare: CompareConfig{Starts: 8, SmoothLambda: 2, Output: "stria-out/compare"},
		Acuity:  DefaultAcuity(),
		State:   DefaultState(),
		Output:  "stria-out/fit",
	}
}

// Resolve returns p relative to the config file's folder (unchanged if
// absolute or empty).
func (c *Config) Resolve(p string) string {
	if p == "" || filepath.IsAbs(p) || c.dir == "" {
		return p
	}
	return filepath.Join(c.dir, p)
}

// Source is the config's data section as a data.Source.
func (c *Config) Source() data.Source {
	d := c.Data
	return data.Source{
		Responses:       d.Responses,
		ResponsesArray:  d.ResponsesArray,
		NeuronColumns:   d.NeuronColumns,
		Stimulus:        d.Stimulus,
		StimulusColumn:  d.StimulusColumn,
		Condition:       d.Condition,
		ConditionColumn: d.ConditionColumn,
		Block:           d.Block,
		BlockColumn:     d.BlockColumn,

		Covariates:       d.Covariates,
		CovariateColumns: d.CovariateColumns,
	}
}

// DataAxis is the declared axis as a data.Axis.
func (c *Config) DataAxis() data.Axis {
	a := c.Axis
	return data.Axis{Name: a.Name, Unit: a.Unit, Min: a.Min, Max: a.Max, Periodic: a.Periodic, BinWidth: a.BinWidth, Bins: a.Bins}
}

// Validate refuses bad settings before any work starts. Each error names
// the field.
func (c *Config) Validate() error {
	var errs []string
	bad := func(format string, a ...any) { errs = append(errs, fmt.Sprintf(format, a...)) }
	if c.Data.Responses == "" && len(c.Recordings) == 0 {
		bad("data.responses: no response file given (set it in the config or with --responses)")
	}
	if c.given != nil {
		for _, k := range []string{"axis.min", "axis.max"} {
			if !c.given[k] {
				bad("%s: required (the stimulus range, e.g. min: 0 and max: 360 for directions in degrees; a range of -180 to 180 needs both)", k)
			}
		}
	}
	ax := c.DataAxis()
	nbins := 0
	if err := ax.Validate(); err != nil {
		bad("%v", err)
	} else {
		nbins = ax.NumBins()
	}
	s := c.Split
	if !(s.TestFraction > 0 && s.TestFraction < 1) {
		bad("split.test_fraction %v: want a value in (0, 1)", s.TestFraction)
	}
	if !(s.ValidationFraction > 0 && s.ValidationFraction < 1) {
		bad("split.validation_fraction %v: want a value in (0, 1)", s.ValidationFraction)
	}
	if s.BlockTrials < 0 {
		bad("split.block_trials %d: want 0 (no blocks) or a number of consecutive trials", s.BlockTrials)
	}
	if s.BlockTrials > 0 && (c.Data.Block != "" || c.Data.BlockColumn != "") {
		bad("split.block_trials %d and data.block/block_column: give block ids or a block length, not both", s.BlockTrials)
	}
	if s.Folds < 2 {
		bad("split.folds %d: want at least 2", s.Folds)
	}
	m := c.Model
	if len(m.Layers) == 0 {
		bad("model.layers: at least one conv layer is needed")
	}
	length := nbins
	for i, l := range m.Layers {
		if l.Channels < 1 {
			bad("model.layers[%d].channels %d: want at least 1", i, l.Channels)
		}
		if l.Kernel < 1 {
			bad("model.layers[%d].kernel %d: want at least 1", i, l.Kernel)
		}
		if l.Stride < 1 {
			bad("model.layers[%d].stride %d: want at least 1", i, l.Stride)
		}
		b := l.Border.resolve(c.Axis.Periodic)
		if length > 0 && l.Kernel >= 1 && l.Stride >= 1 {
			if l.Kernel > length {
				bad("model.layers[%d].kernel %d is longer than its input (%d positions)", i, l.Kernel, length)
				length = 0
				continue
			}
			if b == nn.Valid {
				length = (length-l.Kernel)/l.Stride + 1
			} else {
				length = (length-1)/l.Stride + 1
			}
		}
	}
	switch m.Loss {
	case MSE:
	case Poisson:
		if m.Output == nn.Identity {
			bad("model.loss poisson needs a positive output: set model.output to softplus or exp")
		}
		if s.ZScore {
			bad("model.loss poisson needs the raw non-negative counts: set split.zscore: false")
		}
	}
	if !(m.ReadoutL2.Value >= 0) || math.IsInf(m.ReadoutL2.Value, 0) {
		bad("model.readout_l2 %v: want auto or a finite value >= 0", m.ReadoutL2)
	}

	t := c.Train
	if !(t.LearningRate > 0) || math.IsInf(t.LearningRate, 0) {
		bad("train.learning_rate %v: want a finite value > 0", t.LearningRate)
	}
	if !(t.Beta1 >= 0 && t.Beta1 < 1) {
		bad("train.beta1 %v: want a value in [0, 1)", t.Beta1)
	}
	if !(t.Beta2 >= 0 && t.Beta2 < 1) {
		bad("train.beta2 %v: want a value in [0, 1)", t.Beta2)
	}
	if !(t.Epsilon > 0) {
		bad("train.epsilon %v: want a value > 0", t.Epsilon)
	}
	if !(t.WeightDecay >= 0) {
		bad("train.weight_decay %v: want a value >= 0", t.WeightDecay)
	}
	if t.BatchSize < 0 {
		bad("train.batch_size %d: want 0 (full batch) or a positive size", t.BatchSize)
	}
	if t.MaxEpochs < 1 {
		bad("train.max_epochs %d: want at least 1", t.MaxEpochs)
	}
	if t.Patience < 1 {
		bad("train.patience %d: want at least 1", t.Patience)
	}
	if t.CheckpointEvery < 1 {
		bad("train.checkpoint_every %d: want at least 1", t.CheckpointEvery)
	}
	if t.Solver == SolverProjected && !c.projectable() && !c.poissonProjectable() {
		bad("train.solver projected needs axis.encoding onehot, train.batch_size 0 and either model.loss mse with model.output identity or model.loss poisson with model.output softplus or exp")
	}
	if t.Threads < 0 {
		bad("train.threads %d: want 0 (all cores) or more", t.Threads)
	}
	if !(c.Scores.CeilingAlpha > 0 && c.Scores.CeilingAlpha <= 1) {
		bad("scores.ceiling_alpha %v: want a level in (0, 1], e.g. 0.05", c.Scores.CeilingAlpha)
	}
	if !(c.Scores.MinReliability >= -1 && c.Scores.MinReliability <= 1) {
		bad("scores.min_reliability %v: want a value in [-1, 1] (-1 keeps every neuron)", c.Scores.MinReliability)
	}
	if c.Compare.Starts < 1 {
		bad("compare.starts %d: want at least 1", c.Compare.Starts)
	}
	if !(c.Compare.SmoothLambda >= 0) {
		bad("compare.smooth_lambda %v: want a value >= 0", c.Compare.SmoothLambda)
	}
	c.validateAcuity(bad)
	c.validateState(bad)
	if c.Output == "" {
		bad("output: no run folder given (set it in the config or with --out)")
	}
	if len(errs) > 0 {
		return fmt.Errorf("invalid config:\n  %s", strings.Join(errs, "\n  "))
	}
	return nil
}

// projectable reports whether the projected solver can fit the model.
func (c *Config) projectable() bool {
	m, t := c.Model, c.Train
	return m.Loss == MSE && m.Output == nn.Identity && c.Axis.Encoding == OneHot && t.BatchSize == 0
}

// poissonProjectable reports whether train.solver projected can fit the
// model with the Poisson fast path: Poisson loss with a softplus or exp
// output on one-hot input, full batch. Solver auto chooses it: on
// BenchmarkPoissonSolvers it closed twice adam's share of the gap to the
// noise-free means and reached adam's best validation loss in under half
// adam's time.
func (c *Config) poissonProjectable() bool {
	m, t := c.Model, c.Train
	return m.Loss == Poisson && (m.Output == nn.Softplus || m.Output == nn.Exp) && c.Axis.Encoding == OneHot && t.BatchSize == 0
}

// SolverToRun is the solver a fit of this config runs: train.solver, with
// auto resolved to the fastest exact solver the model allows.
func (c *Config) SolverToRun() Solver {
	if c.Train.Solver != SolverAuto {
		return c.Train.Solver
	}
	if c.projectable() || c.poissonProjectable() {
		return SolverProjected
	}
	return SolverAdam
}

// Shape is the nn.Shape the config describes for nbins positions and n
// neurons. The config must be valid.
func (c *Config) Shape(nbins, neurons int) nn.Shape {
	s := nn.Shape{In: 1, Length: nbins, Neurons: neurons}
	for _, l := range c.Model.Layers {
		s.Convs = append(s.Convs, nn.ConvSpec{Out: l.Channels, K: l.Kernel, Stride: l.Stride, Border: l.Border.resolve(c.Axis.Periodic)})
	}
	s.Output = c.Model.Output
	return s
}

// Marshal returns the resolved config as YAML.
func (c *Config) Marshal() ([]byte, error) {
	var buf bytes.Buffer
	enc := yaml.NewEncoder(&buf)
	enc.SetIndent(2)
	if err := enc.Encode(c); err != nil {
		return nil, err
	}
	return buf.Bytes(), enc.Close()
}
