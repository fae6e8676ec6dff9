package eval

import "math"

// SplitHalf returns each neuron's split-half reliability over the given
// trials of y (T x n, row-major, one row per trial): within every condition
// the trials, in the order given, are dealt alternately to two halves; the
// two halves' condition means are correlated across conditions (Pearson)
// and the correlation is stepped up with Spearman-Brown, 2r/(1+r)
// (eval/methods.md §3). cond[t] is trial t's condition in 0..nbins-1.
// Conditions with fewer than two trials are left out. NaN where fewer than
// three conditions remain or a half has no variance. It panics if y does
// not hold a whole number of rows of n values.
func SplitHalf(y []float32, n int, cond, trials []int, nbins int) []float64 {
	if n < 1 || len(y)%n != 0 {
		panic("eval: SplitHalf y is not rows of n values")
	}
	seen := make([]int, nbins)
	sumA := make([]float64, nbins*n)
	sumB := make([]float64, nbins*n)
	cntA := make([]int, nbins)
	cntB := make([]int, nbins)
	for _, t := range trials {
		c := cond[t]
		sum, cnt := sumA, cntA
		if seen[c]%2 == 1 {
			sum, cnt = sumB, cntB
		}
		seen[c]++
		cnt[c]++
		row := y[t*n : (t+1)*n]
		s := sum[c*n : (c+1)*n]
		for j, v := range row {
			s[j] += float64(v)
		}
	}
	var use []int
	for c := 0; c < nbins; c++ {
		if cntA[c] > 0 && cntB[c] > 0 {
			use = append(use, c)
		}
	}
	out := make([]float64, n)
	ma := make([]float64, len(use))
	mb := make([]float64, len(use))
	for j := 0; j < n; j++ {
		if len(use) < 3 {
			out[j] = math.NaN()
			continue
		}
		for i, c := range use {
			ma[i] = sumA[c*n+j] / float64(cntA[c])
			mb[i] = sumB[c*n+j] / float64(cntB[c])
		}
		out[j] = SpearmanBrown(Pearson(ma, mb), 2)
	}
	return out
}
