package train

import (
	"context"
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/strialab/stria/nn"
)

// penaltyPopulation is the scenario of the penalty benchmark: 2,000 cells,
// 3,000 trials, 60 conditions (6 of them rarer), Gaussian noise of noise
// times a cell's amplitude and a 20 % shared gain, z-scored MSE with the default
// encoder.
func penaltyPopulation(b *testing.B, noise float64) (*Prepared, []float64) {
	return popPrepared(b, popSpec{Neurons: 2000, Trials: 3000, Bins: 60, GainSD: 0.2, NoiseSD: noise, UntunedFrac: 0.1, RareBins: 6, Seed: 31},
		func(c *Config) { c.Train.Solver = SolverProjected; c.Train.MaxEpochs = 3000; c.Train.Patience = 100 })
}

// trainProjected trains the filters of a projected fit; every 'every'
// epochs (0: never) choose() may reset the penalty. It returns the net, the
// projector at the best filters and the epochs run.
func trainProjected(b *testing.B, p *Prepared, every int, choose func(pj *projector, net *nn.Net)) (*nn.Net, *projector, int) {
	net := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
	net.InitConvs(rand.New(rand.NewPCG(p.Cfg.Seed, 0x1417)))
	pj, err := newProjector(p, net)
	if err != nil {
		b.Fatal(err)
	}
	calls := 0
	ep := trainFilters(b, p, net, pj.nconv, func(grad bool) (float64, error) {
		if every > 0 && calls%every == 0 {
			choose(pj, net)
		}
		calls++
		err := pj.eval(net, grad, false)
		return pj.val, err
	})
	return net, pj, ep
}

// BenchmarkReadoutPenalty reports the share of the gap between the
// condition-mean model and the oracle (true noise-free means) that the
// projected solver closes on the test trials with each choice of the
// readout penalty (see penalty.go), and the chosen readout_l2 values.
// Run with -benchtime=1x; seeded, so the numbers repeat.
func BenchmarkReadoutPenalty(b *testing.B) {
	for _, noise := range []float64{1, 0.3} {
		b.Run(fmt.Sprintf("noise=%g", noise), func(b *testing.B) { benchPenalty(b, noise) })
	}
}

