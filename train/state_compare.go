package train

import (
	"context"
	"fmt"
	"github.com/strialab/stria/train/settings"
)

// The state variants of a comparison model (ModelSpec.State): the model's
// stimulus tuning with the covariates' state terms, or with the shared
// population gain read from the other half of the neurons. Their names are
// the base model's with the suffix "+" and the variant.
const (
	VariantState   = "state"
	VariantPopGain = "popgain"
)

// stateUnit fits the state terms of a state variant around the curves the
// base model fitted on the fold (res.Curves, recording units) and returns
// the prediction of the fold's test trials (len(pf.Test) x N). An encoder
// base refits as state.tuning says; a baseline base (its curves are per
// condition) fits tuning and state terms jointly (state.FitFree) when it is
// condmean, and holds its tuning fixed otherwise. res.Curves becomes the
// tuning the state terms ride on (at the average state), for descriptors.
func stateUnit(ctx context.Context, pf *Prepared, spec ModelSpec, res *FoldResult) ([]float64, error) {
	q := *pf
	cfg := *pf.Cfg
	rec := *pf.Rec
	q.Cfg, q.Rec = &cfg, &rec
	encoder := spec.Baseline == ""
	switch spec.State {
	case VariantState:
		if len(rec.Covariates) == 0 {
			return nil, fmt.Errorf("state variant: the recording has no covariates (data.covariates)")
		}
		cfg.State.PopulationGain = false
		if !encoder && spec.Baseline != "condmean" {
			cfg.State.Tuning = settings.StateFixed // FitFree suits only a free per-condition tuning
		}
	case VariantPopGain:
		rec.Covariates, rec.CovariateNames = nil, nil
		cfg.State.PopulationGain = true
	default:
		return nil, fmt.Errorf("unknown state variant %q", spec.State)
	}
	sf, err := StateFitCurves(ctx, &q, res.Curves, encoder || spec.Baseline != "condmean")
	if err != nil {
		return nil, err
	}
	if spec.State == VariantPopGain {
		if sf.Pop == nil {
			return nil, sf.PopError
		}
		return sf.Pop.Pred, nil
	}
	res.Curves = sf.Tuning
	return sf.Pred, nil
}
