package train

import (
	"context"
	"fmt"
	"slices"

	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/nn"
	"github.com/strialab/stria/train/projection"
	"github.com/strialab/stria/train/settings"
)

// A fit from Parts in stages, for array tasks over ranges of neurons
// (NeuronRange) that never hold the statistics of all neurons at once:
//
//  1. each range: PlanParts, its statistics, SetParts, then RangeSums,
//     its contribution to the sums over neurons (block by block);
//  2. once: the ranges' block sums added in block order
//     (projection.AddBlocks), FitFilters trains the filters on them;
//  3. each range: FitRange solves its neurons' readouts at those filters
//     and scores them (ScoreFitted), and gives its neurons' validation
//     R^2 at the best filters;
//  4. once: the ranges' results joined; MergedLog completes the training
//     log with the median validation R^2, SetMerged prepares the
//     recording for writing the run folder.
//
// Every number is that of Fit on all the neurons in one process, bit for
// bit: each neuron's depends only on its own statistics and on the sums
// over neurons, which both take in the same grouping (projection.Sums).

// RangeSums returns the block sums (projection.BlockSumsOf) of the
// neurons of a recording prepared from Parts (a range of neurons
// starting at a block boundary). It overwrites the training and
// validation sums of p.Parts, which are spent afterwards.
func RangeSums(p *Prepared) ([]projection.BlockSums, error) {
	if err := checkStaged(p.Cfg); err != nil {
		return nil, err
	}
	if p.Parts == nil {
		panic("train: RangeSums of a recording not prepared from Parts")
	}
	b, err := projection.BlockSumsOf(p.problem())
	p.Parts.Train.Sum, p.Parts.Val.Sum = nil, nil
	return b, err
}

// checkStaged refuses a config the stages do not fit: one Streamable
// refuses (callers have refused it with a message of their own).
func checkStaged(cfg *settings.Config) error {
	if why := Streamable(cfg); why != "" {
		return fmt.Errorf("a fit in stages needs statistics per condition, but %s", why)
	}
	return nil
}

// FitFilters trains the filters of a fit on the sums over all its
// neurons, as Fit does from Parts (the same initialisation, solver and
// stopping rule): the Fitted has the filters in Net (one neuron) and the
// training log, whose validation R^2 is NaN throughout (MergedLog fills
// the best epoch's), and no readout.
func FitFilters(ctx context.Context, cfg *settings.Config, sums *projection.Sums, hooks Hooks) (*Fitted, error) {
	if err := checkStaged(cfg); err != nil {
		return nil, err
	}
	pr := projection.Problem{Sums: sums, Penalty: cfg.Model.ReadoutL2.Value}
	f, _, err := trainFilters(ctx, cfg, len(sums.TrainCount), 1, pr, hooks, nil)
	return f, err
}

// FitRange solves the readouts of the neurons of a recording prepared
// from Parts (a range of neurons) at the filters conv (the conv
// parameters of FitFilters' net, in the order of nn.Net's Params) and
// the sums over all neurons, as Fit does after training: the Fitted holds
// the readouts (Readout, Bias, ReadoutL2, Curves) and no log. valR2 is
// every neuron's validation R^2 at the filters (NaN where undefined; nil
// without validation trials), for MergedLog.
func FitRange(p *Prepared, sums *projection.Sums, conv []float64) (f *Fitted, valR2 []float64, err error) {
	if err := checkStaged(p.Cfg); err != nil {
		return nil, nil, err
	}
	if p.Parts == nil {
		panic("train: FitRange of a recording not prepared from Parts")
	}
	net, err := FiltersNet(p.Cfg, p.NBins, conv)
	if err != nil {
		return nil, nil, err
	}
	pr := p.problem()
	pr.Sums = sums
	s, err := projection.NewMSE(pr, net)
	if err != nil {
		return nil, nil, err
	}
	if valR2, err = s.ValR2s(); err != nil {
		return nil, nil, err
	}
	f = &Fitted{Net: net, Solver: settings.SolverProjected}
	if err := readoutProjected(p, s, f); err != nil {
		return nil, nil, err
	}
	return f, valR2, nil
}

// FiltersNet returns the config's net of one neuron over nbins bins with
// the filters conv (the conv parameters of FitFilters' net) and a zero
// readout.
func FiltersNet(cfg *settings.Config, nbins int, conv []float64) (*nn.Net, error) {
	net := nn.NewNet(cfg.Shape(nbins, 1))
	if nconv := len(net.Params) - net.Features() - 1; len(conv) != nconv {
		return nil, fmt.Errorf("train: %d filter parameters, the config's encoder has %d", len(conv), nconv)
	}
	copy(net.Params, conv)
	return net, nil
}

// MergedLog gives the best epoch of a log of FitFilters the median of
// the neurons' validation R^2 (FitRange's, joined in neuron order), as
// Fit records it.
func MergedLog(f *Fitted, valR2 []float64) error {
	return fillBestR2(f, func() (float64, error) { return projection.MedianR2(valR2), nil })
}

// SetMerged finishes a preparation begun by PlanParts for writing the
// run folder of a fit in stages, from the ranges' per-neuron results
// joined in neuron order: the split-half reliability over all trials,
// the constant neurons (increasing) and the z-scoring (nil without
// split.z_score). p.Parts then holds no statistics, only the number of
// neurons and the reliability: p can be written (runfolder) but not
// fitted or scored.
func (p *Prepared) SetMerged(neurons int, reliability []float64, constant []int, norm *condstats.Normalizer) error {
	if len(reliability) != neurons || !slices.IsSorted(constant) {
		panic(fmt.Sprintf("train: SetMerged of %d neurons with %d reliabilities or unsorted constant neurons", neurons, len(reliability)))
	}
	p.Parts = &Parts{Test: &condstats.PartStats{B: p.NBins, N: neurons, Count: p.TrialsPerCondition(p.Test)}, Reliability: reliability}
	if err := p.setReport(constant); err != nil {
		return err
	}
	if p.Cfg.Split.ZScore != (norm != nil) {
		panic("train: SetMerged: z-scoring and the config's split.z_score disagree")
	}
	p.Norm = norm
	return nil
}
