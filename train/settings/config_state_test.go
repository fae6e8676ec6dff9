package settings

import (
	"github.com/strialab/stria/nn"
	"strings"
	"testing"
)

// TestStateConfigErrors checks that every bad setting of the state
// section is refused with a message naming its key.
func TestStateConfigErrors(t *testing.T) {
	cases := []struct {
		name string
		edit func(*Config)
		want string
	}{
		{"rounds", func(c *Config) { c.State.Rounds = 0 }, "state.rounds 0"},
		{"ridge", func(c *Config) { c.State.Ridge = -1 }, "state.ridge -1"},
		{"share", func(c *Config) { c.State.StimulusShareWarning = 0 }, "state.stimulus_share_warning 0"},
		{"offset without gain", func(c *Config) { c.State.PopulationOffset = true }, "state.population_offset: needs state.population_gain: true"},
		{"variants without state", func(c *Config) { c.State.CompareModels = []string{"encoder"} }, "state.compare_models: state variants need covariates"},
		{"empty covariate name", func(c *Config) { c.Data.CovariateColumns = []string{"speed", " "} }, "data.covariate_columns[1]: empty name"},
		{"refit with soft input", func(c *Config) { c.Data.Covariates = "speed.npy"; c.State.Tuning = StateRefit; c.Axis.Encoding = Soft }, "state.tuning refit refits the encoder"},
		{"refit with poisson", func(c *Config) {
			c.Data.Covariates, c.State.Tuning = "speed.npy", StateRefit
			c.Model.Loss, c.Model.Output, c.Split.ZScore = Poisson, nn.Softplus, false
		}, "with model.loss poisson set state.tuning: fixed"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			cfg := validBase()
			c.edit(&cfg)
			err := cfg.Validate()
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("got error %v, want one containing %q", err, c.want)
			}
		})
	}
	cfg := validBase()
	cfg.Data.Covariates = "speed.npy"
	cfg.Axis.Encoding = Soft
	if err := cfg.Validate(); err != nil {
		t.Errorf("state.tuning fixed (the default) with soft input: got %v, want no error", err)
	}
}

// TestStateConfigFile: the state section parses, an unknown word names its
// line and key, and the settings a result depends on change with it.
func TestStateConfigFile(t *testing.T) {
	good := "axis: {min: 0, max: 360}\ndata:\n  responses: r.npy\n  covariates: speed.npy\n  covariate_columns: [speed]\nstate:\n  tuning: refit\n  ridge: 0.01\n  population_gain: true\n"
	cfg, err := ParseConfig([]byte(good), "c.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if cfg.State.Tuning != StateRefit || cfg.State.Ridge != 0.01 || !cfg.State.PopulationGain || cfg.Data.Covariates != "speed.npy" || !cfg.StateActive() {
		t.Errorf("got state %+v, covariates %q", cfg.State, cfg.Data.Covariates)
	}
	a, _ := cfg.NumericSettings()
	cfg.State.Ridge = 0.02
	b, _ := cfg.NumericSettings()
	if Hash(a) == Hash(b) {
		t.Errorf("state.ridge does not change the numeric settings")
	}
	_, err = ParseConfig([]byte("state:\n  tuning: free\n"), "c.yaml")
	if err == nil || !strings.Contains(err.Error(), `line 2: state.tuning "free": want fixed or refit`) {
		t.Errorf("got error %v, want the line, key and words", err)
	}
	_, err = ParseConfig([]byte("state:\n  ridg: 1\n"), "c.yaml")
	if err == nil || !strings.Contains(err.Error(), `line 2: unknown key "state.ridg"`) {
		t.Errorf("got error %v, want the line and key", err)
	}
}
