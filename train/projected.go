package train

import (
	"context"
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
// with Adam and the config's train settings, on the projected objective;
// early stopping uses the validation loss of the closed-form readout, the
// best filters are kept and the readout of all neurons is computed once at
// the end, at the config's penalty or, with model.readout_l2 auto, at one
// chosen from the data (eval/methods.md §12). A Checkpoint of this solver
// holds only the conv parameters and no random state.
func fitProjected(ctx context.Context, p *Prepared, hooks Hooks, resume *Checkpoint) (*Fitted, error) {
	cfg := p.Cfg
	// From Parts the solver gets a net of one neuron: it trains only the
	// filters, and a readout of N x F values (3.8 GB at a million
	// neurons) would be allocated, and zeroed, for nothing; the readout
	// comes back as Fitted.Weights and Bias.
	shapeN := p.Neurons()
	if p.Parts != nil {
		shapeN = 1
	}
	net := nn.NewNet(cfg.Shape(p.NBins, shapeN))
	net.InitConvs(rand.New(rand.NewPCG(cfg.Seed, 0x1417)))
	s, err := projection.NewMSE(p.problem(), net)
	if err != nil {
		return nil, err
	}
	res, err := runEpochs(ctx, s, cfg.Train, hooks, resume)
	if err != nil {
		return nil, err
	}
	// The best epoch always carries its R^2, even when it was skipped.
	if err := fillBestR2(res, s.ValR2); err != nil {
		return nil, err
	}
	f := &Fitted{Net: net, Solver: settings.SolverProjected, Log: res.log, BestEpoch: res.bestEpoch, Stop: res.stop}
	switch {
	case p.Parts != nil:
		f.Curves, f.ReadoutL2, f.Bias, f.Weights, err = s.ReadoutBlocks(cfg.Model.ReadoutL2.Auto, cfg.Model.ReadoutL2PerNeuron)
		// The solver kept its means in the training and validation sums:
		// they are spent.
		p.Parts.Train.Sum, p.Parts.Val.Sum = nil, nil
	case cfg.Model.ReadoutL2.Auto:
		f.Curves, f.ReadoutL2, err = s.AutoReadout(cfg.Model.ReadoutL2PerNeuron)
	default:
		f.Curves, err = s.Readout()
	}
	if err != nil {
		return nil, err
	}
	return f, nil
}

// fitPoissonProjected trains with the Poisson fast path (train/projection,
// eval/methods.md §13): per-neuron Newton readouts on the condition rows,
// the filters by Adam on the resulting loss. After training the readouts
// of the best filters are solved exactly and written into the net, at the
// config's penalty or, with model.readout_l2 auto, at one chosen for all
// neurons on the validation trials (eval/methods.md §12).
//
// A checkpoint holds the conv parameters only: a resumed fit solves the
// readouts afresh from the mean-rate start, where an uninterrupted one
// continues from readouts that trail the exact ones slightly (the inexact
// steps of the training epochs), so the two agree closely but not bit for
// bit.
func fitPoissonProjected(ctx context.Context, p *Prepared, hooks Hooks, resume *Checkpoint) (*Fitted, error) {
	cfg := p.Cfg
	net := nn.NewNet(cfg.Shape(p.NBins, p.Neurons()))
	net.InitConvs(rand.New(rand.NewPCG(cfg.Seed, 0x1417)))
	s, err := projection.NewPoisson(p.problem(), net)
	if err != nil {
		return nil, err
	}
	res, err := runEpochs(ctx, s, cfg.Train, hooks, resume)
	if err != nil {
		return nil, err
	}
	f := &Fitted{Net: net, Solver: settings.SolverProjected, Log: res.log, BestEpoch: res.bestEpoch, Stop: res.stop}
	var vr2 float64
	if cfg.Model.ReadoutL2.Auto && p.ValStats() != nil && len(p.Val) > 0 {
		// The best epoch's R^2 is that of the trained penalty.
		ev, err := s.Evaluate(false, true)
		if err != nil {
			return nil, err
		}
		vr2 = ev.ValR2
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
	if err := fillBestR2(res, func() (float64, error) { return vr2, nil }); err != nil {
		return nil, err
	}
	return f, nil
}

// fillBestR2 gives the best epoch of the log the validation R^2 of the
// current (best) parameters where the solver skipped it.
func fillBestR2(res *loopResult, valR2 func() (float64, error)) error {
	for i := range res.log {
		if e := &res.log[i]; e.Epoch == res.bestEpoch && math.IsNaN(e.ValR2) {
			v, err := valR2()
			if err != nil {
				return err
			}
			e.ValR2 = v
		}
	}
	return nil
}
