package compare

import (
	"fmt"
	"path/filepath"
	"slices"
	"strings"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
	"github.com/strialab/stria/train/settings"
)

// unitSettings returns the settings the numbers of the units of spec si
// on recording rec depend on, as YAML (see settings.Config.NumericSettings):
//
//   - an encoder: its whole config (grid values applied) except the
//     compare section (the other models), the recordings list, the
//     checkpoint interval, split.test_fraction (units run on folds) and
//     the data file paths;
//   - a baseline: the data, axis, split (without test_fraction and
//     validation_fraction: it fits the fold's training and validation
//     trials together), scores settings and seed, and of the compare
//     section only the curve fit's own setting (starts for the von Mises
//     and Gaussian fits, smooth_lambda for smoothlinear): not the
//     encoder's model or training settings.
//
// The data files' paths are left out: the files' identity (size and
// content hash) stands for them, so a recording moved or copied elsewhere
// keeps its results.
func unitSettings(rec *settings.Config, spec train.ModelSpec) ([]byte, error) {
	var c settings.Config
	if spec.Baseline == "" {
		c = *spec.Cfg
		c.Compare = settings.CompareConfig{}
	} else {
		c = *rec
		c.Model = settings.ModelConfig{}
		c.Train = settings.TrainConfig{}
		c.Compare = settings.CompareConfig{Baselines: []string{spec.Baseline}}
		switch spec.Baseline {
		case "vonmises", "vonmises2", "gaussian":
			c.Compare.Starts = rec.Compare.Starts
		case "smoothlinear":
			c.Compare.SmoothLambda = rec.Compare.SmoothLambda
		}
	}
	if spec.Baseline != "" {
		// A baseline fits the fold's training and validation trials
		// together: how they are divided does not matter to it.
		c.Split.ValidationFraction = 0
	}
	// Units run on k folds; the single held-out split of a fit is not
	// used.
	c.Split.TestFraction = 0
	c.Recordings = nil
	// Acuity and which neurons the summaries keep are decided after the
	// units, from their scores.
	c.Acuity = settings.AcuityConfig{}
	c.Scores.MinReliability = 0
	c.Train.CheckpointEvery = 0
	c.Data.Responses, c.Data.Stimulus, c.Data.Condition, c.Data.Block = "", "", "", ""
	c.Data.Covariates = ""
	if spec.State == "" {
		// The state section and the covariates' names change only the
		// state variants (their files are part of the recording's
		// identity, as every data file).
		c.State = settings.StateConfig{}
		c.Data.CovariateColumns = nil
	} else {
		// A state variant depends on the state section, and on its
		// kind, which its name carries.
		c.Compare.Baselines = append(c.Compare.Baselines, spec.Name)
	}
	return c.NumericSettings()
}

// fingerprint is the fingerprint of unit u given its recording's files.
func (p *Plan) fingerprint(u Unit, files []format.FileID) runfolder.Fingerprint {
	return runfolder.Fingerprint{Settings: p.settings[u.Rec][u.Spec], Files: p.unitFiles(u, files)}
}

// checkDone reads the result of a finished unit and refuses it when its
// fingerprint differs from the unit's now. The error names every
// difference and how to go on.
func (p *Plan) checkDone(u Unit, files []format.FileID) (*comparefolder.FoldResult, error) {
	r, err := comparefolder.ReadFoldResult(p.Dir(), u.ID)
	if err != nil {
		return nil, err
	}
	if diff := p.fingerprint(u, files).Mismatch(r.Fingerprint, settings.DiffSettings); len(diff) > 0 {
		return nil, &StaleError{Dir: p.Dir(), Unit: u.ID, Diff: diff}
	}
	return r, nil
}

// StaleError refuses a finished unit whose result was computed with other
// settings or data than the comparison run now.
type StaleError struct {
	Dir  string
	Unit string
	Diff []string
}

func (e *StaleError) Error() string {
	d := slices.Clone(e.Diff)
	if len(d) > 12 {
		d = append(d[:12], fmt.Sprintf("... and %d more", len(e.Diff)-12))
	}
	return fmt.Sprintf("%s: the finished unit %s was computed with other settings or data; refusing to mix them:\n  %s\n"+
		"run the comparison into a new output folder, or start this one again with --overwrite (or delete %s)",
		e.Dir, e.Unit, strings.Join(d, "\n  "), filepath.Join(e.Dir, runfolder.DirFoldResults))
}
