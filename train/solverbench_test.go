package train

import (
	"context"
	"fmt"
	"github.com/strialab/stria/train/settings"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/nn"
	"github.com/strialab/stria/train/projection"
)

// BenchmarkPoissonFastVsAdam fits a spike-count population with the adam
// solver (Poisson, softplus, full batch on condition sums) and with the
// Poisson fast path on the same split and readout_l2 (0.01 and 1); it
// reports the median test R^2 of both, their gap shares, and the time
// ratio.
func BenchmarkPoissonFastVsAdam(b *testing.B) {
	for _, l2 := range []float64{0.01, 1} {
		n := 1000
		b.Run(fmt.Sprintf("neurons=%d/readout_l2=%g", n, l2), func(b *testing.B) {
			p, truth := popPrepared(b, synth.DiscreteConfig{Neurons: n, Trials: 3000, Bins: 60, Poisson: true, GainSD: 0.2, UntunedFrac: 0.15, RareBins: 6, Seed: 41},
				func(c *settings.Config) {
					c.Model.ReadoutL2 = settings.Penalty{Value: l2}
					c.Train.Patience = 100
					c.Train.Solver = settings.SolverAdam // auto would run the fast path
				})
			cm, or := testR2(p, condMeanPred(p)), testR2(p, truth)
			for range b.N {
				t0 := time.Now()
				fa, err := Fit(context.Background(), p, Hooks{}, nil)
				if err != nil {
					b.Fatal(err)
				}
				ta := time.Since(t0)
				t0 = time.Now()
				pf, ef := fitPoissonFast(b, p)
				tf := time.Since(t0)
				ra, rf := testR2(p, condPred(fa.Net, p)), testR2(p, pf)
				b.ReportMetric(nanMedian(ra), "r2_adam")
				b.ReportMetric(nanMedian(rf), "r2_fast")
				b.ReportMetric(gapShare(ra, cm, or), "gap_adam")
				b.ReportMetric(gapShare(rf, cm, or), "gap_fast")
				b.ReportMetric(tf.Seconds()/ta.Seconds(), "time_fast/adam")
				b.ReportMetric(float64(len(fa.Log)), "epochs_adam")
				b.ReportMetric(float64(ef), "epochs_fast")
				b.ReportMetric(ta.Seconds(), "s_adam")
				b.ReportMetric(tf.Seconds(), "s_fast")
				b.ReportMetric(nanMedian(cm), "r2_condition_mean")
				b.ReportMetric(nanMedian(or), "r2_oracle")
			}
		})
	}
}

// poissonBumps is the spike-count population of BenchmarkPoissonSolvers:
// cells with one to three von Mises bumps at random places (synth.Bumps,
// the quality benchmark's scenario), shared gain noise, Poisson counts.
func poissonBumps(neurons int) synth.BumpsConfig {
	return synth.BumpsConfig{Neurons: neurons, Trials: 3000, Bins: 60, UntunedFrac: 0.15, GainSD: 0.15, Poisson: true, Seed: 43}
}

// poissonBumpsPrepared bins and splits a poissonBumps population with the
// default config for counts (loss poisson, softplus output, no z-scoring)
// and the given solver; it returns the noise-free bin means too.
func poissonBumpsPrepared(tb testing.TB, scen synth.BumpsConfig, solver settings.Solver) (*Prepared, []float64) {
	tb.Helper()
	rec, _, oracle := synth.Bumps(scen)
	cfg := settings.Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = settings.AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 360 / float64(scen.Bins), Encoding: settings.OneHot}
	cfg.Split.KeepBlocks = false
	cfg.Model.Loss, cfg.Model.Output, cfg.Split.ZScore = settings.Poisson, nn.Softplus, false
	cfg.Train.Solver = solver
	if err := cfg.Validate(); err != nil {
		tb.Fatal(err)
	}
	p, err := PrepareRecording(&cfg, rec)
	if err != nil {
		tb.Fatal(err)
	}
	return p, oracle
}

