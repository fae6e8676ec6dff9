package train

import (
	"context"
	"fmt"
	"github.com/strialab/stria/train/settings"
	"math"
	"math/rand/v2"

	"github.com/strialab/stria/nn"
	"github.com/strialab/stria/train/projection"
)

// problem reduces a prepared recording to what the projected solvers read.
func (p *Prepared) problem() projection.Problem {
	if p.Parts != nil {
		return projection.Problem{
			TrainParts: p.Parts.Train, ValParts: p.Parts.Val, Norm: p.Norm,
			Penalty:    p.Cfg.Model.ReadoutL2.Value,
			NeuronName: p.Rec.NeuronName,
			BinLabel:   p.Axis.BinLabel,
		}
	}
	return projection.Problem{
		Train: p.TrainStats(), Val: p.ValStats(), Norm: p.Norm,
		Penalty:    p.Cfg.Model.ReadoutL2.Value,
		Excluded:   p.Report.Constant,
		NeuronName: p.Rec.NeuronName,
		BinLabel:   p.Axis.BinLabel,
	}
}

// fitProjected trains with the closed-form readout (eval/methods.md §8,
// variable projection; train/projection): only the filters are optimised,
// by L-BFGS (projection.MSEQN) on the projected objective, under the
// quasi-Newton stopping rule of qnLimits; early stopping uses the
// validation loss of the closed-form readout, the best filters are kept
// and the readout of all neurons is computed once at the end, at the
// config's penalty or, with model.readout_l2 auto, at one chosen from the
// data (eval/methods.md §12). Adam's settings (learning rate, betas,
// epsilon) do not apply; train.weight_decay adds (weight_decay / 2)
// ||theta||^2 over the filters to the objective. A Checkpoint of this
// solver holds only the conv parameters and no random state; a resumed
// fit restarts the quasi-Newton memory.
//
// With projectedAdam set (tests and benchmarks only) the filters are
// trained by Adam with the config's train settings, as before the
// quasi-Newton solver (the reference it was measured against).
func fitProjected(ctx context.Context, p *Prepared, hooks Hooks, resume *Checkpoint) (*Fitted, error) {
	// From Parts the solver gets a net of one neuron: it trains only the
	// filters, and a readout of N x F values (3.8 GB at a million
	// neurons) would be allocated, and zeroed, for nothing; the readout
	// comes back as Fitted.Readout and Bias.
	curvesOnly := hooks.CurvesOnly && p.Parts == nil && p.Cfg.Model.ReadoutL2.Auto
	shapeN := p.Neurons()
	if p.Parts != nil || curvesOnly {
		shapeN = 1
	}
	f, s, err := trainFilters(ctx, p.Cfg, p.NBins, shapeN, p.problem(), hooks, resume)
	if err != nil {
		return nil, err
	}
	// The best epoch always carries its R^2, even when it was skipped.
	if err := fillBestR2(f, s.ValR2); err != nil {
		return nil, err
	}
	if curvesOnly {
		// AutoReadout's curves and penalties (the same call), without
		// its weights.
		f.Curves, f.ReadoutL2, _, _, err = s.ReadoutBlocks(true, p.Cfg.Model.ReadoutL2PerNeuron)
		return f, err
	}
	if err := readoutProjected(p, s, f); err != nil {
		return nil, err
	}
	return f, nil
}

// trainFilters trains the filters of the MSE projected solver on pr (a
// net of shapeN neurons and the config's shape, the filters initialised
// from the seed) and returns the fit without its readout, and the solver
// at the best filters.
func trainFilters(ctx context.Context, cfg *settings.Config, nbins, shapeN int, pr projection.Problem, hooks Hooks, resume *Checkpoint) (*Fitted, *projection.MSE, error) {
	net := nn.NewNet(cfg.Shape(nbins, shapeN))
	net.InitConvs(rand.New(rand.NewPCG(cfg.Seed, 0x1417)))
	var s *projection.MSE
	var sv solver
	tc, limited := cfg.Train, false
	if projectedAdam {
		m, err := projection.NewMSE(pr, net)
		if err != nil {
			return nil, nil, err
		}
		s, sv = m, m
	} else {
		tc, limited = qnLimits(cfg.Train)
		q, err := projection.NewMSEQN(pr, net)
		if err != nil {
			return nil, nil, err
		}
		q.WeightDecay = tc.WeightDecay
		s, sv = q.MSE, q
	}
	res, err := runEpochs(ctx, sv, tc, hooks, resume)
	if err != nil {
		return nil, nil, err
	}
	f := &Fitted{Net: net, Solver: settings.SolverProjected, Log: res.log, BestEpoch: res.bestEpoch, Stop: res.stop}
	if limited {
		f.Stop = qnStop(res.stop, tc, cfg.Train)
	}
	return f, s, nil
}

// readoutProjected solves the readout of the solver's filters into f:
// at the config's penalty or, with model.readout_l2 auto, at one chosen
// from the data (eval/methods.md §12).
func readoutProjected(p *Prepared, s *projection.MSE, f *Fitted) error {
	cfg := p.Cfg
	var err error
	switch {
	case p.Parts != nil:
		f.Curves, f.ReadoutL2, f.Bias, f.Readout, err = s.ReadoutBlocks(cfg.Model.ReadoutL2.Auto, cfg.Model.ReadoutL2PerNeuron)
		// The solver kept its means in the training and validation sums:
		// they are spent.
		p.Parts.Train.Sum, p.Parts.Val.Sum = nil, nil
	case cfg.Model.ReadoutL2.Auto:
		f.Curves, f.ReadoutL2, err = s.AutoReadout(cfg.Model.ReadoutL2PerNeuron)
	default:
		f.Curves, err = s.Readout()
	}
	return err
}

