package train

import (
	"context"
	"errors"
	"fmt"
	"github.com/strialab/stria/train/settings"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/nn"
	"github.com/strialab/stria/train/projection"
)

// projectedCase builds a small prepared recording and a net with random
// filters for the projected solver; stride 2 makes F (45) larger than the
// number of conditions (30), the full-size situation.
func projectedCase(t *testing.T, border settings.LayerBorder, l2 float64) (*Prepared, *nn.Net) {
	t.Helper()
	p, _ := synthPrepared(t, 40, 400, func(c *settings.Config) {
		c.Model.Layers = []settings.LayerConfig{{Channels: 3, Kernel: 5, Stride: 2, Border: border}}
		c.Axis.BinWidth = 12
		c.Model.ReadoutL2 = settings.Penalty{Value: l2}
		c.Train.Solver = settings.SolverProjected
	})
	net := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
	net.Init(rand.New(rand.NewPCG(3, 4)))
	return p, net
}

// TestProjectedGradient checks the projected objective and its filter
// gradient against two references outside the B x B algebra:
//   - central finite differences of the projected objective itself;
//   - the adam path's own loss and gradients (trainer.lossGrad and
//     trainer.penalty, explicit N x F readout) with the closed-form readout
//     plugged in: the objectives must agree, the readout gradient must
//     vanish (the readout is optimal) and the filter gradient must equal
//     the projected one (envelope theorem, eval/methods.md §8 [derived]). The
//     validation loss and median R^2 must equal trainer.evalVal's.
func TestProjectedGradient(t *testing.T) {
	for _, tc := range []struct {
		border settings.LayerBorder
		l2     float64
	}{{settings.BorderCircular, 1}, {settings.BorderZero, 0.05}, {settings.BorderValid, 20}} {
		t.Run(tc.border.String(), func(t *testing.T) {
			p, net := projectedCase(t, tc.border, tc.l2)
			pj, err := projection.NewMSE(p.problem(), net)
			if err != nil {
				t.Fatal(err)
			}
			ev, err := pj.Evaluate(true, true)
			if err != nil {
				t.Fatal(err)
			}
			nc := len(pj.Trainable())
			grad := slices.Clone(net.Grads[:nc])
			obj, val, vr2 := ev.Objective, ev.ValLoss, ev.ValR2

			// Finite differences. h = 1e-5 on parameters of size ~0.3: the
			// truncation error is O(h^2) ~ 1e-10 relative and rounding
			// ~1e-16/1e-5 = 1e-11 relative to the objective; a ReLU kink
			// crossed inside [-h, h] would show as a gross mismatch.
			const h = 1e-5
			var maxg, maxd float64
			for i := 0; i < nc; i++ {
				old := net.Params[i]
				net.Params[i] = old + h
				e, err := pj.Evaluate(false, false)
				if err != nil {
					t.Fatal(err)
				}
				up := e.Objective
				net.Params[i] = old - h
				if e, err = pj.Evaluate(false, false); err != nil {
					t.Fatal(err)
				}
				down := e.Objective
				net.Params[i] = old
				fd := (up - down) / (2 * h)
				maxg = math.Max(maxg, math.Abs(grad[i]))
				maxd = math.Max(maxd, math.Abs(fd-grad[i]))
			}
			if maxd > 1e-6*maxg {
				t.Errorf("finite differences differ from the projected gradient by %g (largest component %g)", maxd, maxg)
			}

			// The adam path's objective at the closed-form readout.
			if _, err := pj.Readout(); err != nil {
				t.Fatal(err)
			}
			tr := newTrainer(p, net)
			net.ZeroGrad()
			n := float64(p.Neurons())
			full := tr.lossGrad(tr.trainC, true, 1, nil)/(float64(len(p.Train))*n) + tr.penalty(true)
			// Tolerance: both are float64 sums of ~1e4 terms of similar size.
			if math.Abs(full-obj) > 1e-10*math.Abs(obj) {
				t.Errorf("objective: projected %.15g, adam path with the closed-form readout %.15g", obj, full)
			}
			var maxc, maxr, maxw float64
			for i := 0; i < nc; i++ {
				maxc = math.Max(maxc, math.Abs(net.Grads[i]-grad[i]))
			}
			for _, g := range net.Grads[nc:] {
				maxr = math.Max(maxr, math.Abs(g))
			}
			for _, w := range net.Params[nc:] {
				maxw = math.Max(maxw, math.Abs(w))
			}
			// The readout gradient is zero up to the rounding of a 30 x 30
			// Cholesky solve (condition number <~ 1e4 here): compare with the
			// scale of the filter gradient.
			if maxc > 1e-8*maxg {
				t.Errorf("filter gradient at the optimal readout differs from the projected one by %g (largest %g)", maxc, maxg)
			}
			if maxr > 1e-8*maxg {
				t.Errorf("readout gradient at the closed-form readout is %g, want ~0 (filter gradient scale %g, weights up to %g)", maxr, maxg, maxw)
			}
			vl, vr := tr.evalVal()
			if math.Abs(vl-val) > 1e-10*vl {
				t.Errorf("validation loss: projected %.15g, adam path %.15g", val, vl)
			}
			if math.Abs(vr-vr2) > 1e-9 {
				t.Errorf("validation median R2: projected %.15g, adam path %.15g", vr2, vr)
			}
		})
	}
}

