package projection

import (
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/nn"
)

// penaltyPopulation is the scenario of the penalty benchmark: 2,000 cells,
// 3,000 trials, 60 conditions (6 of them rarer), Gaussian noise of noise
// times a cell's amplitude and a 20 % shared gain, z-scored MSE with the default
// encoder.
func penaltyPopulation(b *testing.B, noise float64) (*testCase, []float64) {
	return popCase(b, synth.DiscreteConfig{Neurons: 2000, Trials: 3000, Bins: 60, GainSD: 0.2, NoiseSD: noise, UntunedFrac: 0.1, RareBins: 6, Seed: 31},
		caseOptions{maxEpochs: 3000, patience: 100})
}

// trainProjected trains the filters of a projected fit; every 'every'
// epochs (0: never) choose() may reset the penalty. It returns the net, the
// projector at the best filters and the epochs run.
func trainProjected(b *testing.B, p *testCase, every int, choose func(pj *projector, net *nn.Net)) (*nn.Net, *projector, int) {
	net := nn.NewNet(nn.Shape{In: 1, Length: p.B, Neurons: p.N, Convs: p.convs, Output: p.output})
	net.InitConvs(rand.New(rand.NewPCG(1, 0x1417)))
	pj, err := newProjector(&p.pr, net)
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
	cm, or := p.testR2(p.condMeanPred()), p.testR2(truth)
	gap := func(name string, pred []float64) {
		p.pr.Norm.InvertRows(pred)
		r2 := p.testR2(pred)
		b.ReportMetric(gapShare(r2, cm, or), "gap_"+name)
		b.ReportMetric(nanMedian(r2), "r2_"+name)
	}
	within := trainWithinN(&p.pr, &projector{})
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
			gap(c.name, first(rp.readout(pj, net.ReadB(), all(g))))
		}
		t1 := time.Now()
		pv := rp.perNeuronVal(pj, argmin(val))
		b.ReportMetric(time.Since(t1).Seconds(), "s_neuron_val_choice")
		gap("final_neuron_val", first(rp.readout(pj, net.ReadB(), pv)))
		logPicks(b, "final_neuron_val", pj, rp, pv)
		pc := rp.perNeuronSURE(pj, within)
		gap("final_neuron_cp", first(rp.readout(pj, net.ReadB(), pc)))
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
			gap("repick_"+how, first(rq.readout(pj, net.ReadB(), all(g))))
			var pn []int
			if how == "val" {
				pn = rq.perNeuronVal(pj, g)
			} else {
				pn = rq.perNeuronSURE(pj, within)
			}
			gap("repick_neuron_"+how, first(rq.readout(pj, net.ReadB(), pn)))
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

// BenchmarkPoissonPenalty trains the Poisson fast path with readout_l2 1
// (the default) and 0.01 on a spike-count population and reports the
// test gap share of the trained readout and of the readout re-solved with
// the penalty chosen on the validation trials at the final filters
// (poissonProj.choosePenalty, one for all neurons and one per neuron),
// with the chosen readout_l2 (the median over neurons) and the time of
// the choice. (Training here runs the same inexact steps as the loop.)
func BenchmarkPoissonPenalty(b *testing.B) {
	for _, l2 := range []float64{1, 0.01} {
		b.Run(fmt.Sprintf("readout_l2=%g", l2), func(b *testing.B) {
			p, truth := popCase(b, synth.DiscreteConfig{Neurons: 1000, Trials: 3000, Bins: 60, Poisson: true, GainSD: 0.2, UntunedFrac: 0.15, RareBins: 6, Seed: 41},
				caseOptions{penalty: l2, patience: 100})
			cm, or := p.testR2(p.condMeanPred()), p.testR2(truth)
			for range b.N {
				net := p.net(1, 0x1417)
				pp, err := newPoissonProj(&p.pr, net)
				if err != nil {
					b.Fatal(err)
				}
				pp.mode = psStart
				epochs := trainFilters(b, p, net, pp.nconv, func(grad bool) (float64, error) {
					err := pp.eval(net, grad, false)
					pp.mode = psStep
					return pp.val, err
				})
				pp.mode = psExact
				if err := pp.eval(net, false, false); err != nil {
					b.Fatal(err)
				}
				r := p.testR2(pp.curves())
				b.ReportMetric(gapShare(r, cm, or), "gap_trained")
				b.ReportMetric(nanMedian(r), "r2_trained")
				for _, per := range []bool{false, true} {
					t0 := time.Now()
					chosen, _, err := pp.choosePenalty(net, nil, per)
					if err != nil {
						b.Fatal(err)
					}
					tag := map[bool]string{false: "global", true: "per_neuron"}[per]
					b.ReportMetric(time.Since(t0).Seconds(), "s_choice_"+tag)
					r = p.testR2(pp.curves())
					b.ReportMetric(gapShare(r, cm, or), "gap_"+tag)
					b.ReportMetric(nanMedian(r), "r2_"+tag)
					b.ReportMetric(nanMedian(chosen), "l2_median_"+tag)
				}
				b.ReportMetric(float64(epochs), "epochs")
			}
		})
	}
}