// fitPoissonProjected trains with the Poisson fast path (train/projection,
// eval/methods.md §13): per-neuron Newton readouts on the condition rows,
// the filters by L-BFGS on the resulting loss (projection.PoissonQN). One
// epoch of the loop, and one row of training_history.csv, is one
// quasi-Newton iteration (a direction and its line search; several
// evaluations of the objective); training stops after
// min(train.patience, qnPatience) iterations without a lower
// validation loss or after min(train.max_epochs, qnMaxIter)
// iterations, and keeps the filters of the best one. Adam's settings
// (learning rate, betas, epsilon) do not apply; train.weight_decay adds
// (weight_decay / 2) ||theta||^2 over the filters to the objective (with
// optimizer adam or adamw alike). After training the readouts of the
// best filters are solved exactly and written into the net, at the
// config's penalty or, with model.readout_l2 auto, at one chosen for all
// neurons on the validation trials (eval/methods.md §12).
//
// A checkpoint holds the conv parameters only: a resumed fit solves the
// readouts afresh and restarts the quasi-Newton memory (its first step is
// a steepest-descent one), so it ends near, but not bit for bit at, the
// filters of an uninterrupted fit.
func fitPoissonProjected(ctx context.Context, p *Prepared, hooks Hooks, resume *Checkpoint) (*Fitted, error) {
	cfg := p.Cfg
	net := nn.NewNet(cfg.Shape(p.NBins, p.Neurons()))
	net.InitConvs(rand.New(rand.NewPCG(cfg.Seed, 0x1417)))
	tc, limited := qnLimits(cfg.Train)
	s, err := projection.NewPoissonQN(p.problem(), net)
	if err != nil {
		return nil, err
	}
	s.WeightDecay = tc.WeightDecay
	res, err := runEpochs(ctx, s, tc, hooks, resume)
	if err != nil {
		return nil, err
	}
	f := &Fitted{Net: net, Solver: settings.SolverProjected, Log: res.log, BestEpoch: res.bestEpoch, Stop: res.stop}
	if limited {
		f.Stop = qnStop(res.stop, tc, cfg.Train)
	}
	var vr2 float64
	if cfg.Model.ReadoutL2.Auto && p.ValStats() != nil && len(p.Val) > 0 {
		// The best epoch's R^2 is that of the trained penalty: solved
		// here only when the log lacks it.
		vr2 = math.NaN()
		if bestR2Missing(res) {
			ev, err := s.Evaluate(false, true)
			if err != nil {
				return nil, err
			}
			vr2 = ev.ValR2
		}
		// One penalty for all neurons: a choice per neuron on its own
		// validation loss was worse on BenchmarkPoissonSolvers (median
		// held-out R^2 0.3588 against 0.3632 at 2,000 neurons), so
		// model.readout_l2_per_neuron does not apply here.
		if f.Curves, f.ReadoutL2, _, err = s.AutoReadout(false); err != nil {
			return nil, err
		}
	} else {
		f.Curves, vr2, err = s.Readout()
	}
	if err != nil {
		return nil, err
	}
	if err := fillBestR2(f, func() (float64, error) { return vr2, nil }); err != nil {
		return nil, err
	}
	return f, nil
}

// bestR2Missing reports whether the best epoch of the log has no R^2.
func bestR2Missing(res *loopResult) bool {
	for _, e := range res.log {
		if e.Epoch == res.bestEpoch && math.IsNaN(e.ValR2) {
			return true
		}
	}
	return false
}

// fillBestR2 gives the best epoch of the log the validation R^2 of the
// current (best) parameters where the solver skipped it.
func fillBestR2(res *Fitted, valR2 func() (float64, error)) error {
	for i := range res.Log {
		if e := &res.Log[i]; e.Epoch == res.BestEpoch && math.IsNaN(e.ValR2) {
			v, err := valR2()
			if err != nil {
				return err
			}
			e.ValR2 = v
		}
	}
	return nil
}

// The quasi-Newton solvers' stopping rule (MSE and Poisson), in
// iterations: patience and cap. On BenchmarkPoissonSolvers (500 and 2,000
// neurons) the validation loss is lowest at iteration 8 and the method
// has converged by iteration 10-20 (later iterations change the training
// loss by less than 1e-6 of itself), so ten iterations without
// improvement end a fit whose best filters are behind it. The same holds
// for MSE on BenchmarkQuality (see qnLimits's callers' tests).
const (
	qnPatience = 10
	qnMaxIter  = 500
)

// projectedAdam makes fitProjected train the MSE filters by Adam (tests
// and benchmarks: the reference the quasi-Newton solver is measured
// against).
var projectedAdam bool

// qnLimits returns the train settings under the quasi-Newton stopping
// rule (patience and max_epochs at most qnPatience and qnMaxIter, counted
// in iterations) and whether they differ from tc's.
func qnLimits(tc settings.TrainConfig) (settings.TrainConfig, bool) {
	q := tc
	q.Patience = min(tc.Patience, qnPatience)
	q.MaxEpochs = min(tc.MaxEpochs, qnMaxIter)
	return q, q.Patience != tc.Patience || q.MaxEpochs != tc.MaxEpochs
}

// qnStop is the stop string of a quasi-Newton fit: the loop's, and which
// limits counted (the config's are in Adam epochs).
func qnStop(stop string, q, tc settings.TrainConfig) string {
	return fmt.Sprintf("%s; epochs are quasi-Newton iterations here, limited to patience %d and max_epochs %d (train.patience %d, train.max_epochs %d count Adam epochs)",
		stop, q.Patience, q.MaxEpochs, tc.Patience, tc.MaxEpochs)
}
