package tuning

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// BenchmarkVonMisesFit fits one noisy neuron per iteration (60 bins, 10
// trials per bin) for a ladder of start counts.
func BenchmarkVonMisesFit(b *testing.B) {
	centers := grid(60, 6, 3)
	rng := rand.New(rand.NewPCG(7, 8))
	const nNeurons = 64
	counts := make([][]int, nNeurons)
	means := make([][]float64, nNeurons)
	for i := range counts {
		p := [4]float64{rng.Float64(), 1 + 3*rng.Float64(), 0.5 + 4*rng.Float64(), 360 * rng.Float64()}
		counts[i], means[i] = synthetic(rng, centers, 360, p, 10, 1)
	}
	for _, starts := range []int{1, 3, 5} {
		for _, kind := range []string{"vonmises", "vonmises2"} {
			b.Run(fmt.Sprintf("%s/starts=%d", kind, starts), func(b *testing.B) {
				var m Model
				if kind == "vonmises" {
					m = NewVonMises(centers, 360, starts, rand.New(rand.NewPCG(1, 1)))
				} else {
					m = NewVonMisesTwoPeak(centers, 360, starts, rand.New(rand.NewPCG(1, 1)))
				}
				b.ReportAllocs()
				for i := 0; b.Loop(); i++ {
					if err := m.Fit(counts[i%nNeurons], means[i%nNeurons]); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}

// BenchmarkGaussianFit fits one noisy Gaussian-bump neuron per iteration.
func BenchmarkGaussianFit(b *testing.B) {
	centers := grid(60, 1, 0)
	rng := rand.New(rand.NewPCG(9, 10))
	counts := make([]int, 60)
	means := make([]float64, 60)
	for i, x := range centers {
		counts[i] = 10
		d := (x - 25) / 6
		means[i] = 1 + 3*math.Exp(-0.5*d*d) + 0.3*rng.NormFloat64()
	}
	m := NewGaussianBump(centers, 3, rand.New(rand.NewPCG(1, 1)))
	b.ReportAllocs()
	for b.Loop() {
		if err := m.Fit(counts, means); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkSmoothLinearFit fits one neuron per iteration with the same counts
// (the factorisation is cached) over a ladder of bin counts.
func BenchmarkSmoothLinearFit(b *testing.B) {
	for _, B := range []int{24, 60, 120} {
		b.Run(fmt.Sprintf("bins=%d", B), func(b *testing.B) {
			centers := grid(B, 360/float64(B), 0)
			rng := rand.New(rand.NewPCG(2, 3))
			counts := make([]int, B)
			means := make([]float64, B)
			for i := range counts {
				counts[i] = 8 + i%3
				means[i] = rng.NormFloat64()
			}
			m := NewSmoothLinear(centers, 360, 5)
			b.ReportAllocs()
			for b.Loop() {
				if err := m.Fit(counts, means); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkMinimizer fits the neurons of BenchmarkVonMisesFit (8 starts)
// with the synchronous minimizer (sync) and with gonum's optimize.Minimize
// (gonum), the reference it reproduces.
func BenchmarkMinimizer(b *testing.B) {
	centers := grid(60, 6, 3)
	rng := rand.New(rand.NewPCG(7, 8))
	const nNeurons = 64
	counts := make([][]int, nNeurons)
	means := make([][]float64, nNeurons)
	for i := range counts {
		p := [4]float64{rng.Float64(), 1 + 3*rng.Float64(), 0.5 + 4*rng.Float64(), 360 * rng.Float64()}
		counts[i], means[i] = synthetic(rng, centers, 360, p, 10, 1)
	}
	for _, kind := range []string{"vonmises", "vonmises2"} {
		for _, ref := range []bool{false, true} {
			name := kind + "/sync"
			if ref {
				name = kind + "/gonum"
			}
			b.Run(name, func(b *testing.B) {
				var m Model
				if kind == "vonmises" {
					m = NewVonMises(centers, 360, 8, rand.New(rand.NewPCG(1, 1)))
				} else {
					m = NewVonMisesTwoPeak(centers, 360, 8, rand.New(rand.NewPCG(1, 1)))
				}
				m.(*Curve).f.gonumRef = ref
				b.ReportAllocs()
				for i := 0; b.Loop(); i++ {
					if err := m.Fit(counts[i%nNeurons], means[i%nNeurons]); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}
