package nn

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
	"time"
)

type netFixture struct {
	Name             string
	Rows, In, Length int
	Convs            []struct {
		Out, K, Stride int
		Border         string
	}
	Neurons        int
	Output, Loss   string
	Features       int
	Params, X      []float64
	Target, Weight []float64
	FeaturesOut    []float64 `json:"features_out"`
	Pred           []float64
	LossValue      float64 `json:"loss_value"`
	Dpred, Grads   []float64
}

func activationOf(t *testing.T, s string) Activation {
	switch s {
	case "identity":
		return Identity
	case "softplus":
		return Softplus
	case "exp":
		return Exp
	}
	t.Fatalf("unknown activation %q", s)
	return 0
}

// torch 1.13 float64: conv -> relu -> conv -> relu -> flatten(1) -> linear ->
// softplus/exp/identity, weighted MSE or PoissonNLLLoss(log_input=False)
// elements, all gradients by autograd (testdata/nn/gen_nn.py -> net.json).
// The parameter order of the fixture is our Params layout. Tolerance 1e-12
// relative + 1e-14 absolute: float64 sums of at most a few dozen O(1) terms
// in a different order.
func TestNetTorch(t *testing.T) {
	var cases []netFixture
	loadFixture(t, "net.json", &cases)
	if len(cases) != 5 {
		t.Fatalf("%d net cases, want 5", len(cases))
	}
	for _, tc := range cases {
		t.Run(tc.Name, func(t *testing.T) {
			s := Shape{In: tc.In, Length: tc.Length, Neurons: tc.Neurons, Output: activationOf(t, tc.Output)}
			for _, c := range tc.Convs {
				s.Convs = append(s.Convs, ConvSpec{Out: c.Out, K: c.K, Stride: c.Stride, Border: borderOf(t, c.Border)})
			}
			n := NewNet(s)
			if n.Features() != tc.Features {
				t.Fatalf("Features %d, torch %d", n.Features(), tc.Features)
			}
			if len(n.Params) != len(tc.Params) {
				t.Fatalf("%d params, torch %d", len(n.Params), len(tc.Params))
			}
			copy(n.Params, tc.Params)
			w := n.NewWork(tc.Rows + 3)
			h := n.ForwardFeatures(w, tc.X, tc.Rows)
			checkClose(t, "features", h, tc.FeaturesOut, 1e-12, 1e-14)
			pred := n.Forward(w, tc.X, tc.Rows)
			checkClose(t, "pred", pred, tc.Pred, 1e-12, 1e-14)
			dpred := make([]float64, len(pred))
			loss := MSE
			if tc.Loss == "poisson" {
				loss = Poisson
			}
			l := loss(dpred, pred, tc.Target, tc.Weight, tc.Rows, tc.Neurons)
			if !closeTo(l, tc.LossValue, 1e-12, 0) {
				t.Errorf("loss %.17g, torch %.17g", l, tc.LossValue)
			}
			checkClose(t, "dpred", dpred, tc.Dpred, 1e-12, 1e-14)
			n.ZeroGrad()
			n.Backward(w, dpred, tc.Rows)
			checkClose(t, "grads", n.Grads, tc.Grads, 1e-11, 1e-14)
		})
	}
}

func testShape(out Activation, neurons int) Shape {
	return Shape{In: 2, Length: 11, Neurons: neurons, Output: out, Convs: []ConvSpec{
		{Out: 3, K: 4, Stride: 2, Border: Circular},
		{Out: 2, K: 3, Stride: 1, Border: Zero},
	}}
}

// Finite differences of the whole network's loss with respect to every
// parameter: two conv layers (circular K 4 stride 2, then zero K 3), each
// output activation, MSE and Poisson with non-uniform row weights.
// Tolerance 1e-6 relative + 1e-8 absolute: truncation error step^2 |L”'|
// ~ 1e-10, plus the rare ReLU kink within a step of a pre-activation.
func TestNetGradFD(t *testing.T) {
	for _, out := range []Activation{Identity, Softplus, Exp} {
		for _, ln := range []string{"MSE", "Poisson"} {
			if out == Identity && ln == "Poisson" {
				continue // an identity output can go negative, outside the Poisson domain
			}
			t.Run(out.String()+" "+ln, func(t *testing.T) {
				rng := newRand(6)
				n := NewNet(testShape(out, 5))
				n.Init(rng)
				for i := range n.ConvB(0) {
					n.ConvB(0)[i] += 0.3 // keep most ReLUs active
				}
				rows := 4
				x := randn(rng, rows*n.In*n.Length)
				target := make([]float64, rows*n.Neurons)
				for i := range target {
					target[i] = 2 * rng.Float64()
				}
				weight := []float64{1, 4, 2, 0.5}
				loss := MSE
				if ln == "Poisson" {
					loss = Poisson
				}
				w := n.NewWork(rows)
				pred := n.Forward(w, x, rows)
				dpred := make([]float64, len(pred))
				loss(dpred, pred, target, weight, rows, n.Neurons)
				n.ZeroGrad()
				n.Backward(w, dpred, rows)
				p0 := append([]float64(nil), n.Params...)
				num := numGrad(func(p []float64) float64 {
					copy(n.Params, p)
					return loss(nil, n.Forward(w, x, rows), target, weight, rows, n.Neurons)
				}, p0)
				copy(n.Params, p0)
				checkClose(t, "grads", n.Grads, num, 1e-6, 1e-8)
			})
		}
	}
}

