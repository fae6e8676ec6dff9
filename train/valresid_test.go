package train

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/strialab/stria/nn"
	"github.com/strialab/stria/train/settings"
)

// TestConditionResidualIdentity checks eval/methods.md §8 [derived] for the
// validation R^2 of one-hot fits: the per-neuron residual sum of squares
// from condition rows (within-condition sum of squares plus N_b (f_b -
// ybar_b)^2) equals the sum of (y_t - f)^2 over the single validation
// trials (the reference, summed directly).
func TestConditionResidualIdentity(t *testing.T) {
	// 1,500 trials: about 4 validation trials per condition, so that the
	// within-condition part is not zero.
	p, _ := synthPrepared(t, 30, 1500, func(c *settings.Config) {
		c.Train.BatchSize = 64
		c.Axis.BinWidth = 12
	})
	net := nn.NewNet(p.Cfg.Shape(p.NBins, p.Neurons()))
	net.Init(rand.New(rand.NewPCG(1, 2)))
	tr := newTrainer(p, net)
	n := p.Neurons()
	cond := make([]float64, n)
	tr.lossGrad(tr.valC, false, 1, cond)
	if len(p.Val) < 2*tr.valC.rows {
		t.Fatalf("%d validation trials in %d conditions: the test needs several per condition", len(p.Val), tr.valC.rows)
	}
	trial := make([]float64, n)
	tr.sweep(p.Val, false, trial)
	// Tolerance: float64 sums of a few hundred terms of either form.
	for j := range cond {
		if math.Abs(cond[j]-trial[j]) > 1e-10*math.Abs(trial[j]) {
			t.Errorf("neuron %d: residual sum of squares from conditions %.15g, from trials %.15g", j, cond[j], trial[j])
		}
	}
}
