package settings

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
	ReadoutL2    *Penalty             `yaml:"readout_l2"`
	LearningRate *float64             `yaml:"learning_rate"`
	WeightDecay  *float64             `yaml:"weight_decay"`
	Solver       *Solver              `yaml:"solver"`
	Grid         map[string][]float64 `yaml:"grid"`
}

// RecordingConfig is one entry of the recordings list of a comparison.
// Its data paths other than responses are relative to the folder of the
// responses file; responses may be a glob, which expands into one
// recording per match.
type RecordingConfig struct {
	Name       string `yaml:"name"`
	DataConfig `yaml:",inline"`
	// Axis replaces the top-level axis for this recording when given.
	Axis *AxisConfig `yaml:"axis"`
}