// Finite differences of sum(H * dH) through the conv stack only.
func TestBackwardFeaturesFD(t *testing.T) {
	rng := newRand(7)
	n := NewNet(testShape(Softplus, 3))
	n.Init(rng)
	rows := 3
	x := randn(rng, rows*n.In*n.Length)
	dH := randn(rng, rows*n.Features())
	w := n.NewWork(rows)
	n.ForwardFeatures(w, x, rows)
	n.ZeroGrad()
	n.BackwardFeatures(w, dH, rows)
	p0 := append([]float64(nil), n.Params...)
	num := numGrad(func(p []float64) float64 {
		copy(n.Params, p)
		return dot(n.ForwardFeatures(w, x, rows), dH)
	}, p0)
	copy(n.Params, p0)
	checkClose(t, "grads", n.Grads, num, 1e-6, 1e-8)
	for _, g := range n.ReadWGrad() {
		if g != 0 {
			t.Fatal("BackwardFeatures touched the readout gradients")
		}
	}
}

// Finite differences of sum(z * dz) for the standalone Readout.
func TestReadoutGradFD(t *testing.T) {
	rng := newRand(8)
	l := Readout{Features: 5, Neurons: 3}
	rows := 4
	h, w, b := randn(rng, rows*5), randn(rng, 15), randn(rng, 3)
	dz := randn(rng, rows*3)
	z := make([]float64, rows*3)
	loss := func(h, w, b []float64) float64 { l.Forward(z, h, w, b, rows); return dot(z, dz) }
	dh, dw, db := make([]float64, len(h)), make([]float64, len(w)), make([]float64, len(b))
	l.Backward(dh, dw, db, dz, h, w, rows)
	checkClose(t, "dh", dh, numGrad(func(v []float64) float64 { return loss(v, w, b) }, h), 1e-7, 1e-9)
	checkClose(t, "dw", dw, numGrad(func(v []float64) float64 { return loss(h, v, b) }, w), 1e-7, 1e-9)
	checkClose(t, "db", db, numGrad(func(v []float64) float64 { return loss(h, w, v) }, b), 1e-7, 1e-9)
}

// naiveStep computes the predictions and all gradients of one MSE step with
// the plain reference loops (Readout methods, Activation methods, no
// partitions) for comparison with the blocked parallel kernel.
func naiveStep(n *Net, x, target []float64, rows int) (pred, grads []float64) {
	w := n.NewWork(rows)
	h := append([]float64(nil), n.ForwardFeatures(w, x, rows)...)
	ro := Readout{Features: n.Features(), Neurons: n.Neurons}
	z := make([]float64, rows*n.Neurons)
	ro.Forward(z, h, n.ReadW(), n.ReadB(), rows)
	pred = make([]float64, len(z))
	n.Output.Forward(pred, z)
	dpred := make([]float64, len(z))
	MSE(dpred, pred, target, nil, rows, n.Neurons)
	dz := make([]float64, len(z))
	n.Output.Backward(dz, dpred, z, pred)
	dH := make([]float64, len(h))
	n.ZeroGrad()
	ro.Backward(dH, n.ReadWGrad(), n.ReadBGrad(), dz, h, n.ReadW(), rows)
	n.BackwardFeatures(w, dH, rows)
	return pred, append([]float64(nil), n.Grads...)
}

func fastStep(n *Net, w *Work, x, target []float64, rows int) (pred, grads []float64) {
	p := n.Forward(w, x, rows)
	dpred := make([]float64, len(p))
	MSE(dpred, p, target, nil, rows, n.Neurons)
	n.ZeroGrad()
	n.Backward(w, dpred, rows)
	return append([]float64(nil), p...), append([]float64(nil), n.Grads...)
}