func benchPenalty(b *testing.B, noise float64) {
	p, truth := penaltyPopulation(b, noise)
	cm, or := testR2(p, condMeanPred(p)), testR2(p, truth)
	gap := func(name string, pred []float64) {
		p.Norm.InvertRows(pred)
		r2 := testR2(p, pred)
		b.ReportMetric(gapShare(r2, cm, or), "gap_"+name)
		b.ReportMetric(nanMedian(r2), "r2_"+name)
	}
	within := trainWithinN(p)
	for range b.N {
		b.ReportMetric(nanMedian(cm), "r2_condition_mean")
		b.ReportMetric(nanMedian(or), "r2_oracle")
		// Fixed lambda = 1, then every choice at the best filters.
		t0 := time.Now()
		net, pj, ep := trainProjected(b, p, 0, nil)
		b.Logf("fixed lambda 1: %d epochs, %v", ep, time.Since(t0))
		rp := newRidgePath(pj, nil)
		if err := rp.decompose(pj, net); err != nil {
			b.Fatal(err)
		}
		g1 := argmin(absDiff(rp.mu, pj.mu))
		all := func(g int) []int {
			k := make([]int, pj.N)
			for n := range k {
				k[n] = g
			}
			return k
		}
		pj.features(net)
		if err := pj.readout(net); err != nil {
			b.Fatal(err)
		}
		gap("fixed1", pj.curves())
		_ = g1
		val, cp, gcv := make([]float64, len(rp.mu)), make([]float64, len(rp.mu)), make([]float64, len(rp.mu))
		rp.valLoss(val, pj)
		rp.sure(cp, gcv, pj)
		for _, c := range []struct {
			name string
			x    []float64
		}{{"final_val", val}, {"final_cp", cp}, {"final_gcv", gcv}} {
			g := argmin(c.x)
			b.ReportMetric(pj.readoutL2(rp.mu[g]), "l2_"+c.name)
			gap(c.name, rp.readout(pj, net, all(g)))
		}
		t1 := time.Now()
		pv := rp.perNeuronVal(pj, argmin(val))
		b.ReportMetric(time.Since(t1).Seconds(), "s_neuron_val_choice")
		gap("final_neuron_val", rp.readout(pj, net, pv))
		logPicks(b, "final_neuron_val", pj, rp, pv)
		pc := rp.perNeuronSURE(pj, within)
		gap("final_neuron_cp", rp.readout(pj, net, pc))
		logPicks(b, "final_neuron_cp", pj, rp, pc)

		// Re-chosen during training every 10 epochs.
		for _, how := range []string{"val", "cp"} {
			var rq *ridgePath
			t0 := time.Now()
			net, pj, ep := trainProjected(b, p, 10, func(pj *projector, net *nn.Net) {
				if rq == nil {
					rq = newRidgePath(pj, nil)
				}
				if err := rq.decompose(pj, net); err != nil {
					b.Fatal(err)
				}
				x := make([]float64, len(rq.mu))
				if how == "val" {
					rq.valLoss(x, pj)
				} else {
					rq.sure(x, nil, pj)
				}
				pj.mu = rq.mu[argmin(x)]
			})
			b.Logf("re-chosen (%s) every 10 epochs: %d epochs, %v", how, ep, time.Since(t0))
			b.ReportMetric(pj.readoutL2(pj.mu), "l2_repick_"+how)
			if err := rq.decompose(pj, net); err != nil {
				b.Fatal(err)
			}
			x := make([]float64, len(rq.mu))
			if how == "val" {
				rq.valLoss(x, pj)
			} else {
				rq.sure(x, nil, pj)
			}
			g := argmin(x)
			gap("repick_"+how, rq.readout(pj, net, all(g)))
			var pn []int
			if how == "val" {
				pn = rq.perNeuronVal(pj, g)
			} else {
				pn = rq.perNeuronSURE(pj, within)
			}
			gap("repick_neuron_"+how, rq.readout(pj, net, pn))
		}
	}
}

func absDiff(x []float64, v float64) []float64 {
	out := make([]float64, len(x))
	for i, a := range x {
		out[i] = a - v
		if out[i] < 0 {
			out[i] = -out[i]
		}
	}
	return out
}

// logPicks reports the spread of per-neuron readout_l2 choices.
func logPicks(b *testing.B, name string, pj *projector, rp *ridgePath, pick []int) {
	v := make([]float64, len(pick))
	for n, g := range pick {
		v[n] = pj.readoutL2(rp.mu[g])
	}
	q := func(f float64) float64 {
		s := append([]float64(nil), v...)
		return quantile(s, f)
	}
	b.ReportMetric(q(0.1), "l2q10_"+name)
	b.ReportMetric(q(0.5), "l2q50_"+name)
	b.ReportMetric(q(0.9), "l2q90_"+name)
}

func quantile(x []float64, f float64) float64 {
	median(x) // sorts
	return x[int(f*float64(len(x)-1))]
}

