package nn

import (
	"fmt"
	"syscall"
	"testing"
	"time"
)

// cpuTime returns the user plus system CPU time of the process. The
// benchmarks report it per op ("cpu-ns/op") beside the wall time, because
// the machine is shared and wall time then mostly measures the neighbours.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// loop runs f b.N times and reports the CPU time per op.
func loop(b *testing.B, f func()) {
	b.ReportAllocs()
	b.ResetTimer()
	c0 := cpuTime()
	for b.Loop() {
		f()
	}
	b.ReportMetric(float64(cpuTime()-c0)/float64(b.N), "cpu-ns/op")
}

// BenchmarkStep times one training step at the scale of a large recording:
// Length 60, one circular conv layer with 8 channels and K 9, 60 rows,
// Softplus output; Forward + MSE + Backward + Adam, over a ladder of neuron
// counts.
func BenchmarkStep(b *testing.B) {
	for _, neurons := range []int{1000, 6000, 24000} {
		b.Run(fmt.Sprintf("N=%d", neurons), func(b *testing.B) {
			rng := newRand(12)
			n := NewNet(Shape{In: 1, Length: 60, Neurons: neurons, Output: Softplus,
				Convs: []ConvSpec{{Out: 8, K: 9, Stride: 1, Border: Circular}}})
			n.Init(rng)
			rows := 60
			x := make([]float64, rows*60)
			for r := range rows {
				x[r*60+r] = 1 // one-hot conditions
			}
			target := randn(rng, rows*neurons)
			dpred := make([]float64, rows*neurons)
			w := n.NewWork(rows)
			opt := NewAdam(len(n.Params))
			loop(b, func() {
				n.ZeroGrad()
				pred := n.Forward(w, x, rows)
				MSE(dpred, pred, target, nil, rows, neurons)
				n.Backward(w, dpred, rows)
				opt.Step(n.Params, n.Grads)
			})
		})
	}
}

// BenchmarkParts times the parts of one step at N = 24000 to show where the
// time goes.
func BenchmarkParts(b *testing.B) {
	const neurons, rows = 24000, 60
	rng := newRand(13)
	n := NewNet(Shape{In: 1, Length: 60, Neurons: neurons, Output: Softplus,
		Convs: []ConvSpec{{Out: 8, K: 9, Stride: 1, Border: Circular}}})
	n.Init(rng)
	x := make([]float64, rows*60)
	for r := range rows {
		x[r*60+r] = 1
	}
	target := randn(rng, rows*neurons)
	dpred := make([]float64, rows*neurons)
	w := n.NewWork(rows)
	opt := NewAdam(len(n.Params))
	pred := n.Forward(w, x, rows)
	MSE(dpred, pred, target, nil, rows, neurons)
	b.Run("Forward", func(b *testing.B) { loop(b, func() { n.Forward(w, x, rows) }) })
	b.Run("MSE", func(b *testing.B) { loop(b, func() { MSE(dpred, pred, target, nil, rows, neurons) }) })
	b.Run("Backward", func(b *testing.B) { loop(b, func() { n.Backward(w, dpred, rows) }) })
	b.Run("ZeroGrad", func(b *testing.B) { loop(b, func() { n.ZeroGrad() }) })
	b.Run("Adam", func(b *testing.B) { loop(b, func() { opt.Step(n.Params, n.Grads) }) })
}