// The blocked, partitioned readout kernel against the naive loops, over
// neuron counts that exercise partition and cache-block tails and odd row
// counts. Tolerance 1e-12 relative + 1e-14 absolute: gonum's Gemv sums the
// same products in a different (vectorised) order than the naive loops,
// which moves results by a few ulps of the largest partial sum.
func TestReadoutFastMatchesNaive(t *testing.T) {
	for _, neurons := range []int{1, 2, 3, 7, 64, 65, 130, 513, 1111} {
		for _, rows := range []int{1, 2, 3, 5, 8, 11} {
			for _, out := range []Activation{Identity, Softplus, Exp} {
				name := fmt.Sprintf("N%d R%d %v", neurons, rows, out)
				rng := newRand(uint64(neurons*100 + rows))
				n := NewNet(testShape(out, neurons))
				n.Init(rng)
				x := randn(rng, rows*n.In*n.Length)
				target := randn(rng, rows*neurons)
				w := n.NewWork(rows + 1)
				pf, gf := fastStep(n, w, x, target, rows)
				pn, gn := naiveStep(n, x, target, rows)
				checkClose(t, name+" pred", pf, pn, 1e-12, 1e-14)
				checkClose(t, name+" grads", gf, gn, 1e-12, 1e-14)
			}
		}
	}
}

// The result does not depend on the number of cores: a Work made under
// GOMAXPROCS 1 (serial) and one made under 2 (worker goroutines) give
// bit-identical predictions and gradients [determinism requirement].
func TestNetDeterministicAcrossCores(t *testing.T) {
	rng := newRand(9)
	n := NewNet(Shape{In: 1, Length: 60, Neurons: 3000, Output: Softplus,
		Convs: []ConvSpec{{Out: 8, K: 9, Stride: 1, Border: Circular}}})
	n.Init(rng)
	rows := 13
	x := randn(rng, rows*60)
	target := randn(rng, rows*3000)
	old := runtime.GOMAXPROCS(1)
	w1 := n.NewWork(rows)
	runtime.GOMAXPROCS(2)
	w2 := n.NewWork(rows)
	runtime.GOMAXPROCS(old)
	if w2.pool.workers < 2 {
		t.Fatalf("GOMAXPROCS 2 gave %d workers", w2.pool.workers)
	}
	p1, g1 := fastStep(n, w1, x, target, rows)
	p2, g2 := fastStep(n, w2, x, target, rows)
	checkClose(t, "pred", p2, p1, 0, 0)
	checkClose(t, "grads", g2, g1, 0, 0)
}

// Parameter layout: conv weights then bias per layer, then readout weights
// [N][F], then bias; the views are contiguous and cover Params.
func TestNetLayout(t *testing.T) {
	n := NewNet(testShape(Identity, 5))
	// layer 0: 3x2x4 + 3 = 27; layer 1 (In 3, length 6): 2x3x3 + 2 = 20;
	// features 2*6 = 12; readout 5*12 + 5 = 65 [computed by hand].
	if n.OutLen(0) != 6 || n.OutLen(1) != 6 || n.Features() != 12 {
		t.Fatalf("OutLen %d %d Features %d, want 6 6 12", n.OutLen(0), n.OutLen(1), n.Features())
	}
	if len(n.Params) != 27+20+65 {
		t.Fatalf("%d params, want 112", len(n.Params))
	}
	for i := range n.Params {
		n.Params[i] = float64(i)
	}
	views := [][]float64{n.ConvW(0), n.ConvB(0), n.ConvW(1), n.ConvB(1), n.ReadW(), n.ReadB()}
	lens := []int{24, 3, 18, 2, 60, 5}
	next := 0.0
	for i, v := range views {
		if len(v) != lens[i] || v[0] != next {
			t.Fatalf("view %d: len %d first %v, want len %d first %v", i, len(v), v[0], lens[i], next)
		}
		next += float64(lens[i])
	}
	if &n.ReadBGrad()[0] != &n.Grads[len(n.Grads)-5] || &n.ConvWGrad(1)[0] != &n.Grads[27] || &n.ConvBGrad(0)[0] != &n.Grads[24] {
		t.Fatal("gradient views do not match the parameter layout")
	}
}

// Init draws from +-1/sqrt(fan_in) and is reproducible for a seed.
func TestNetInit(t *testing.T) {
	a, b := NewNet(testShape(Exp, 4)), NewNet(testShape(Exp, 4))
	a.Init(newRand(10))
	b.Init(newRand(10))
	checkClose(t, "same seed", a.Params, b.Params, 0, 0)
	bound := 1 / math.Sqrt(2*4)
	for _, v := range a.ConvW(0) {
		if math.Abs(v) > bound {
			t.Fatalf("conv weight %v outside +-%v", v, bound)
		}
	}
}

