package settings

import (
	"math"
	"strings"
)

// StateConfig is the state section: the per-trial gain and offset on the
// stimulus tuning (eval/state, eval/methods.md §17). The covariates
// themselves are data (data.covariates, data.covariate_columns); this
// section says how their terms are fitted, whether a shared gain is read
// from the population, and which models of stria compare get state
// variants. The section does nothing unless the recording has covariates
// or population_gain is true.
type StateConfig struct {
	// Tuning is fixed (the default: the state terms are fitted with the
	// stimulus-only tuning held fixed) or refit (the encoder is refitted on
	// the state-corrected condition targets, alternating with the state
	// terms). On simulations with planted truth fixed recovers the gains
	// better with the default encoder (per-neuron readout penalties),
	// refit with one penalty for all neurons or a flexible encoder
	// (train.TestStateMethods; eval/methods.md §17).
	Tuning StateTuning `yaml:"tuning"`
	// Rounds is the number of refit rounds (tuning refit).
	Rounds int `yaml:"rounds"`
	// Ridge is the scale-free ridge of the state terms (eval/state
	// FitAffine); 0 is plain least squares.
	Ridge float64 `yaml:"ridge"`
	// PopulationGain adds a shared per-trial gain read from the other half
	// of the neurons (no covariate file needed).
	PopulationGain bool `yaml:"population_gain"`
	// PopulationOffset adds a shared per-trial offset beside that gain.
	PopulationOffset bool `yaml:"population_offset"`
	// StimulusShareWarning is the share of a covariate's variance
	// explained by the condition (eta^2) above which stria warns that the
	// covariate is tied to the stimulus.
	StimulusShareWarning float64 `yaml:"stimulus_share_warning"`
	// CompareModels are the models of stria compare that get state
	// variants (name+state, name+popgain); empty: none.
	CompareModels []string `yaml:"compare_models"`
}

// StateTuning is state.tuning.
type StateTuning int

const (
	// StateFixed fits the state terms with the stimulus tuning held fixed.
	StateFixed StateTuning = iota
	// StateRefit alternates the state terms with a refit of the encoder on
	// the weighted condition targets.
	StateRefit
)

var stateTuningWords = []string{"fixed", "refit"}

func (v StateTuning) String() string               { return word(stateTuningWords, int(v)) }
func (v StateTuning) MarshalText() ([]byte, error) { return marshalWord(stateTuningWords, int(v)) }
func (v *StateTuning) UnmarshalText(b []byte) error {
	return unmarshalWord(stateTuningWords, b, (*int)(v))
}

// DefaultState returns the state section's defaults.
func DefaultState() StateConfig {
	return StateConfig{Tuning: StateFixed, Rounds: 1, Ridge: 1e-3, StimulusShareWarning: 0.1}
}

// HasCovariates reports whether the data section names per-trial
// covariates.
func (c *Config) HasCovariates() bool {
	return c.Data.Covariates != "" || len(c.Data.CovariateColumns) > 0
}

// StateActive reports whether a fit of this config fits state terms.
func (c *Config) StateActive() bool { return c.HasCovariates() || c.State.PopulationGain }

// validateState checks the state section and data.covariate_columns.
func (c *Config) validateState(bad func(string, ...any)) {
	s := c.State
	if s.Rounds < 1 {
		bad("state.rounds %d: want at least 1", s.Rounds)
	}
	if !(s.Ridge >= 0) || math.IsInf(s.Ridge, 0) {
		bad("state.ridge %v: want a finite value >= 0 (0 is plain least squares)", s.Ridge)
	}
	if !(s.StimulusShareWarning > 0 && s.StimulusShareWarning <= 1) {
		bad("state.stimulus_share_warning %v: want a share in (0, 1], e.g. 0.1", s.StimulusShareWarning)
	}
	if s.PopulationOffset && !s.PopulationGain {
		bad("state.population_offset: needs state.population_gain: true")
	}
	if len(s.CompareModels) > 0 && !c.StateActive() {
		bad("state.compare_models: state variants need covariates (data.covariates or data.covariate_columns) or state.population_gain: true")
	}
	for i, n := range c.Data.CovariateColumns {
		if strings.TrimSpace(n) == "" {
			bad("data.covariate_columns[%d]: empty name", i)
		}
	}
	if c.HasCovariates() && s.Tuning == StateRefit && !c.projectable() && !c.poissonProjectable() {
		bad("state.tuning refit refits the encoder on condition targets, so it needs axis.encoding onehot and train.batch_size 0; set state.tuning: fixed")
	}
	if c.HasCovariates() && s.Tuning == StateRefit && c.Model.Loss == Poisson {
		bad("state.tuning refit fits squared error; with model.loss poisson set state.tuning: fixed")
	}
}
