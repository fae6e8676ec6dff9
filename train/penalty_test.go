package train

import (
	"github.com/strialab/stria/train/settings"
	"math"
	"testing"

	"github.com/strialab/stria/train/projection"
)

// TestAutoReadout checks that the readout autoReadout writes into the net
// reproduces the per-bin predictions it returns (through nn's forward
// pass, the reference for predictions), with one penalty and per neuron,
// and that the recorded penalties lie on the grid's range.
func TestAutoReadout(t *testing.T) {
	for _, per := range []bool{false, true} {
		p, net := projectedCase(t, settings.BorderCircular, 1)
		pj, err := projection.NewMSE(p.problem(), net)
		if err != nil {
			t.Fatal(err)
		}
		curves, l2, err := pj.AutoReadout(per)
		if err != nil {
			t.Fatal(err)
		}
		want := PredictConditions(net, p.NBins)
		var d, m float64
		for i := range want {
			d = math.Max(d, math.Abs(curves[i]-want[i]))
			m = math.Max(m, math.Abs(want[i]))
		}
		if d > 1e-9*math.Max(m, 1) {
			t.Errorf("per neuron %v: curves differ from the net's forward pass by %g (largest %g)", per, d, m)
		}
		lo, hi := math.Inf(1), 0.0
		for _, v := range l2 {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		if !(lo > 0) || (!per && lo != hi) {
			t.Errorf("per neuron %v: readout_l2 from %g to %g", per, lo, hi)
		}
		t.Logf("per neuron %v: readout_l2 from %.3g to %.3g", per, lo, hi)
	}
}
