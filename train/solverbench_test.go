package train

import (
	"context"
	"fmt"
	"github.com/strialab/stria/train/settings"
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
				func(c *settings.Config) { c.Model.ReadoutL2 = settings.Penalty{Value: l2}; c.Train.Patience = 100 })
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

// BenchmarkPoissonEpoch times one epoch of the Poisson fast path as the
// epoch loop runs it (a filter step, then features, basis, per-neuron
// Newton from the previous epoch's readout, envelope gradient, validation
// loss), at the full-size model shape (60 bins, F 480): O(N Bt^3).
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
