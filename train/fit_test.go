package train

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"stria/data"
	"stria/eval"
	"stria/nn"
)

// synthPrepared builds a prepared demo-scenario recording.
func synthPrepared(t testing.TB, neurons, trials int, edit func(*Config)) (*Prepared, *data.Truth) {
	t.Helper()
	rec, _, truth := data.Synth(data.SynthConfig{
		Neurons: neurons, Trials: trials, Bins: 60,
		TwoPeakFrac: 0.25, UntunedFrac: 0.1, GainSD: 0.15, NoiseSD: 0.5, Seed: 11,
	})
	cfg := Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 6, Encoding: "onehot"}
	cfg.Split.KeepBlocks = false
	cfg.Train.MaxEpochs = 400
	cfg.Train.Patience = 50
	if edit != nil {
		edit(&cfg)
	}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := PrepareRecording(&cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	return p, truth
}

// TestConditionSumIdentity checks METHODS.md §8 [derived]: full-batch loss
// and gradients on per-condition rows (weight N_b, target the condition
// mean) equal the trial-level ones, for MSE and Poisson.
func TestConditionSumIdentity(t *testing.T) {
	for _, loss := range []string{"mse", "poisson"} {
		t.Run(loss, func(t *testing.T) {
			p, _ := synthPrepared(t, 30, 300, func(c *Config) {
				c.Model.Loss = loss
				if loss == "poisson" {
					c.Model.Output = "softplus"
				}
				c.Model.Layers = []LayerConfig{{Channels: 3, Kernel: 5, Stride: 2, Border: "circular"}}
			})
			if loss == "poisson" {
				// Poisson needs non-negative targets: shift every response.
				for i, v := range p.Rec.Y.Data {
					p.Rec.Y.Data[i] = float32(math.Abs(float64(v)))
				}
			}
			net := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
			net.Init(rand.New(rand.NewPCG(1, 2)))
			tr := newTrainer(p, net)

			net.ZeroGrad()
			lc := tr.lossGrad(condRows(p, p.Train), true, 1, nil) / (float64(len(p.Train)) * float64(p.Neurons()))
			gc := slices.Clone(net.Grads)

			tr.batch = &rowSet{x: make([]float64, tr.chunk*p.NBins), target: make([]float64, tr.chunk*p.Neurons())}
			net.ZeroGrad()
			lt := tr.sweep(p.Train, true, nil)
			gt := slices.Clone(net.Grads)

			// Tolerance: both sides are float64 sums of a few thousand terms.
			if math.Abs(lc-lt) > 1e-10*math.Abs(lt) {
				t.Errorf("loss: conditions %.15g, trials %.15g", lc, lt)
			}
			var maxg, maxd float64
			for i := range gt {
				maxg = math.Max(maxg, math.Abs(gt[i]))
				maxd = math.Max(maxd, math.Abs(gt[i]-gc[i]))
			}
			if maxd > 1e-10*maxg {
				t.Errorf("gradients differ by %g (largest %g)", maxd, maxg)
			}
		})
	}
}

func TestFitDeterministic(t *testing.T) {
	run := func() (*Fitted, []eval.Scores) {
		p, _ := synthPrepared(t, 40, 600, func(c *Config) { c.Train.MaxEpochs = 60; c.Train.BatchSize = 64 })
		f, err := Fit(context.Background(), p, Hooks{}, nil)
		if err != nil {
			t.Fatal(err)
		}
		return f, Score(p, PredictTrials(f.Net, p, p.Test))
	}
	f1, s1 := run()
	f2, s2 := run()
	if !slices.Equal(f1.Net.Params, f2.Net.Params) {
		t.Error("same config and seed gave different weights")
	}
	for j := range s1 {
		if s1[j].TestR2 != s2[j].TestR2 && !(math.IsNaN(s1[j].TestR2) && math.IsNaN(s2[j].TestR2)) {
			t.Fatalf("neuron %d: test R2 %v then %v", j, s1[j].TestR2, s2[j].TestR2)
		}
	}
}

