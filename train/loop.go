package train

import (
	"context"
	"fmt"
	"github.com/strialab/stria/train/settings"
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"github.com/strialab/stria/nn"
)

// solver is one training method's side of the epoch loop (runEpochs;
// the methods are exported so that train/projection's solvers can plug
// in):
// what an epoch does and how the fit is judged after it. The loop owns
// everything else: the optimiser state, early stopping on the validation
// loss, divergence, checkpoints, interruption and resume.
type solver interface {
	// name is the solver's config name, for messages.
	Name() string
	// trainable returns the parameters the optimiser updates (a view into
	// the net's buffer).
	Trainable() []float64
	// begin prepares the first epoch once the parameters are set (from
	// the initialisation or a checkpoint).
	Begin() error
	// epoch runs one epoch of optimiser steps and returns the training
	// data loss it measured before updating (EpochLog.TrainLoss).
	Epoch(opt *nn.Adam) float64
	// validate judges the parameters after an epoch: the validation loss
	// that early stopping watches and the median validation R^2 (NaN on
	// epochs the solver skips it).
	Validate(epoch int) (loss, r2 float64, err error)
	// random returns the solver's random source, saved in checkpoints
	// (nil if it draws nothing while training).
	Random() *rand.PCG
}

// scratcher is a solver that lends the loop a buffer of len(Trainable())
// values which it may overwrite between epochs (the adam trainer's
// gradients): the loop reads a best copy kept in a file into it for a
// checkpoint, instead of allocating a parameter-sized array.
type scratcher interface {
	scratch() []float64
}

// stateful is a solver with a state of its own besides the parameters
// (the quasi-Newton memory), which a checkpoint keeps
// (Checkpoint.SolverState) so that a resumed fit continues as the
// uninterrupted one would.
type stateful interface {
	State() []float64
	SetState(v []float64) error
}

// newOptimizer returns the Adam optimiser the train settings describe for
// n parameters.
func newOptimizer(tc settings.TrainConfig, n int) *nn.Adam {
	opt := nn.NewAdam(n)
	opt.LR, opt.Beta1, opt.Beta2, opt.Eps = tc.LearningRate, tc.Beta1, tc.Beta2, tc.Epsilon
	opt.WeightDecay = tc.WeightDecay
	opt.Decoupled = tc.Optimizer == settings.OptimizerAdamW
	return opt
}

// loopResult is what runEpochs hands back to the solver.
type loopResult struct {
	log       []EpochLog
	bestEpoch int
	stop      string
}