// BenchmarkPoissonSolvers fits a spike-count population (poissonBumps)
// with the default config for counts, once with train.solver adam and once
// with the Poisson fast path (train.solver projected), on the same split,
// and reports for each the wall and CPU time, the epochs, the median test
// R^2 and the share of the gap between the training condition means and
// the noise-free means that it closes on the test trials (as
// BenchmarkQuality), the median readout_l2 the fast path chose, and the
// ratios fast/adam of the CPU and wall times.
func BenchmarkPoissonSolvers(b *testing.B) {
	for _, n := range []int{500, 2000} {
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			scen := poissonBumps(n)
			pa, oracle := poissonBumpsPrepared(b, scen, settings.SolverAdam)
			pf, _ := poissonBumpsPrepared(b, scen, settings.SolverProjected)
			cm, or := testR2(pa, condMeanPred(pa)), testR2(pa, oracle)
			for range b.N {
				c0, t0 := cpuSeconds(), time.Now()
				fa, err := Fit(context.Background(), pa, Hooks{}, nil)
				if err != nil {
					b.Fatal(err)
				}
				ca, ta := cpuSeconds()-c0, time.Since(t0).Seconds()
				c0, t0 = cpuSeconds(), time.Now()
				ff, err := Fit(context.Background(), pf, Hooks{}, nil)
				if err != nil {
					b.Fatal(err)
				}
				cf, tf := cpuSeconds()-c0, time.Since(t0).Seconds()
				ra, rf := testR2(pa, condPred(fa.Net, pa)), testR2(pf, ff.Curves)
				b.ReportMetric(ca, "cpu_s_adam")
				b.ReportMetric(cf, "cpu_s_fast")
				b.ReportMetric(cf/ca, "cpu_fast/adam")
				b.ReportMetric(tf/ta, "wall_fast/adam")
				b.ReportMetric(float64(len(fa.Log)), "epochs_adam")
				b.ReportMetric(float64(len(ff.Log)), "epochs_fast")
				b.ReportMetric(nanMedian(ra), "r2_adam")
				b.ReportMetric(nanMedian(rf), "r2_fast")
				b.ReportMetric(gapShare(ra, cm, or), "gap_adam")
				b.ReportMetric(gapShare(rf, cm, or), "gap_fast")
				b.ReportMetric(nanMedian(cm), "r2_condition_mean")
				b.ReportMetric(nanMedian(or), "r2_oracle")
				if ff.ReadoutL2 != nil {
					b.ReportMetric(nanMedian(ff.ReadoutL2), "l2_fast")
				}
				// The first epoch at which the fast path's validation loss (the
				// same quantity in both logs) reaches adam's best, and the CPU
				// time to get there (that share of the fast path's epochs) as a
				// share of adam's.
				best := math.Inf(1)
				for _, e := range fa.Log {
					best = math.Min(best, e.ValLoss)
				}
				for _, e := range ff.Log {
					if e.ValLoss <= best {
						b.ReportMetric(float64(e.Epoch), "epochs_fast_to_adam_best")
						b.ReportMetric(float64(e.Epoch)/float64(len(ff.Log))*cf/ca, "cpu_fast_to_adam_best/adam")
						break
					}
				}
			}
		})
	}
}

// BenchmarkPoissonEpoch times one epoch of the Poisson fast path as the
// epoch loop runs it (a filter step, then features, basis, per-neuron
// inexact Newton steps from the previous epoch's readout, envelope
// gradient, validation loss), at the full-size model shape (60 bins, F
// 480): O(N Bt^2). Wall time, so compare the ratio of adjacent runs.
func BenchmarkPoissonEpoch(b *testing.B) {
	for _, n := range []int{1000, 6000, 24000} {
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			p, _ := popPrepared(b, synth.DiscreteConfig{Neurons: n, Trials: 1200, Bins: 60, Poisson: true, GainSD: 0.2, UntunedFrac: 0.15, Seed: 41}, nil)
			net := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
			net.InitConvs(rand.New(rand.NewPCG(1, 2)))
			pp, err := projection.NewPoisson(p.problem(), net)
			if err != nil {
				b.Fatal(err)
			}
			opt := nn.NewAdam(len(pp.Trainable()))
			opt.LR = 1e-2
			if err := pp.Begin(); err != nil {
				b.Fatal(err)
			}
			for e := 1; e <= 5; e++ {
				pp.Epoch(opt)
				if _, _, err := pp.Validate(e); err != nil {
					b.Fatal(err)
				}
			}
			b.ResetTimer()
			for i := range b.N {
				pp.Epoch(opt)
				if _, _, err := pp.Validate(6 + i); err != nil {
					b.Fatal(err)
				}
			}
			fast := b.Elapsed().Seconds() / float64(b.N)
			// One epoch of the adam solver on the same data (full batch on
			// condition sums, then its validation pass), for the ratio.
			b.StopTimer()
			an := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
			an.Init(rand.New(rand.NewPCG(1, 2)))
			tr := newTrainer(p, an)
			aopt := newOptimizer(p.Cfg.Train, len(an.Params))
			tr.Epoch(aopt)
			t0 := time.Now()
			const reps = 3
			for range reps {
				tr.Epoch(aopt)
				tr.evalVal()
			}
			adam := time.Since(t0).Seconds() / reps
			b.ReportMetric(adam, "adam_s/epoch")
			b.ReportMetric(fast/adam, "fast/adam_epoch")
		})
	}
}