// first returns the curves of ridgePath.readout.
func first(curves []float64, _ *Readout) []float64 { return curves }

// randomReadout is a projector and ridge path of the full-size shape (B =
// Bt = 60 bins, F = 480 features) over N neurons with random features,
// eigenvectors and z, enough for ridgePath.readout; penalties alternate
// between neurons.
func randomReadout(N int) (*projector, *ridgePath, []int) {
	const B, F = 60, 480
	rng := rand.New(rand.NewPCG(5, 7))
	fill := func(n int) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = rng.NormFloat64()
		}
		return v
	}
	pj := &projector{B: B, Bt: B, F: F, N: N, a: fill(B * F), h: fill(B * F), hbar: fill(F), ymean: fill(N)}
	rp := &ridgePath{mu: []float64{0.1, 1, 10}, s: fill(B), u: fill(B * B), z: fill(B * N)}
	for j := range rp.s {
		rp.s[j] *= rp.s[j]
	}
	pick := make([]int, N)
	for n := range pick {
		pick[n] = n % 3
	}
	return pj, rp, pick
}

// BenchmarkReadoutWeights: the readout weights of 20,000 neurons at the
// full-size shape (B 60, F 480), N x F x B multiply-adds, the part of
// writing parameters/readout_weight.npy that is computation. Reports wall
// and CPU time per neuron (the CPU time is what a busy machine does not
// distort).
func BenchmarkReadoutWeights(b *testing.B) {
	const N = 20000
	pj, rp, pick := randomReadout(N)
	_, weights := rp.readout(pj, make([]float64, N), pick)
	dst := make([]float64, 2048*pj.F)
	b.ResetTimer()
	c0 := cpuSeconds()
	for range b.N {
		for n0 := 0; n0 < N; n0 += 2048 {
			n1 := min(n0+2048, N)
			weights.Weights(dst[:(n1-n0)*pj.F], n0, n1)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*N), "ns/neuron")
	b.ReportMetric((cpuSeconds()-c0)*1e9/float64(b.N*N), "cpu-ns/neuron")
}

// BenchmarkBlockSums: the sums over neurons the filters read (S, Cvt,
// Yyv and the within sums, by blocks of SumBlock neurons) at 60 training
// and 60 validation bins, per neuron; at a million neurons this is part of
// stria fit's "fit" phase.
func BenchmarkBlockSums(b *testing.B) {
	const B, N = 60, 40960
	rng := rand.New(rand.NewPCG(5, 8))
	fill := func(n int) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = rng.NormFloat64()
		}
		return v
	}
	pj := &projector{B: B, Bt: B, Bv: B, N: N, yc: fill(B * N), dv: fill(B * N), withinN: fill(N), withN: fill(N)}
	b.ResetTimer()
	c0 := cpuSeconds()
	for range b.N {
		pj.blockSums()
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*N), "ns/neuron")
	b.ReportMetric((cpuSeconds()-c0)*1e9/float64(b.N*N), "cpu-ns/neuron")
}
