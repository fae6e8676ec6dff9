package train

import (
	"context"
	"errors"
	"fmt"
	"github.com/strialab/stria/train/settings"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/tuning"
	"github.com/strialab/stria/nn"
)

// synthPrepared builds a prepared demo-scenario recording.
func synthPrepared(t testing.TB, neurons, trials int, edit func(*settings.Config)) (*Prepared, *synth.Truth) {
	t.Helper()
	rec, _, truth := synth.Population(synth.Config{
		Neurons: neurons, Trials: trials, Bins: 60,
		TwoPeakFrac: 0.25, UntunedFrac: 0.1, GainSD: 0.15, NoiseSD: 0.5, Seed: 11,
	})
	cfg := settings.Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = settings.AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 6, Encoding: settings.OneHot}
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

// TestConditionSumIdentity checks eval/methods.md §8 [derived]: full-batch loss
// and gradients on per-condition rows (weight N_b, target the condition
// mean) equal the trial-level ones, for MSE and Poisson.
func TestConditionSumIdentity(t *testing.T) {
	for _, loss := range []settings.Loss{settings.MSE, settings.Poisson} {
		t.Run(loss.String(), func(t *testing.T) {
			// The loss is set after preparing: the identity holds for any
			// targets >= 0, and Prepare refuses non-counts for poisson.
			p, _ := synthPrepared(t, 30, 300, func(c *settings.Config) {
				if loss == settings.Poisson {
					c.Model.Output = nn.Softplus
					c.Split.ZScore = false
				}
				c.Model.Layers = []settings.LayerConfig{{Channels: 3, Kernel: 5, Stride: 2, Border: settings.BorderCircular}}
				c.Axis.BinWidth = 12
			})
			p.Cfg.Model.Loss = loss
			if loss == settings.Poisson {
				// Poisson needs non-negative targets: shift every response.
				for i, v := range p.Rec.Y.Data {
					p.Rec.Y.Data[i] = float32(math.Abs(float64(v)))
				}
			}
			net := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
			net.Init(rand.New(rand.NewPCG(1, 2)))
			tr := newTrainer(p, net)

			net.ZeroGrad()
			lc := tr.lossGrad(condRows(p, p.TrainStats()), true, 1, nil) / (float64(len(p.Train)) * float64(p.Neurons()))
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
		p, _ := synthPrepared(t, 40, 600, func(c *settings.Config) { c.Train.MaxEpochs = 60; c.Train.BatchSize = 64; c.Axis.BinWidth = 12 })
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
		edit := func(c *settings.Config) {
			c.Train.MaxEpochs = 40
			c.Train.Patience = 1000
			c.Train.CheckpointEvery = 7
			c.Train.BatchSize = batch
			c.Axis.BinWidth = 12
			c.Train.Solver = settings.SolverAdam // the projected solver's resume: TestProjectedResume
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
	p, _ := synthPrepared(t, 20, 300, func(c *settings.Config) { c.Train.LearningRate = 1e6; c.Train.MaxEpochs = 50; c.Axis.BinWidth = 12 })
	// Only the adam path: the projected solver's loss is bounded by the
	// grand-mean model's whatever the filters do (the readout is optimal
	// for them), so a huge step makes a poor fit that early stopping
	// discards, not a growing loss.
	for _, solver := range []settings.Solver{settings.SolverAdam} {
		p.Cfg.Train.Solver = solver
		_, err := Fit(context.Background(), p, Hooks{}, nil)
		if err == nil {
			t.Fatalf("%s: a learning rate of 1e6 trained without an error", solver)
		}
		for _, want := range []string{"epoch", "learning_rate"} {
			if !strings.Contains(err.Error(), want) {
				t.Errorf("%s: error %q does not mention %s", solver, err, want)
			}
		}
	}
}

// fakeSolver replays a list of training losses through the epoch loop.
type fakeSolver struct {
	losses []float64
	params []float64
	k      int
}

func (f *fakeSolver) Name() string         { return "fake" }
func (f *fakeSolver) Trainable() []float64 { return f.params }
func (f *fakeSolver) Begin() error         { return nil }
func (f *fakeSolver) Random() *rand.PCG    { return nil }
func (f *fakeSolver) Epoch(*nn.Adam) float64 {
	l := f.losses[min(f.k, len(f.losses)-1)]
	f.k++
	return l
}
func (f *fakeSolver) Validate(int) (float64, float64, error) { return 1, 0, nil }

// TestDivergenceRule checks the loop's divergence rule itself: a loss that
// is not finite, or more than a million times the first epoch's, stops
// training at that epoch; a loss that grows less does not.
func TestDivergenceRule(t *testing.T) {
	tc := settings.Defaults().Train
	tc.MaxEpochs, tc.Patience = 5, 100
	for _, c := range []struct {
		name   string
		losses []float64
		epoch  int // 0: no divergence
	}{
		{"NaN", []float64{1, 0.5, math.NaN()}, 3},
		{"Inf", []float64{1, math.Inf(1)}, 2},
		{"millionfold", []float64{2, 1, 2.1e6}, 3},
		{"large but bounded", []float64{2, 1, 1.9e6}, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := runEpochs(context.Background(), &fakeSolver{losses: c.losses, params: make([]float64, 3)}, tc, Hooks{}, nil)
			if c.epoch == 0 {
				if err != nil {
					t.Fatalf("got %v, want no error", err)
				}
				return
			}
			want := fmt.Sprintf("diverged at epoch %d", c.epoch)
			if err == nil || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), "train.learning_rate") {
				t.Fatalf("got %v, want an error containing %q and the learning-rate hint", err, want)
			}
		})
	}
}

// TestDemoRecovery fits the demo scenario and checks the fit against the
// planted ground truth:
//   - the median held-out R^2 is within 0.03 of the R^2 that the true
//     noise-free bin means reach on the same test trials (the ceiling any
//     model of the binned stimulus can reach, up to sampling);
//   - the learned filters explain the planted tuning: for every tuned
//     neuron the encoder's noise-free curve (its prediction at each bin)
//     correlates with the planted curve (median r > 0.95), and over all
//     tuned neurons the encoder's curves lie closer to the planted ones
//     (summed squared distance) than half the distance of the training
//     trials' own condition means: the shared filters pool the population
//     and remove noise that a per-bin average keeps.
func TestDemoRecovery(t *testing.T) {
	demoL2 := 1.0
	p, truth := synthPrepared(t, 200, 1200, func(c *settings.Config) {
		c.Train.MaxEpochs = 3000
		c.Train.Patience = 100
		c.Model.ReadoutL2 = settings.Penalty{Value: demoL2}
		c.Split.ZScore = false
	})
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

	// The learned model's noise-free tuning curves against the planted ones.
	b := p.NBins
	curves := PredictConditions(f.Net, b)
	st := condstats.New(p.Rec.Y, p.Cond, p.Train, b)
	means := st.Mean(nil)
	var rs []float64
	var dFit, dMean float64
	tc, fc := make([]float64, b), make([]float64, b)
	for j := 0; j < n; j++ {
		if truth.Kind[j] == "untuned" {
			continue
		}
		for c := 0; c < b; c++ {
			tc[c], fc[c] = truth.Mean[c*n+j], curves[c*n+j]
			dFit += (fc[c] - tc[c]) * (fc[c] - tc[c])
			dMean += (means[c*n+j] - tc[c]) * (means[c*n+j] - tc[c])
		}
		rs = append(rs, eval.Pearson(tc, fc))
	}
	mr := median(rs)
	t.Logf("tuned neurons: median correlation of fitted and planted curves %.4f; squared distance to the planted curves: encoder %.4g, training condition means %.4g", mr, dFit, dMean)
	if mr < 0.95 {
		t.Errorf("median correlation of fitted and planted tuning curves %.4f, want > 0.95", mr)
	}
	if dFit >= 0.5*dMean {
		t.Errorf("encoder curves are not closer to the planted tuning than half the distance of the raw condition means (%.4g vs %.4g)", dFit, dMean)
	}
}

// TestNormalizerFromStats checks the z-scoring derived from per-condition sums
// against condstats.FitNormalizer's two passes over the trials, including a
// constant neuron (Scale 1) and one with a large offset.
func TestNormalizerFromStats(t *testing.T) {
	p, _ := synthPrepared(t, 20, 600, func(c *settings.Config) { c.Axis.BinWidth = 12 })
	y := p.Rec.Y
	for i := 0; i < y.Rows; i++ {
		y.Row(i)[0] = 3.25               // constant
		y.Row(i)[1] = 1000 + y.Row(i)[1] // offset 1000 on a unit-scale signal
	}
	all := append(slices.Clone(p.Train), p.Val...)
	want := condstats.FitNormalizer(y, all)
	p.trainSt, p.valSt = nil, nil
	got := condstats.NormalizerFromStats(p.TrainStats(), p.ValStats())
	for j := range want.Mean {
		// Tolerance: float64 sums of ~500 float32 values; the offset neuron
		// loses about log10(1000^2) digits to cancellation, leaving ~1e-9.
		if math.Abs(got.Mean[j]-want.Mean[j]) > 1e-9*math.Max(1, math.Abs(want.Mean[j])) ||
			math.Abs(got.Scale[j]-want.Scale[j]) > 1e-8*want.Scale[j] {
			t.Errorf("neuron %d: mean %v scale %v, two-pass %v %v", j, got.Mean[j], got.Scale[j], want.Mean[j], want.Scale[j])
		}
	}
	if got.Scale[0] != 1 {
		t.Errorf("constant neuron: scale %v, want 1", got.Scale[0])
	}
}

// TestCoresDoNotChangeResults fits with one core and with two and expects
// the same weights and scores bit for bit (every parallel kernel splits its
// work independently of the number of cores), for both solvers.
func TestCoresDoNotChangeResults(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, solver := range []settings.Solver{settings.SolverAdam, settings.SolverProjected} {
		var params [2][]float64
		var scores [2][]eval.Scores
		for i, procs := range []int{1, 2} {
			runtime.GOMAXPROCS(procs)
			p, _ := synthPrepared(t, 300, 600, func(c *settings.Config) {
				c.Train.Solver = solver
				c.Train.MaxEpochs = 80
				c.Axis.BinWidth = 12
			})
			f, err := Fit(context.Background(), p, Hooks{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			params[i] = f.Net.Params
			scores[i] = ScoreNet(p, f.Net)
		}
		if !slices.Equal(params[0], params[1]) {
			t.Errorf("%s: weights differ between 1 and 2 cores", solver)
		}
		for j := range scores[0] {
			if fmt.Sprint(scores[0][j]) != fmt.Sprint(scores[1][j]) {
				t.Fatalf("%s: neuron %d scores differ between 1 and 2 cores", solver, j)
			}
		}
	}
}

// TestBlockTrials: without block ids, split.block_trials keeps runs of
// consecutive trials on one side of the test split, of the validation
// split and of every fold.
func TestBlockTrials(t *testing.T) {
	rec, _, _ := synth.Population(synth.Config{Neurons: 10, Trials: 1200, Bins: 60, TwoPeakFrac: 0.25, UntunedFrac: 0.1, GainSD: 0.15, NoiseSD: 0.5, Seed: 11})
	rec.Block = nil // no block ids: blocks come from split.block_trials
	cfg := settings.Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = settings.AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 30, Encoding: settings.OneHot}
	cfg.Split.KeepBlocks = true
	cfg.Split.BlockTrials = 40
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := PrepareRecording(&cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	side := map[int]string{}
	check := func(what string, trials []int, name string) {
		for _, tr := range trials {
			b := tr / 40
			if s, ok := side[b]; ok && s != name {
				t.Fatalf("%s: block %d is in %s and %s", what, b, s, name)
			}
			side[b] = name
		}
	}
	check("hold-out", p.Train, "train")
	check("hold-out", p.Val, "validation")
	check("hold-out", p.Test, "test")
	folds, err := Folds(p)
	if err != nil {
		t.Fatal(err)
	}
	for f, sets := range folds {
		side = map[int]string{}
		check(fmt.Sprint("fold ", f+1), append(slices.Clone(sets[0]), sets[1]...), "train")
		check(fmt.Sprint("fold ", f+1), sets[2], "test")
	}
}

// TestSolverAuto checks that a config that names no solver runs the
// projected solver wherever the model allows it (MSE with identity output,
// Poisson with softplus or exp output, one-hot, full batch), and adam
// otherwise.
func TestSolverAuto(t *testing.T) {
	for _, tc := range []struct {
		name string
		edit func(*settings.Config)
		want settings.Solver
	}{
		{"default", func(*settings.Config) {}, settings.SolverProjected},
		{"soft encoding", func(c *settings.Config) { c.Axis.Encoding = settings.Soft }, settings.SolverAdam},
		{"mini-batches", func(c *settings.Config) { c.Train.BatchSize = 32 }, settings.SolverAdam},
		{"named adam", func(c *settings.Config) { c.Train.Solver = settings.SolverAdam }, settings.SolverAdam},
		{"poisson softplus", func(c *settings.Config) {
			c.Model.Loss, c.Model.Output, c.Split.ZScore = settings.Poisson, nn.Softplus, false
		}, settings.SolverProjected},
		{"poisson exp", func(c *settings.Config) {
			c.Model.Loss, c.Model.Output, c.Split.ZScore = settings.Poisson, nn.Exp, false
		}, settings.SolverProjected},
		{"poisson mini-batches", func(c *settings.Config) {
			c.Model.Loss, c.Model.Output, c.Split.ZScore, c.Train.BatchSize = settings.Poisson, nn.Softplus, false, 32
		}, settings.SolverAdam},
	} {
		t.Run(tc.name, func(t *testing.T) {
			c := settings.Defaults()
			tc.edit(&c)
			if got := c.SolverToRun(); got != tc.want {
				t.Errorf("got %s, want %s", got, tc.want)
			}
		})
	}
	p, _ := synthPrepared(t, 20, 300, func(c *settings.Config) { c.Train.MaxEpochs = 5; c.Axis.BinWidth = 12 })
	f, err := Fit(context.Background(), p, Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if f.Solver != settings.SolverProjected {
		t.Errorf("default fit ran %s, want projected", f.Solver)
	}
}

// TestConstantNeuronsLeftOut appends constant neurons to a recording and
// expects the other neurons' held-out scores to stay as they were, for
// both solvers: neurons excluded from scoring take no part in training.
// Not bitwise: the losses are means over all neurons, so the appended
// columns rescale the filter gradient, which Adam undoes up to its
// epsilon.
func TestConstantNeuronsLeftOut(t *testing.T) {
	for _, solver := range []settings.Solver{settings.SolverAdam, settings.SolverProjected} {
		t.Run(solver.String(), func(t *testing.T) {
			edit := func(c *settings.Config) {
				c.Train.Solver = solver
				c.Train.MaxEpochs = 150
				c.Axis.BinWidth = 12
			}
			p, _ := synthPrepared(t, 40, 600, edit)
			f, err := Fit(context.Background(), p, Hooks{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			base := ScoreFitted(p, f)

			q, _ := synthPrepared(t, 40, 600, edit)
			y := q.Rec.Y
			wide := data.NewMatrix(y.Rows, y.Cols+3)
			for i := 0; i < y.Rows; i++ {
				copy(wide.Row(i), y.Row(i))
				wide.Row(i)[y.Cols], wide.Row(i)[y.Cols+1], wide.Row(i)[y.Cols+2] = 0, 2.5, -1
			}
			rec := *q.Rec
			rec.Y = wide
			rec.Neurons = nil
			q2, err := PrepareRecording(q.Cfg, &rec)
			if err != nil {
				t.Fatal(err)
			}
			if len(q2.Report.Constant) != 3 {
				t.Fatalf("constant neurons %v, want the 3 appended", q2.Report.Constant)
			}
			g, err := Fit(context.Background(), q2, Hooks{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			wider := ScoreFitted(q2, g)
			var worst float64
			for j := range base {
				worst = max(worst, math.Abs(base[j].TestR2-wider[j].TestR2))
			}
			if worst > 1e-6 {
				t.Errorf("appending 3 constant neurons moved another neuron's test R2 by %.3g, want < 1e-6", worst)
			}
			t.Logf("largest change of a test R2: %.3g", worst)
		})
	}
}

// TestProjectedColumnOrder reorders the neurons of a recording and expects
// the default (projected) fit to give every neuron the same held-out
// scores: the filters depend on the neurons only through sums over them,
// which change with the order only by rounding.
func TestProjectedColumnOrder(t *testing.T) {
	edit := func(c *settings.Config) { c.Train.MaxEpochs = 150; c.Axis.BinWidth = 12 }
	p, _ := synthPrepared(t, 50, 600, edit)
	f, err := Fit(context.Background(), p, Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	base := ScoreFitted(p, f)
	q, _ := synthPrepared(t, 50, 600, edit)
	perm := rand.New(rand.NewPCG(5, 6)).Perm(q.Rec.Y.Cols)
	y := q.Rec.Y
	re := data.NewMatrix(y.Rows, y.Cols)
	for i := 0; i < y.Rows; i++ {
		src, dst := y.Row(i), re.Row(i)
		for k, j := range perm {
			dst[k] = src[j]
		}
	}
	rec := *q.Rec
	rec.Y = re
	rec.Neurons = nil
	q2, err := PrepareRecording(q.Cfg, &rec)
	if err != nil {
		t.Fatal(err)
	}
	g, err := Fit(context.Background(), q2, Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if f.Solver != settings.SolverProjected || g.Solver != settings.SolverProjected {
		t.Fatalf("solvers %s, %s: want the default projected", f.Solver, g.Solver)
	}
	got := ScoreFitted(q2, g)
	var worst float64
	for k, j := range perm {
		worst = max(worst, math.Abs(got[k].TestR2-base[j].TestR2))
	}
	t.Logf("largest change of a test R2 after reordering: %.3g", worst)
	if worst > 1e-8 {
		t.Errorf("reordering the neurons moved a test R2 by %.3g, want < 1e-8", worst)
	}
}

// TestDiscreteConditionsCentred fits twelve orientations 0, 15, ..., 165
// declared as min 0, bin_width 15 (the values on the left bin edges) and
// expects the bins moved onto the values, and the encoder's preferred
// orientations within 1 degree of the planted ones on average (they were
// +7.5 off before the bins were centred).
func TestDiscreteConditionsCentred(t *testing.T) {
	const N, reps = 120, 40
	rng := rand.New(rand.NewPCG(3, 9))
	pref := make([]float64, N)
	for n := range pref {
		pref[n] = 180 * rng.Float64()
	}
	T := 12 * reps
	rec := &data.Recording{Y: data.NewMatrix(T, N), Stim: make([]float64, T), Source: data.Source{Responses: "synthetic", Stimulus: "orientations"}}
	for t := 0; t < T; t++ {
		th := 15 * float64(t%12)
		rec.Stim[t] = th
		for n, p := range pref {
			mu := 1 + 3*math.Exp(2*(math.Cos(2*(th-p)*math.Pi/180)-1))
			rec.Y.Row(t)[n] = float32(mu + 0.5*rng.NormFloat64())
		}
	}
	cfg := settings.Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = settings.AxisConfig{Name: "orientation", Unit: "deg", Min: 0, Max: 180, Periodic: true, BinWidth: 15}
	cfg.Split.KeepBlocks = false
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := PrepareRecording(&cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	if c := p.Axis.Centers(); math.Abs(c[0]) > 1e-9 || math.Abs(c[1]-15) > 1e-9 {
		t.Fatalf("bin centres %v..., want 0, 15, ...", c[:3])
	}
	if cfg.Axis.Min != -7.5 || cfg.Axis.Max != 172.5 {
		t.Errorf("resolved axis %v..%v, want -7.5..172.5", cfg.Axis.Min, cfg.Axis.Max)
	}
	if len(p.Report.Warnings) == 0 || !strings.Contains(p.Report.Warnings[0], "centres") {
		t.Errorf("no note about the moved bins: %q", p.Report.Warnings)
	}
	f, err := Fit(context.Background(), p, Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	pc := slices.Clone(f.Curves)
	p.Norm.InvertRows(pc)
	centres := p.Axis.Centers()
	curve := make([]float64, p.NBins)
	var sum float64
	for n := range pref {
		for b := range curve {
			curve[b] = pc[b*N+n]
		}
		d := tuning.Describe(curve, centres, 180)
		e := math.Mod(d.Preferred-pref[n]+270, 180) - 90 // signed, on the 180-degree circle
		sum += e
	}
	if mean := sum / N; math.Abs(mean) > 1 {
		t.Errorf("mean preferred-orientation error %.2f deg, want under 1", mean)
	}
}

// TestCautionsFor checks that the noise-ceiling caution appears only when
// a condition has few scored trials, and the split caution always.
func TestCautionsFor(t *testing.T) {
	if got := CautionsFor([]int{24, 0, 30}); len(got) != 1 || !strings.Contains(got[0], "split") {
		t.Errorf("24+ trials per condition: got %q, want only the split caution", got)
	}
	if got := CautionsFor([]int{24, 3, 30}); len(got) != 2 || !strings.Contains(got[0], "few trials") {
		t.Errorf("3 trials in a condition: got %q, want both cautions", got)
	}
}
