package projection

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/strialab/stria/nn"
)

// TestOneHotConvMatchesNet compares the one-hot evaluation of a one-layer
// encoder with nn's general forward and backward passes on the identity
// input, for every border mode, strides 1-3 and odd and even kernels.
// Tolerance 1e-12: the same terms, summed in another order.
func TestOneHotConvMatchesNet(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 9))
	for _, border := range []nn.Border{nn.Zero, nn.Circular, nn.Valid} {
		for _, k := range []int{1, 4, 5, 9} {
			for stride := 1; stride <= 3; stride++ {
				const B = 17
				net := nn.NewNet(nn.Shape{In: 1, Length: B, Neurons: 3, Convs: []nn.ConvSpec{{Out: 4, K: k, Stride: stride, Border: border}}})
				net.Init(rng)
				for i := range net.ConvB(0) {
					net.ConvB(0)[i] = rng.NormFloat64() * 0.3 // some units off, some on
				}
				eye := make([]float64, B*B)
				for b := 0; b < B; b++ {
					eye[b*B+b] = 1
				}
				w := net.NewWork(B)
				want := slices.Clone(net.ForwardFeatures(w, eye, B))
				o := newOneHotConv(net)
				got := o.forward(net)
				dH := make([]float64, len(want))
				for i := range dH {
					dH[i] = rng.NormFloat64()
				}
				net.ZeroGrad()
				net.BackwardFeatures(w, dH, B)
				wantG := slices.Clone(net.Grads[:len(net.ConvW(0))+len(net.ConvB(0))])
				net.ZeroGrad()
				o.backward(net, dH)
				gotG := net.Grads[:len(wantG)]
				for i := range want {
					if math.Abs(got[i]-want[i]) > 1e-12 {
						t.Fatalf("%v K %d stride %d: feature %d: %v, nn %v", border, k, stride, i, got[i], want[i])
					}
				}
				for i := range wantG {
					if math.Abs(gotG[i]-wantG[i]) > 1e-12*math.Max(1, math.Abs(wantG[i])) {
						t.Fatalf("%v K %d stride %d: gradient %d: %v, nn %v", border, k, stride, i, gotG[i], wantG[i])
					}
				}
			}
		}
	}
}
