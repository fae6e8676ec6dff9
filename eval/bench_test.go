package eval

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// scoreBench makes a held-out set of 920 trials over 60 conditions for n
// neurons (80 more rows are not held out) and predictions with predRows
// rows.
func scoreBench(n, predRows int) (y []float32, cond, trials []int, pred []float64) {
	const M, B = 920, 60
	rng := rand.New(rand.NewPCG(1, 2))
	T := M + 80
	y = make([]float32, T*n)
	for i := range y {
		y[i] = float32(rng.NormFloat64())
	}
	cond = make([]int, T)
	for t := range cond {
		cond[t] = t % B
	}
	trials = make([]int, M)
	for i := range trials {
		trials[i] = i
	}
	pred = make([]float64, predRows*n)
	for i := range pred {
		pred[i] = rng.NormFloat64()
	}
	return y, cond, trials, pred
}

// BenchmarkScorePopulation scores a held-out set of 920 trials over 60
// conditions for a ladder of population sizes up to 24,000 neurons.
func BenchmarkScorePopulation(b *testing.B) {
	for _, n := range []int{1000, 6000, 24000} {
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			y, cond, trials, pred := scoreBench(n, 920)
			dst := make([]Scores, n)
			b.ReportAllocs()
			b.ResetTimer()
			for b.Loop() {
				ScorePopulation(dst, y, n, trials, cond, pred, 60)
			}
		})
	}
}

// BenchmarkScoreConditions is BenchmarkScorePopulation for a one-hot
// model: the same held-out set, with predictions given per condition
// (60 x n) instead of per trial (920 x n).
func BenchmarkScoreConditions(b *testing.B) {
	for _, n := range []int{1000, 6000, 24000} {
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			y, cond, trials, pred := scoreBench(n, 60)
			dst := make([]Scores, n)
			b.ReportAllocs()
			b.ResetTimer()
			for b.Loop() {
				ScoreConditions(dst, y, n, trials, cond, pred, 60)
			}
		})
	}
}

// TestScorePopulationAllocs: allocations do not grow with the number of
// neurons (per-call setup and one scratch set per worker only).
func TestScorePopulationAllocs(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	allocs := func(n int) float64 {
		const M, B = 40, 8
		y := make([]float32, M*n)
		for i := range y {
			y[i] = float32(rng.NormFloat64())
		}
		cond := make([]int, M)
		trials := make([]int, M)
		for i := range cond {
			cond[i], trials[i] = i%B, i
		}
		pred := make([]float64, M*n)
		dst := make([]Scores, n)
		return testing.AllocsPerRun(5, func() { ScorePopulation(dst, y, n, trials, cond, pred, B) })
	}
	if a, b := allocs(200), allocs(2000); b > a+1 {
		t.Errorf("allocations grow with neurons: %v for 200, %v for 2000", a, b)
	}
}