// TestResume interrupts a fit, resumes it from its checkpoint and expects
// exactly the weights of an uninterrupted fit, on the full-batch and the
// mini-batch paths.
func TestResume(t *testing.T) {
	for _, batch := range []int{0, 64} {
		edit := func(c *Config) {
			c.Train.MaxEpochs = 40
			c.Train.Patience = 1000
			c.Train.CheckpointEvery = 7
			c.Train.BatchSize = batch
		}
		p, _ := synthPrepared(t, 30, 400, edit)
		whole, err := Fit(context.Background(), p, Hooks{}, nil)
		if err != nil {
			t.Fatal(err)
		}

		p, _ = synthPrepared(t, 30, 400, edit)
		ctx, cancel := context.WithCancel(context.Background())
		var saved *Checkpoint
		hooks := Hooks{
			OnEpoch: func(e EpochLog) {
				if e.Epoch == 17 {
					cancel()
				}
			},
			Checkpoint: func(c *Checkpoint) error { saved = c; return nil },
		}
		_, err = Fit(ctx, p, hooks, nil)
		if !errors.Is(err, ErrInterrupted) {
			t.Fatalf("batch %d: interrupted fit returned %v", batch, err)
		}
		if saved == nil || saved.Epoch != 17 {
			t.Fatalf("batch %d: checkpoint at epoch %v, want 17", batch, saved)
		}
		dir := t.TempDir()
		if err := SaveCheckpoint(dir, saved); err != nil {
			t.Fatal(err)
		}
		back, err := LoadCheckpoint(dir)
		if err != nil {
			t.Fatal(err)
		}
		p, _ = synthPrepared(t, 30, 400, edit)
		resumed, err := Fit(context.Background(), p, Hooks{}, back)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(whole.Net.Params, resumed.Net.Params) {
			t.Errorf("batch %d: resumed weights differ from the uninterrupted fit", batch)
		}
		if len(resumed.Log) != len(whole.Log) {
			t.Errorf("batch %d: log has %d epochs, want %d", batch, len(resumed.Log), len(whole.Log))
		}
	}
}

func TestDivergenceStops(t *testing.T) {
	p, _ := synthPrepared(t, 20, 300, func(c *Config) { c.Train.LearningRate = 1e6; c.Train.MaxEpochs = 50 })
	_, err := Fit(context.Background(), p, Hooks{}, nil)
	if err == nil {
		t.Skip("a learning rate of 1e6 did not diverge on this data")
	}
	for _, want := range []string{"epoch", "learning_rate"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q does not mention %s", err, want)
		}
	}
}

// TestDemoRecovery fits the demo scenario and checks the fit against the
// planted ground truth:
//   - the median held-out R^2 is within 0.03 of the R^2 that the true
//     noise-free bin means reach on the same test trials (the ceiling any
//     model of the binned stimulus can reach, up to sampling);
//   - the learned filters explain the planted tuning: the true tuning
//     curves of all neurons (60 bins x N) are regressed on the learned
//     first-layer feature maps (the conv output for each bin, plus a
//     constant), and the share of their variance that the features' linear
//     span captures must exceed 0.95.
func TestDemoRecovery(t *testing.T) {
	p, truth := synthPrepared(t, 200, 1200, func(c *Config) { c.Train.MaxEpochs = 3000; c.Train.Patience = 100 })
	f, err := Fit(context.Background(), p, Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	n := p.Neurons()
	pred := PredictTrials(f.Net, p, p.Test)
	got := Score(p, pred)
	ceil := make([]float64, len(p.Test)*n)
	for i, tt := range p.Test {
		c := p.Cond[tt]
		copy(ceil[i*n:(i+1)*n], truth.Mean[c*n:(c+1)*n])
	}
	want := Score(p, ceil)
	var gr, wr []float64
	for j := range got {
		gr = append(gr, got[j].TestR2)
		wr = append(wr, want[j].TestR2)
	}
	mg, mw := median(gr), median(wr)
	t.Logf("median test R2: fit %.4f, ground truth %.4f (epochs %d)", mg, mw, len(f.Log))
	if mg < mw-0.03 {
		t.Errorf("median test R2 %.4f is more than 0.03 below the ground-truth ceiling %.4f", mg, mw)
	}

	// Share of the planted tuning captured by the learned features.
	b := p.NBins
	x := make([]float64, b*b)
	for i := 0; i < b; i++ {
		x[i*b+i] = 1
	}
	w := f.Net.NewWork(b)
	h := f.Net.ForwardFeatures(w, x, b)
	F := f.Net.Features()
	H := mat.NewDense(b, F+1, nil)
	for i := 0; i < b; i++ {
		for k := 0; k < F; k++ {
			H.Set(i, k, h[i*F+k])
		}
		H.Set(i, F, 1)
	}
	Y := mat.NewDense(b, n, slices.Clone(truth.Mean))
	var coef mat.Dense
	if err := coef.Solve(H, Y); err != nil {
		t.Logf("least squares: %v", err)
	}
	var fit mat.Dense
	fit.Mul(H, &coef)
	var ssr, sst float64
	for j := 0; j < n; j++ {
		var m float64
		for i := 0; i < b; i++ {
			m += Y.At(i, j)
		}
		m /= float64(b)
		for i := 0; i < b; i++ {
			d := Y.At(i, j) - fit.At(i, j)
			ssr += d * d
			e := Y.At(i, j) - m
			sst += e * e
		}
	}
	share := 1 - ssr/sst
	t.Logf("variance of the planted tuning curves in the span of the learned features: %.4f", share)
	if share < 0.95 {
		t.Errorf("learned features capture %.4f of the planted tuning variance, want > 0.95", share)
	}
}