func TestNetPanics(t *testing.T) {
	good := testShape(Identity, 3)
	bad := func(f func(s *Shape)) func() {
		return func() {
			s := good
			s.Convs = append([]ConvSpec(nil), good.Convs...)
			f(&s)
			NewNet(s)
		}
	}
	wantPanic(t, "stride 0", bad(func(s *Shape) { s.Convs[1].Stride = 0 }))
	wantPanic(t, "valid kernel longer than input", bad(func(s *Shape) { s.Convs[1] = ConvSpec{Out: 2, K: 7, Stride: 1, Border: Valid} }))
	wantPanic(t, "no conv", bad(func(s *Shape) { s.Convs = nil }))
	wantPanic(t, "no neurons", bad(func(s *Shape) { s.Neurons = 0 }))
	wantPanic(t, "bad output", bad(func(s *Shape) { s.Output = 9 }))
	wantPanic(t, "zero channels", bad(func(s *Shape) { s.Convs[0].Out = 0 }))
	n := NewNet(good)
	w := n.NewWork(2)
	x := make([]float64, 2*2*11)
	wantPanic(t, "too many rows", func() { n.Forward(w, x, 3) })
	wantPanic(t, "short x", func() { n.Forward(w, x[:10], 2) })
	wantPanic(t, "backward before forward", func() { n.Backward(w, make([]float64, 6), 2) })
	n.Forward(w, x, 2)
	wantPanic(t, "backward with other rows", func() { n.Backward(w, make([]float64, 6), 1) })
	wantPanic(t, "short dpred", func() { n.Backward(w, make([]float64, 5), 2) })
	wantPanic(t, "dpred aliases pred", func() { p := n.Forward(w, x, 2); n.Backward(w, p, 2) })
	wantPanic(t, "foreign work", func() { NewNet(good).Forward(w, x, 2) })
	wantPanic(t, "layer out of range", func() { n.ConvW(2) })
	wantPanic(t, "NewWork 0", func() { n.NewWork(0) })
}

// One training step (Forward, MSE, Backward, Adam) allocates nothing, on the
// serial and the parallel path.
func TestStepAllocs(t *testing.T) {
	for _, neurons := range []int{50, 3000} {
		rng := newRand(11)
		n := NewNet(Shape{In: 1, Length: 60, Neurons: neurons, Output: Softplus,
			Convs: []ConvSpec{{Out: 8, K: 9, Stride: 1, Border: Circular}}})
		n.Init(rng)
		rows := 20
		x := randn(rng, rows*60)
		target := randn(rng, rows*neurons)
		dpred := make([]float64, rows*neurons)
		w := n.NewWork(rows)
		opt := NewAdam(len(n.Params))
		allocs := testing.AllocsPerRun(5, func() {
			n.ZeroGrad()
			pred := n.Forward(w, x, rows)
			MSE(dpred, pred, target, nil, rows, neurons)
			n.Backward(w, dpred, rows)
			opt.Step(n.Params, n.Grads)
		})
		if allocs != 0 {
			t.Errorf("N %d: %v allocations per step, want 0", neurons, allocs)
		}
	}
}

// Worker goroutines of a dropped Work stop once it is garbage collected.
func TestWorkWorkersStop(t *testing.T) {
	old := runtime.GOMAXPROCS(2)
	defer runtime.GOMAXPROCS(old)
	n := NewNet(testShape(Identity, 600))
	base := runtime.NumGoroutine()
	for range 20 {
		w := n.NewWork(4)
		n.Forward(w, make([]float64, 4*n.In*n.Length), 4)
	}
	if runtime.NumGoroutine() < base+20 {
		t.Fatalf("expected worker goroutines, have %d (base %d)", runtime.NumGoroutine(), base)
	}
	for range 100 {
		runtime.GC()
		if runtime.NumGoroutine() <= base+2 {
			return
		}
		time.Sleep(10 * time.Millisecond)
	}
	t.Errorf("%d goroutines left after dropping 20 Works (base %d)", runtime.NumGoroutine(), base)
}

// TestInitConvsMatchesInit checks that InitConvs draws the conv parameters
// exactly as Init does (same stream, same order) and leaves the readout at
// zero.
func TestInitConvsMatchesInit(t *testing.T) {
	s := Shape{In: 1, Length: 20, Neurons: 7, Output: Identity,
		Convs: []ConvSpec{{Out: 3, K: 5, Stride: 1, Border: Circular}, {Out: 2, K: 3, Stride: 2, Border: Zero}}}
	a, b := NewNet(s), NewNet(s)
	a.Init(rand.New(rand.NewPCG(7, 0x1417)))
	b.InitConvs(rand.New(rand.NewPCG(7, 0x1417)))
	nc := len(a.Params) - a.Neurons*a.Features() - a.Neurons
	for i := 0; i < nc; i++ {
		if a.Params[i] != b.Params[i] {
			t.Fatalf("param %d: InitConvs %v, Init %v", i, b.Params[i], a.Params[i])
		}
	}
	for i, v := range b.Params[nc:] {
		if v != 0 {
			t.Fatalf("readout param %d = %v after InitConvs, want 0", i, v)
		}
	}
}
