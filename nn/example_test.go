package nn_test

import (
	"fmt"
	"math/rand/v2"

	"github.com/strialab/stria/nn"
)

// Build a small encoder for a periodic stimulus axis of 60 bins, forward a
// batch of one-hot conditions, and take one Adam step on the MSE.
func Example() {
	net := nn.NewNet(nn.Shape{
		In:      1,  // one-hot stimulus
		Length:  60, // 60 bins of 6 degrees
		Convs:   []nn.ConvSpec{{Out: 8, K: 9, Stride: 1, Border: nn.Circular}},
		Neurons: 100,
		Output:  nn.Softplus,
	})
	net.Init(rand.New(rand.NewPCG(1, 2)))

	const rows = 60 // one row per condition
	x := make([]float64, rows*60)
	for b := range rows {
		x[b*60+b] = 1
	}
	target := make([]float64, rows*net.Neurons) // condition means, here all 0

	w := net.NewWork(rows)
	opt := nn.NewAdam(len(net.Params))
	dpred := make([]float64, rows*net.Neurons)

	net.ZeroGrad()
	pred := net.Forward(w, x, rows)
	before := nn.MSE(dpred, pred, target, nil, rows, net.Neurons)
	net.Backward(w, dpred, rows)
	opt.Step(net.Params, net.Grads)
	after := nn.MSE(nil, net.Forward(w, x, rows), target, nil, rows, net.Neurons)

	fmt.Println("conv output length:", net.OutLen(0))
	fmt.Println("features:", net.Features())
	fmt.Println("predictions:", len(pred))
	fmt.Println("loss went down:", after < before)
	// Output:
	// conv output length: 60
	// features: 480
	// predictions: 6000
	// loss went down: true
}