func TestProjectedNeedsPenalty(t *testing.T) {
	p, _ := projectedCase(t, settings.BorderCircular, 0)
	_, err := Fit(context.Background(), p, Hooks{}, nil)
	if err == nil || !strings.Contains(err.Error(), "readout_l2") {
		t.Fatalf("readout_l2 0: got %v, want an error naming model.readout_l2", err)
	}
}

// TestProjectedVsAdam fits the demo scenario with the reference adam path
// (mini-batches of 64 trials, the way a general framework trains) and with
// the projected solver on the same split, and wants the projected held-out
// median R^2 no worse than the adam path's minus 0.002 (sampling noise of a
// median over 300 neurons is larger than that, so the margin only allows
// for the two optimisers stopping at slightly different filters).
func TestProjectedVsAdam(t *testing.T) {
	fit := func(solver settings.Solver) (float64, *Fitted) {
		p, _ := synthPrepared(t, 300, 1500, func(c *settings.Config) {
			c.Train.Solver = solver
			c.Train.MaxEpochs = 2000
			c.Train.Patience = 50
			if solver == settings.SolverAdam {
				c.Train.BatchSize = 64
				c.Train.LearningRate = 1e-3
			}
		})
		f, err := Fit(context.Background(), p, Hooks{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		s := Score(p, PredictTrials(f.Net, p, p.Test))
		var r2 []float64
		for _, v := range s {
			r2 = append(r2, v.TestR2)
		}
		return median(r2), f
	}
	ra, fa := fit(settings.SolverAdam)
	rp, fp := fit(settings.SolverProjected)
	t.Logf("held-out median R2: adam (batch 64) %.5f in %d epochs; projected %.5f in %d epochs", ra, len(fa.Log), rp, len(fp.Log))
	if rp < ra-0.002 {
		t.Errorf("projected median test R2 %.5f is below the adam path's %.5f by more than 0.002", rp, ra)
	}
}

// TestProjectedResume interrupts a projected fit and resumes it from its
// checkpoint: the weights must equal those of an uninterrupted fit (the
// checkpoint carries the quasi-Newton memory).
func TestProjectedResume(t *testing.T) {
	edit := func(c *settings.Config) {
		c.Train.Solver = settings.SolverProjected
		c.Train.MaxEpochs = 40
		c.Train.Patience = 1000
		c.Train.CheckpointEvery = 3
		c.Axis.BinWidth = 12
	}
	p, _ := synthPrepared(t, 30, 400, edit)
	whole, err := Fit(context.Background(), p, Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	const cut = 7
	if len(whole.Log) <= cut+2 {
		t.Fatalf("the fit ran %d iterations: too few to interrupt it at %d", len(whole.Log), cut)
	}
	again, err := Fit(context.Background(), p, Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(whole.Net.Params, again.Net.Params) {
		t.Error("two projected fits with the same seed differ")
	}
	ctx, cancel := context.WithCancel(context.Background())
	var saved *Checkpoint
	hooks := Hooks{
		OnEpoch: func(e EpochLog) {
			if e.Epoch == cut {
				cancel()
			}
		},
		Checkpoint: func(c *Checkpoint) error { saved = c; return nil },
	}
	if _, err = Fit(ctx, p, hooks, nil); !errors.Is(err, ErrInterrupted) {
		t.Fatalf("interrupted fit returned %v", err)
	}
	if saved == nil || saved.Epoch != cut {
		t.Fatalf("checkpoint %v, want one at epoch %d", saved, cut)
	}
	dir := t.TempDir()
	if err := SaveCheckpoint(dir, saved); err != nil {
		t.Fatal(err)
	}
	back, err := LoadCheckpoint(dir)
	if err != nil {
		t.Fatal(err)
	}
	resumed, err := Fit(context.Background(), p, Hooks{}, back)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(whole.Net.Params, resumed.Net.Params) {
		t.Error("resumed weights differ from the uninterrupted fit")
	}
	if len(resumed.Log) != len(whole.Log) {
		t.Errorf("log has %d epochs, want %d", len(resumed.Log), len(whole.Log))
	}
	// A checkpoint of an earlier stria (filters by Adam: no solver
	// state) is refused, not continued by another method.
	old := *back
	old.SolverState = nil
	if _, err := Fit(context.Background(), p, Hooks{}, &old); err == nil || !strings.Contains(err.Error(), "earlier stria") {
		t.Errorf("resume from a checkpoint without solver state: %v, want a refusal", err)
	}
}

// benchPrepared is a demo-scenario recording with 60 bins for benchmarks.
func benchPrepared(b *testing.B, neurons, trials int) *Prepared {
	b.Helper()
	p, _ := synthPrepared(b, neurons, trials, func(c *settings.Config) {
		c.Train.Solver = settings.SolverProjected
		c.Train.MaxEpochs = 3000
		c.Train.Patience = 100
	})
	return p
}

// BenchmarkProjectedEpoch times one evaluation of the projected objective
// and its filter gradient (the work of one epoch, validation loss
// included, R^2 excluded), at the full-size model shape: 60 bins, 8
// channels, K 9, F 480. Its cost must not grow with the neurons.
func BenchmarkProjectedEpoch(b *testing.B) {
	for _, n := range []int{500, 2000, 8000} {
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			p := benchPrepared(b, n, 1200)
			net := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
			net.InitConvs(rand.New(rand.NewPCG(1, 2)))
			pj, err := projection.NewMSE(p.problem(), net)
			if err != nil {
				b.Fatal(err)
			}
			b.ReportAllocs()
			b.ResetTimer()
			for range b.N {
				if _, err := pj.Evaluate(true, false); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkProjectedValR2 times an evaluation with the median validation
// R^2 (the only per-neuron work of an epoch); subtract
// BenchmarkProjectedEpoch's time for the R^2 alone.
func BenchmarkProjectedValR2(b *testing.B) {
	for _, n := range []int{500, 2000, 8000} {
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			p := benchPrepared(b, n, 1200)
			net := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
			net.InitConvs(rand.New(rand.NewPCG(1, 2)))
			pj, err := projection.NewMSE(p.problem(), net)
			if err != nil {
				b.Fatal(err)
			}
			b.ReportAllocs()
			b.ResetTimer()
			for range b.N {
				if _, err := pj.Evaluate(false, true); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkFitProjected times a whole projected fit (condition statistics,
// training to the patience stop, final readout) over a ladder of neuron
// counts, 1200 trials.
func BenchmarkFitProjected(b *testing.B) {
	for _, n := range []int{500, 2000, 8000} {
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			p := benchPrepared(b, n, 1200)
			b.ReportAllocs()
			b.ResetTimer()
			var epochs int
			for range b.N {
				f, err := Fit(context.Background(), p, Hooks{}, nil)
				if err != nil {
					b.Fatal(err)
				}
				epochs = len(f.Log)
			}
			b.ReportMetric(float64(epochs), "epochs")
		})
	}
}

// TestScoreNet checks that the low-memory ScoreNet gives the scores of
// the reference path Score(p, PredictTrials(...)), with and without
// z-scoring, for a neuron count that is not a multiple of the block size.
// Tolerance 1e-9 relative: the two sum the same terms in another order.
func TestScoreNet(t *testing.T) {
	for _, z := range []bool{true, false} {
		p, _ := synthPrepared(t, 1061, 300, func(c *settings.Config) { c.Split.ZScore = z; c.Axis.BinWidth = 12 })
		net := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
		net.Init(rand.New(rand.NewPCG(5, 6)))
		want := Score(p, PredictTrials(net, p, p.Test))
		got := ScoreNet(p, net)
		for j := range want {
			w, g := want[j], got[j]
			for k, pair := range [][2]float64{{g.TestR2, w.TestR2}, {g.TestR, w.TestR}, {g.FEV, w.FEV},
				{g.ExplainableFraction, w.ExplainableFraction}, {g.CCNorm, w.CCNorm}, {g.SplitHalf, w.SplitHalf}} {
				a, b := pair[0], pair[1]
				if math.IsNaN(a) != math.IsNaN(b) || math.Abs(a-b) > 1e-9*math.Max(1, math.Abs(b)) {
					t.Fatalf("zscore %v, neuron %d, score %d: ScoreNet %v, reference %v", z, j, k, a, b)
				}
			}
		}
	}
}