// BenchmarkPoissonFastVsAdam fits a spike-count population with the adam
// solver (Poisson, softplus, full batch on condition sums) and with the
// Poisson fast path on the same split and readout_l2 (0.01 and 1); it
// reports the median test R^2 of both, their gap shares, and the time
// ratio.
func BenchmarkPoissonFastVsAdam(b *testing.B) {
	for _, l2 := range []float64{0.01, 1} {
		n := 1000
		b.Run(fmt.Sprintf("neurons=%d/readout_l2=%g", n, l2), func(b *testing.B) {
			p, truth := popPrepared(b, popSpec{Neurons: n, Trials: 3000, Bins: 60, Poisson: true, GainSD: 0.2, UntunedFrac: 0.15, RareBins: 6, Seed: 41},
				func(c *Config) { c.Model.ReadoutL2 = Penalty{Value: l2}; c.Train.Patience = 100 })
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

// BenchmarkPoissonEpoch times one epoch of the Poisson fast path (features,
// basis, per-neuron Newton from the previous epoch's readout, envelope
// gradient, validation loss) after a filter step, at the full-size model
// shape (60 bins, F 480): O(N Bt^3).
func BenchmarkPoissonEpoch(b *testing.B) {
	for _, n := range []int{1000, 6000, 24000} {
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			p, _ := popPrepared(b, popSpec{Neurons: n, Trials: 1200, Bins: 60, Poisson: true, GainSD: 0.2, UntunedFrac: 0.15, Seed: 41}, nil)
			net := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
			net.InitConvs(rand.New(rand.NewPCG(1, 2)))
			pp, err := newPoissonProj(p, net)
			if err != nil {
				b.Fatal(err)
			}
			opt := nn.NewAdam(pp.nconv)
			opt.LR = 1e-2
			pp.chord = true
			for range 5 {
				if err := pp.eval(net, true, false); err != nil {
					b.Fatal(err)
				}
				opt.Step(net.Params[:pp.nconv], net.Grads[:pp.nconv])
			}
			b.ResetTimer()
			var iters int
			for range b.N {
				if err := pp.eval(net, true, false); err != nil {
					b.Fatal(err)
				}
				opt.Step(net.Params[:pp.nconv], net.Grads[:pp.nconv])
				for _, k := range pp.iters {
					iters += k
				}
			}
			b.ReportMetric(float64(iters)/float64(b.N*n), "newton/neuron")
			fast := b.Elapsed().Seconds() / float64(b.N)
			// One epoch of the adam solver on the same data (full batch on
			// condition sums, then its validation pass), for the ratio.
			b.StopTimer()
			an := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
			an.Init(rand.New(rand.NewPCG(1, 2)))
			tr := newTrainer(p, an)
			aopt := newOptimizer(p.Cfg.Train, len(an.Params))
			tr.epoch(aopt)
			t0 := time.Now()
			const reps = 3
			for range reps {
				tr.epoch(aopt)
				tr.evalVal()
			}
			adam := time.Since(t0).Seconds() / reps
			b.ReportMetric(adam, "adam_s/epoch")
			b.ReportMetric(fast/adam, "fast/adam_epoch")
		})
	}
}

// BenchmarkPoissonPenalty trains the Poisson fast path with readout_l2 1
// (the default) and 0.01 on a spike-count population and reports the
// test gap share of the trained readout and of the readout re-solved with
// the penalty chosen on the validation trials at the final filters
// (poissonProj.choosePenalty), with the chosen readout_l2.
func BenchmarkPoissonPenalty(b *testing.B) {
	for _, l2 := range []float64{1, 0.01} {
		b.Run(fmt.Sprintf("readout_l2=%g", l2), func(b *testing.B) {
			p, truth := popPrepared(b, popSpec{Neurons: 1000, Trials: 3000, Bins: 60, Poisson: true, GainSD: 0.2, UntunedFrac: 0.15, RareBins: 6, Seed: 41},
				func(c *Config) { c.Model.ReadoutL2 = Penalty{Value: l2}; c.Train.Patience = 100 })
			cm, or := testR2(p, condMeanPred(p)), testR2(p, truth)
			for range b.N {
				f, err := fitPoissonProjected(context.Background(), p, Hooks{}, nil)
				if err != nil {
					b.Fatal(err)
				}
				r := testR2(p, f.Curves)
				b.ReportMetric(gapShare(r, cm, or), "gap_trained")
				b.ReportMetric(nanMedian(r), "r2_trained")
				pp, err := newPoissonProj(p, f.Net)
				if err != nil {
					b.Fatal(err)
				}
				t0 := time.Now()
				chosen, _, err := pp.choosePenalty(f.Net, nil)
				if err != nil {
					b.Fatal(err)
				}
				b.ReportMetric(time.Since(t0).Seconds(), "s_choice")
				r = testR2(p, pp.curves())
				b.ReportMetric(gapShare(r, cm, or), "gap_chosen")
				b.ReportMetric(nanMedian(r), "r2_chosen")
				b.ReportMetric(chosen, "l2_chosen")
				b.ReportMetric(float64(len(f.Log)), "epochs")
			}
		})
	}
}