// runEpochs trains s until the validation loss has not improved for
// train.patience epochs or train.max_epochs have run, and leaves the best
// parameters in place. The best epoch's parameters are kept in memory, or,
// for spillParams parameters and more when hooks.TempDir is set, in a
// temporary file there that is removed before runEpochs returns (also on
// an error or an interruption); the result is the same bit for bit. With resume not nil it continues from that
// checkpoint. Between epochs it honours ctx: on cancellation a checkpoint
// is handed to hooks and ErrInterrupted is returned. A loss that is not
// finite or grows a millionfold over the first epoch's stops training with
// an error that suggests a smaller learning rate.
func runEpochs(ctx context.Context, s solver, tc settings.TrainConfig, hooks Hooks, resume *Checkpoint) (*loopResult, error) {
	params := s.Trainable()
	opt := newOptimizer(tc, len(params))
	st := Checkpoint{BestVal: math.Inf(1)}
	best := newBestParams(len(params), hooks.TempDir)
	defer best.close()
	var scratch []float64
	if sc, ok := s.(scratcher); ok && len(sc.scratch()) == len(params) {
		scratch = sc.scratch()
	}
	if resume != nil {
		if len(resume.Params) != len(params) || len(resume.M) != len(params) || len(resume.V) != len(params) {
			return nil, fmt.Errorf("checkpoint has %d parameters, the %s solver of this config trains %d: was the config changed?", len(resume.Params), s.Name(), len(params))
		}
		st = *resume
		if st.Best != nil {
			if len(st.Best) != len(params) {
				return nil, fmt.Errorf("checkpoint has %d best-epoch parameters, the %s solver of this config trains %d: was the config changed?", len(st.Best), s.Name(), len(params))
			}
			if err := best.adopt(st.Best); err != nil {
				return nil, err
			}
			st.Best = nil
		}
		copy(params, st.Params)
		opt.M, opt.V, opt.T = slices.Clone(st.M), slices.Clone(st.V), st.T
		if sf, ok := s.(stateful); ok && st.Epoch > 0 {
			// A checkpoint without the state comes from a stria whose
			// solver of this name trained differently (the projected
			// solver's filters by Adam): continuing it would mix two
			// methods in one fit.
			if st.SolverState == nil {
				return nil, fmt.Errorf("checkpoint has no %s solver state: it was written by an earlier stria, whose %s solver trained the filters by Adam; fit afresh (without --resume)", s.Name(), s.Name())
			}
			if err := sf.SetState(st.SolverState); err != nil {
				return nil, fmt.Errorf("checkpoint: %w", err)
			}
		}
		if pcg := s.Random(); pcg != nil {
			if err := pcg.UnmarshalBinary(st.RNG); err != nil {
				return nil, fmt.Errorf("checkpoint: random state: %w", err)
			}
		}
	}
	if err := s.Begin(); err != nil {
		return nil, err
	}
	start := time.Now()
	offset := 0.0
	if n := len(st.Log); n > 0 {
		offset = st.Log[n-1].Seconds
	}
	// snapshot shares the live buffers (no copy of the N x F readout and
	// its moments); hooks get it only while training waits for them. A
	// best copy kept in a file is read into the solver's scratch.
	snapshot := func() (*Checkpoint, error) {
		c := st
		c.Params = params
		c.M, c.V, c.T = opt.M, opt.V, opt.T
		c.RNG, c.SolverState = nil, nil
		if sf, ok := s.(stateful); ok {
			c.SolverState = sf.State()
		}
		if pcg := s.Random(); pcg != nil {
			c.RNG, _ = pcg.MarshalBinary()
		}
		if best.have {
			c.Best = best.mem
			if best.spilled() {
				if scratch == nil {
					scratch = make([]float64, len(params))
				}
				if err := best.load(scratch); err != nil {
					return nil, err
				}
				c.Best = scratch
			}
		}
		return &c, nil
	}
	var first float64
	if len(st.Log) > 0 {
		first = st.Log[0].TrainLoss
	}
	stop := "max_epochs"
	for st.Epoch < tc.MaxEpochs {
		if err := ctx.Err(); err != nil {
			if hooks.Checkpoint != nil {
				c, cerr := snapshot()
				if cerr == nil {
					cerr = hooks.Checkpoint(c)
				}
				if cerr != nil {
					return nil, cerr
				}
			}
			return nil, fmt.Errorf("%w after epoch %d", ErrInterrupted, st.Epoch)
		}
		loss := s.Epoch(opt)
		st.Epoch++
		if st.Epoch == 1 {
			first = loss
		}
		if math.IsNaN(loss) || math.IsInf(loss, 0) || loss > 1e6*(math.Abs(first)+1e-12) {
			return nil, fmt.Errorf("training diverged at epoch %d (loss %g, first epoch %g): try a smaller train.learning_rate (now %g)",
				st.Epoch, loss, first, tc.LearningRate)
		}
		vl, vr2, err := s.Validate(st.Epoch)
		if err != nil {
			return nil, fmt.Errorf("%w at epoch %d: try a smaller train.learning_rate (now %g)", err, st.Epoch, tc.LearningRate)
		}
		e := EpochLog{Epoch: st.Epoch, TrainLoss: loss, ValLoss: vl, ValR2: vr2, Seconds: offset + time.Since(start).Seconds()}
		st.Log = append(st.Log, e)
		if vl < st.BestVal {
			st.BestVal, st.BestEpoch, st.Since = vl, st.Epoch, 0
			if err := best.save(params); err != nil {
				return nil, err
			}
		} else {
			st.Since++
		}
		if hooks.OnEpoch != nil {
			hooks.OnEpoch(e)
		}
		if st.Since >= tc.Patience {
			stop = "patience"
			break
		}
		if hooks.Checkpoint != nil && st.Epoch%tc.CheckpointEvery == 0 {
			c, err := snapshot()
			if err == nil {
				err = hooks.Checkpoint(c)
			}
			if err != nil {
				return nil, err
			}
		}
	}
	if best.have {
		if err := best.load(params); err != nil {
			return nil, err
		}
	}
	return &loopResult{log: st.Log, bestEpoch: st.BestEpoch, stop: stop}, nil
}
