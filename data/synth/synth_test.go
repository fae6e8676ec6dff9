package synth

import (
	"math"
	"slices"
	"testing"

	"github.com/strialab/stria/data/condstats"
)

func smallSynth() Config {
	c := DefaultConfig()
	c.Neurons, c.Trials, c.Bins, c.Seed = 200, 3000, 24, 7
	return c
}

func TestSynthDeterministic(t *testing.T) {
	c := smallSynth()
	c.Neurons, c.Trials = 50, 300
	r1, _, t1 := Population(c)
	r2, _, t2 := Population(c)
	if !slices.Equal(r1.Y.Data, r2.Y.Data) || !slices.Equal(r1.Stim, r2.Stim) || !slices.Equal(t1.Mean, t2.Mean) {
		t.Error("same seed gave different data")
	}
	c.Seed++
	r3, _, _ := Population(c)
	if slices.Equal(r1.Y.Data, r3.Y.Data) {
		t.Error("different seeds gave the same data")
	}
	c.Poisson = true
	p1, _, _ := Population(c)
	p2, _, _ := Population(c)
	if !slices.Equal(p1.Y.Data, p2.Y.Data) {
		t.Error("Poisson mode not deterministic")
	}
	for _, v := range p1.Y.Data {
		if v < 0 || v != float32(math.Round(float64(v))) {
			t.Fatalf("Poisson value %v is not a count", v)
		}
	}
}

// TestSynthRecovery: the empirical condition means estimate Truth.Mean.
// With z = (empirical - truth) / (s_b / sqrt(N_b)), s_b the within-bin
// standard deviation (ddof 1), z is about standard normal (central limit
// theorem over ~125 trials per bin). With the standard deviation estimated,
// z is closer to Student t with ~124 degrees of freedom, so E[z^2] is about
// 124/122 = 1.016 [computed]; over 8 seeds the mean of z^2 measured 1.02
// (Gaussian) and 1.03-1.04 (Poisson, whose skew couples mean and variance
// estimates) [measured]. The tolerance 0.1 is several times the seed-to-seed
// spread (cells share the gain, so the 4800 values are not independent).
// Also the generated shares of cell kinds match the config exactly.
func TestSynthRecovery(t *testing.T) {
	for _, poisson := range []bool{false, true} {
		c := smallSynth()
		c.Poisson = poisson
		rec, ax, tr := Population(c)
		if ax.NumBins() != 24 || !ax.Periodic || rec.Block[0] != 0 || rec.Block[c.Trials-1] != 9 {
			t.Fatalf("axis %+v blocks %d..%d", ax, rec.Block[0], rec.Block[c.Trials-1])
		}
		cond, err := ax.BinTrials(rec.Stim)
		if err != nil {
			t.Fatal(err)
		}
		all := make([]int, c.Trials)
		for i := range all {
			all[i] = i
		}
		s := condstats.New(rec.Y, cond, all, ax.NumBins())
		mean, vr := s.Mean(nil), s.Var(nil)
		var z2 float64
		var maxZ float64
		for i := range mean {
			z := (mean[i] - tr.Mean[i]) / math.Sqrt(vr[i]/float64(s.Count[i/c.Neurons]))
			z2 += z * z
			maxZ = math.Max(maxZ, math.Abs(z))
		}
		z2 /= float64(len(mean))
		t.Logf("poisson=%v: mean z^2 = %.4f, max |z| = %.2f", poisson, z2, maxZ)
		if math.Abs(z2-1) > 0.1 || maxZ > 5.5 {
			t.Errorf("poisson=%v: mean z^2 = %.3f (want 1 +- 0.1), max |z| = %.2f", poisson, z2, maxZ)
		}
		kinds := map[string]int{}
		for _, k := range tr.Kind {
			kinds[k]++
		}
		if kinds["untuned"] != 20 || kinds["double"] != 50 || kinds["single"] != 130 {
			t.Errorf("kinds %v, want 20 untuned (0.1 x 200), 50 double (0.25 x 200), 130 single", kinds)
		}
	}
}

// TestSynthTruthTuning: E6 of eval/methods.md §9 [computed]: a von Mises bump with
// A = 1, kappa = 1 is e^-2 = 0.1353352832 half a period from its peak.
func TestSynthTruthTuning(t *testing.T) {
	tr := &Truth{Kind: []string{"single", "double"}, Preferred: []float64{30, 30}, Kappa: []float64{1, 1},
		Amp: []float64{1, 1}, Base: []float64{0, 0.5}, Ratio: []float64{0, 0.5}}
	if got := tr.Tuning(0, 210); math.Abs(got-0.1353352832) > 1e-10 {
		t.Errorf("Tuning(single, 210) = %v, want e^-2", got)
	}
	// Two-peaked: at 210 deg, 0.5 + e^-2 + 0.5 * 1 [computed].
	if got := tr.Tuning(1, 210); math.Abs(got-(1+0.1353352832)) > 1e-10 {
		t.Errorf("Tuning(double, 210) = %v", got)
	}
}

func TestSynthValidate(t *testing.T) {
	for _, c := range []Config{{}, {Neurons: 1, Trials: 10, Bins: 0}, {Neurons: 1, Trials: 10, Bins: 4, UntunedFrac: 0.6, TwoPeakFrac: 0.6},
		{Neurons: 1, Trials: 10, Bins: 4, NoiseSD: math.NaN()}, {Neurons: 1, Trials: 10, Bins: 4, Blocks: 11}} {
		if c.Validate() == nil {
			t.Errorf("%+v: no error", c)
		}
	}
	if err := DefaultConfig().Validate(); err != nil {
		t.Error(err)
	}
}
