package compare

import (
	"fmt"
	"slices"
	"strings"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/settings"
)

// stateSpecs returns the state variants of a comparison (eval/methods.md
// §17): for each base model named in state.compare_models (none by
// default: each variant costs a unit per fold) the variant name+state when the
// recording has covariates and name+popgain with state.population_gain.
// They are listed after the models they vary, scored on the same folds
// and enter the same pair tests. None when the config has no state terms.
func stateSpecs(c *settings.Config, specs []train.ModelSpec) ([]train.ModelSpec, error) {
	if !c.StateActive() {
		return nil, nil
	}
	bases := c.State.CompareModels
	var kinds []string
	if c.HasCovariates() {
		kinds = append(kinds, train.VariantState)
	}
	if c.State.PopulationGain {
		kinds = append(kinds, train.VariantPopGain)
	}
	var out []train.ModelSpec
	for i, b := range bases {
		k := slices.IndexFunc(specs, func(s train.ModelSpec) bool { return s.Name == b })
		if k < 0 {
			names := make([]string, len(specs))
			for j, s := range specs {
				names[j] = s.Name
			}
			return nil, fmt.Errorf("state.compare_models[%d]: no model %q in the comparison (models: %s)", i, b, strings.Join(names, ", "))
		}
		base := specs[k]
		for _, kind := range kinds {
			v := base
			v.Name = base.Name + "+" + kind
			v.State = kind
			if kind == train.VariantState && base.Baseline == "" && c.State.Tuning == settings.StateRefit {
				if err := refitAllowed(base.Cfg); err != nil {
					return nil, fmt.Errorf("state variant %s: %w", v.Name, err)
				}
			}
			out = append(out, v)
		}
	}
	return out, nil
}

// refitAllowed checks that an encoder spec can be refitted on condition
// targets (state.tuning refit).
func refitAllowed(cfg *settings.Config) error {
	c := *cfg
	c.Data.Covariates = "x"
	return c.Validate()
}

// stateCautions returns the caution shown beside scores of state variants
// (runfolder.StateCaution), when the comparison has any.
func stateCautions(specs []train.ModelSpec) []string {
	for _, s := range specs {
		if s.State != "" {
			return []string{"Models named +state or +popgain add per-trial state terms. " + runfolder.StateCaution}
		}
	}
	return nil
}

// unitFiles returns the recording's files a unit's numbers depend on: all
// of them for a state variant; without the covariate file for the other
// models, which never read it (unless it is also the responses or stimulus
// file), so that adding or changing covariates keeps their results.
func (p *Plan) unitFiles(u Unit, files []format.FileID) []format.FileID {
	rec := p.Recordings[u.Rec]
	d := rec.Cfg.Data
	if rec.Specs[u.Spec].State != "" || d.Covariates == "" || d.Covariates == d.Responses || d.Covariates == d.Stimulus {
		return files
	}
	out := make([]format.FileID, 0, len(files))
	for _, f := range files {
		if f.Path != d.Covariates {
			out = append(out, f)
		}
	}
	return out
}
