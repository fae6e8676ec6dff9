package nn

import (
	"math"
	"testing"
)

// Finite differences of sum(dy * ReLU(x)); inputs drawn away from the kink
// (|x| > 0.01, far beyond the fd step 6e-6). Tolerance 1e-8: ReLU is
// piecewise linear, so only rounding error remains.
func TestReLUGradFD(t *testing.T) {
	rng := newRand(2)
	x := randn(rng, 50)
	for i := range x {
		if math.Abs(x[i]) < 0.01 {
			x[i] = 0.5
		}
	}
	dy := randn(rng, 50)
	y := make([]float64, 50)
	ReLU(y, x)
	dx := make([]float64, 50)
	ReLUBackward(dx, dy, y)
	num := numGrad(func(v []float64) float64 { ReLU(y, v); return dot(y, dy) }, x)
	checkClose(t, "dx", dx, num, 1e-8, 1e-9)
}

// Finite differences of sum(dy * f(z)) for each output activation.
// Tolerance 1e-7 relative + 1e-9 absolute: central differences with step
// 6e-6 have truncation error ~ step^2 * |f”'| / 6 < 1e-10 here.
func TestActivationGradFD(t *testing.T) {
	rng := newRand(3)
	z := randn(rng, 40)
	dy := randn(rng, len(z)+5)
	for _, a := range []Activation{Identity, Softplus, Exp} {
		z := z
		if a == Softplus {
			// both branches of the stable softplus (kept away from Exp,
			// whose e^30 would swamp the differences in the sum)
			z = append(z, -30, -5, 0, 5, 30)
		}
		dy := dy[:len(z)]
		y := make([]float64, len(z))
		a.Forward(y, z)
		dz := make([]float64, len(z))
		a.Backward(dz, dy, z, y)
		tmp := make([]float64, len(z))
		num := numGrad(func(v []float64) float64 { a.Forward(tmp, v); return dot(tmp, dy) }, z)
		checkClose(t, a.String()+" dz", dz, num, 1e-7, 1e-9)
	}
}

// Softplus values: log(1+e^z) at z = 0 is log 2; at z = 40 it is
// 40 + e^-40 (= 40 in float64); at z = -40 it is e^-40 (log1p) to full
// relative precision [computed from the definition; log 2 = 0.6931471805599453].
func TestSoftplusStable(t *testing.T) {
	y := make([]float64, 4)
	Softplus.Forward(y, []float64{0, 40, -40, -800})
	want := []float64{0.6931471805599453, 40, math.Exp(-40), 0}
	checkClose(t, "softplus", y, want, 1e-15, 0)
}
