package train

import (
	"context"
	"github.com/strialab/stria/train/settings"
	"math"
	"testing"
)

// TestProjectedCurves checks the factored predictions the projected solver
// returns against a forward pass of the fitted net. Tolerance 1e-10 of the
// largest prediction: the same quantity, summed in another order.
func TestProjectedCurves(t *testing.T) {
	p, _ := synthPrepared(t, 150, 900, func(c *settings.Config) {
		c.Train.Solver = settings.SolverProjected
		c.Train.MaxEpochs = 30
		c.Axis.BinWidth = 12
	})
	f, err := Fit(context.Background(), p, Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if f.Curves == nil {
		t.Fatal("the projected solver returned no curves")
	}
	want := PredictConditions(f.Net, p.NBins)
	var scale float64
	for _, v := range want {
		scale = math.Max(scale, math.Abs(v))
	}
	for i := range want {
		if math.Abs(f.Curves[i]-want[i]) > 1e-10*scale {
			t.Fatalf("prediction %d: factored %v, forward %v", i, f.Curves[i], want[i])
		}
	}
}