// fitPoissonAdamFilters is the Poisson fast path with its filters trained
// by Adam at the config's train settings (epochs of one Adam step, inexact
// warm-started readout steps per epoch; the fast path before the
// quasi-Newton filter training), then the same final readout as
// fitPoissonProjected: for BenchmarkPoissonFilterOptimisers.
func fitPoissonAdamFilters(tb testing.TB, p *Prepared) (*Fitted, []float64) {
	tb.Helper()
	cfg := p.Cfg
	net := nn.NewNet(cfg.Shape(p.NBins, p.Neurons()))
	net.InitConvs(rand.New(rand.NewPCG(cfg.Seed, 0x1417)))
	s, err := projection.NewPoisson(p.problem(), net)
	if err != nil {
		tb.Fatal(err)
	}
	res, err := runEpochs(context.Background(), s, cfg.Train, Hooks{}, nil)
	if err != nil {
		tb.Fatal(err)
	}
	curves, _, _, err := s.AutoReadout(false)
	if err != nil {
		tb.Fatal(err)
	}
	return &Fitted{Net: net, Log: res.log, BestEpoch: res.bestEpoch}, curves
}

// BenchmarkPoissonFilterOptimisers fits the spike-count population of
// BenchmarkPoissonSolvers with the Poisson fast path twice: filters by
// L-BFGS (fitPoissonProjected, the default) and by Adam (train settings:
// learning rate 1e-2, patience 100 epochs). It reports for each the CPU
// time, the epochs (iterations), the best one, the validation loss there
// (trained penalty), and after the automatic penalty choice the median
// test R^2 and the gap share (as BenchmarkPoissonSolvers); and the ratio
// of the CPU times.
func BenchmarkPoissonFilterOptimisers(b *testing.B) {
	for _, n := range []int{500, 2000} {
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			scen := poissonBumps(n)
			p, oracle := poissonBumpsPrepared(b, scen, settings.SolverProjected)
			cm, or := testR2(p, condMeanPred(p)), testR2(p, oracle)
			for range b.N {
				c0 := cpuSeconds()
				fq, err := Fit(context.Background(), p, Hooks{}, nil)
				if err != nil {
					b.Fatal(err)
				}
				cq := cpuSeconds() - c0
				c0 = cpuSeconds()
				fa, curves := fitPoissonAdamFilters(b, p)
				ca := cpuSeconds() - c0
				rq, ra := testR2(p, fq.Curves), testR2(p, curves)
				b.ReportMetric(cq, "cpu_s_lbfgs")
				b.ReportMetric(ca, "cpu_s_adamfilters")
				b.ReportMetric(cq/ca, "cpu_lbfgs/adamfilters")
				b.ReportMetric(float64(len(fq.Log)), "iters_lbfgs")
				b.ReportMetric(float64(len(fa.Log)), "epochs_adamfilters")
				b.ReportMetric(float64(fq.BestEpoch), "best_lbfgs")
				b.ReportMetric(float64(fa.BestEpoch), "best_adamfilters")
				b.ReportMetric(fq.Log[fq.BestEpoch-1].ValLoss, "val_lbfgs")
				b.ReportMetric(fa.Log[fa.BestEpoch-1].ValLoss, "val_adamfilters")
				b.ReportMetric(nanMedian(rq), "r2_lbfgs")
				b.ReportMetric(nanMedian(ra), "r2_adamfilters")
				b.ReportMetric(gapShare(rq, cm, or), "gap_lbfgs")
				b.ReportMetric(gapShare(ra, cm, or), "gap_adamfilters")
			}
		})
	}
}
