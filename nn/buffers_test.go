package nn

import (
	"fmt"
	"slices"
	"strings"
	"testing"
)

// The losses may write their gradient over the targets: the gradient and
// the loss equal those into a separate buffer, bit for bit (the reference
// is the separate buffer).
func TestLossGradIntoTarget(t *testing.T) {
	rows, cols := 5, 7
	for _, name := range []string{"MSE", "Poisson"} {
		for _, weighted := range []bool{false, true} {
			t.Run(fmt.Sprintf("%s weighted %t", name, weighted), func(t *testing.T) {
				rng := newRand(3)
				pred, target := randn(rng, rows*cols), randn(rng, rows*cols)
				for i := range pred {
					pred[i], target[i] = pred[i]*pred[i], target[i]*target[i] // rates and counts >= 0
				}
				var weight []float64
				if weighted {
					weight = []float64{1, 2, 0.5, 3, 1}
				}
				loss := MSE
				if name == "Poisson" {
					loss = Poisson
				}
				want := make([]float64, len(pred))
				lwant := loss(want, pred, target, weight, rows, cols)
				got := slices.Clone(target)
				lgot := loss(got, pred, got, weight, rows, cols)
				if lgot != lwant {
					t.Errorf("loss %v, want %v", lgot, lwant)
				}
				if !slices.Equal(got, want) {
					t.Errorf("gradient over the targets %v, want %v", got, want)
				}
			})
		}
	}
}

// An identity output keeps one buffer for the readout's output before and
// after the activation; a Work made then still works, bit for bit like a
// new one, when Output is changed afterwards.
func TestWorkOutputChanged(t *testing.T) {
	rng := newRand(5)
	n := NewNet(testShape(Identity, 130))
	n.Init(rng)
	rows := 4
	x := randn(rng, rows*n.In*n.Length)
	target := randn(rng, rows*n.Neurons)
	w := n.NewWork(rows)
	if &w.y[0] != &w.z[0] {
		t.Error("identity output: two buffers")
	}
	fastStep(n, w, x, target, rows)
	n.Output = Softplus
	p1, g1 := fastStep(n, w, x, target, rows)
	p2, g2 := fastStep(n, n.NewWork(rows), x, target, rows)
	checkClose(t, "pred", p1, p2, 0, 0)
	checkClose(t, "grads", g1, g2, 0, 0)
}

// ReleaseGrads drops the gradients; Backward then panics, and ZeroGrad
// brings them back, after which a step gives the same gradients as on a
// net that never released them (the reference).
func TestReleaseGrads(t *testing.T) {
	rng := newRand(6)
	n := NewNet(testShape(Softplus, 70))
	n.Init(rng)
	rows := 3
	x := randn(rng, rows*n.In*n.Length)
	target := randn(rng, rows*n.Neurons)
	w := n.NewWork(rows)
	_, want := fastStep(n, w, x, target, rows)
	n.ReleaseGrads()
	if n.Grads != nil {
		t.Fatal("Grads kept after ReleaseGrads")
	}
	pred := n.Forward(w, x, rows) // predicting needs no gradients
	dpred := make([]float64, len(pred))
	MSE(dpred, pred, target, nil, rows, n.Neurons)
	func() {
		defer func() {
			if r := recover(); r == nil || !strings.HasPrefix(fmt.Sprint(r), "nn: ") {
				t.Errorf("Backward after ReleaseGrads: panic %v, want an nn: panic", r)
			}
		}()
		n.Backward(w, dpred, rows)
	}()
	_, got := fastStep(n, w, x, target, rows) // ZeroGrad first
	checkClose(t, "grads", got, want, 0, 0)
}
