package state

import (
	"math"

	"github.com/strialab/stria/eval"
	"testing"
)

func sqrt0(x float64) float64 { return math.Sqrt(x) }

func TestExplore2(t *testing.T) {
	var ds, ds2, dq, dq2 float64
	S := 30
	for seed := uint64(1); seed <= uint64(S); seed++ {
		cfg := DefaultSim()
		cfg.Seed = seed
		s := Simulate(cfg)
		train, test := simSplit(s)
		_, _, h := speedFit(t, s, train, test, 0)
		N := cfg.Neurons
		var q float64
		for _, tt := range test {
			z := (s.Speed[tt] - s.SpeedMean) / s.SpeedSD
			q += z * z
		}
		q /= float64(len(test))
		pr := make([]Predicted, N)
		s.Predict(pr)
		var mp, mq, mm float64
		for n := range pr {
			mp += pr[n].Speed
			sp := pr[n].Speed * pr[n].Total * q
			mq += sp / (pr[n].Total + sp - pr[n].Speed*pr[n].Total)
			mm += h[n].Delta
		}
		d := (mm - mp) / float64(N)
		e := (mm - mq) / float64(N)
		ds += d
		ds2 += d * d
		dq += e
		dq2 += e * e
		t.Logf("seed %d q %.3f pred %.4f predq %.4f meas %.4f", seed, q, mp/float64(N), mq/float64(N), mm/float64(N))
	}
	n := float64(S)
	t.Logf("plain: mean diff %.4f sd %.4f; q: mean diff %.4f sd %.4f", ds/n, sqrt0(ds2/n-ds*ds/n/n), dq/n, sqrt0(dq2/n-dq*dq/n/n))
}

func TestExplore3(t *testing.T) {
	for _, N := range []int{20, 50, 100, 200, 400} {
		for _, add := range []bool{false, true} {
			for _, uni := range []Weighting{WeightRate, WeightNoise, WeightUniform} {
				cfg := DefaultSim()
				cfg.Neurons = N
				cfg.Seed = 7
				s := Simulate(cfg)
				train, test := simSplit(s)
				ids := make([]string, N)
				for i := range ids {
					ids[i] = "n" + string(rune('a'+i%26)) + string(rune('a'+i/26))
				}
				half, err := SplitHalves(ids, 1)
				if err != nil {
					t.Fatal(err)
				}
				st0, _ := NewStats(s.Y, N, nil, 0, s.Cond, cfg.Conditions, train)
				r, err := CrossGain(s.Y, N, st0.Mean, s.Cond, cfg.Conditions, train, test, half, CrossOptions{Additive: add, Weighting: uni})
				if err != nil {
					t.Fatal(err)
				}
				g := make([]float64, len(s.Cond))
				s.SharedGain(g)
				ga := make([]float64, len(g))
				gb := make([]float64, len(g))
				for i := range g {
					ga[i] = r.FromA[i*r.P]
					gb[i] = r.FromB[i*r.P]
				}
				pr := make([]Predicted, N)
				s.Predict(pr)
				var mp float64
				for _, p := range pr {
					mp += p.Speed + p.Latent
				}
				sm := SummarizeGain(r.Scores)
				t.Logf("N %d add %v w %v: corr A %.3f B %.3f; mean dR2 %.4f (max pred %.4f), median %.4f frac+ %.2f", N, add, uni, pearson(ga, g), pearson(gb, g), sm.MeanDelta, mp/float64(N), sm.Delta.Median, sm.FracPositive)
			}
		}
	}
}
func pearson(a, b []float64) float64 { return eval.Pearson(a, b) }
