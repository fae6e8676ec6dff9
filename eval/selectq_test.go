package eval

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// TestQuartilesMatchSort: the quartiles found by selection are the values
// quantileSorted reads from the sorted values, for sizes 1 to 40 and
// larger, with ties, infinities, sorted, reversed and constant inputs
// (the sort is the reference).
func TestQuartilesMatchSort(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 12))
	var cases [][]float64
	for n := 1; n <= 40; n++ {
		v := make([]float64, n)
		for i := range v {
			v[i] = rng.NormFloat64()
		}
		cases = append(cases, v)
	}
	big := func(n int, f func(i int) float64) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = f(i)
		}
		return v
	}
	cases = append(cases,
		big(100001, func(int) float64 { return rng.NormFloat64() }),
		big(5000, func(int) float64 { return float64(rng.IntN(4)) }), // many ties
		big(5000, func(i int) float64 { return float64(i) }),
		big(5000, func(i int) float64 { return float64(-i) }),
		big(4097, func(int) float64 { return 2.5 }),
		big(1001, func(i int) float64 {
			switch i % 7 {
			case 0:
				return math.Inf(1)
			case 1:
				return math.Inf(-1)
			}
			return rng.ExpFloat64()
		}),
		// A median of three killer shape: organ pipe.
		big(8192, func(i int) float64 { return float64(min(i, 8191-i)) }),
	)
	for c, v := range cases {
		sorted := slices.Clone(v)
		slices.Sort(sorted)
		w := [3]float64{quantileSorted(sorted, 0.25), quantileSorted(sorted, 0.5), quantileSorted(sorted, 0.75)}
		q1, med, q3 := quartiles(slices.Clone(v))
		if g := [3]float64{q1, med, q3}; g != w {
			t.Errorf("case %d (%d values): quartiles %v, from the sorted values %v", c, len(v), g, w)
		}
	}
}

// BenchmarkSummarize: the spread of one score over a million neurons, as
// summary.json takes it for each score.
func BenchmarkSummarize(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	v := make([]float64, 1000000)
	for i := range v {
		v[i] = rng.NormFloat64()
	}
	for b.Loop() {
		Summarize(v)
	}
}
