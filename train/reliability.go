package train

import (
	"math"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval"
)

// SplitHalf returns each neuron's split-half reliability over the given
// trials: within every condition the trials, in index order, are dealt
// alternately to two halves; the two halves' condition means are
// correlated across conditions (Pearson) and the correlation is stepped up
// with Spearman-Brown, 2r/(1+r) (METHODS.md §3). Conditions with fewer than
// two trials are left out. NaN where fewer than three conditions remain or
// a half has no variance.
func SplitHalf(y *data.Matrix, cond, trials []int, nbins int) []float64 {
	seen := make([]int, nbins)
	var a, b []int
	for _, t := range trials {
		if seen[cond[t]]%2 == 0 {
			a = append(a, t)
		} else {
			b = append(b, t)
		}
		seen[cond[t]]++
	}
	sa := data.NewCondStats(y, cond, a, nbins)
	sb := data.NewCondStats(y, cond, b, nbins)
	var use []int
	for c := 0; c < nbins; c++ {
		if sa.Count[c] > 0 && sb.Count[c] > 0 {
			use = append(use, c)
		}
	}
	n := y.Cols
	out := make([]float64, n)
	ma := make([]float64, len(use))
	mb := make([]float64, len(use))
	for j := 0; j < n; j++ {
		if len(use) < 3 {
			out[j] = math.NaN()
			continue
		}
		for i, c := range use {
			ma[i] = sa.Sum[c*n+j] / float64(sa.Count[c])
			mb[i] = sb.Sum[c*n+j] / float64(sb.Count[c])
		}
		out[j] = eval.SpearmanBrown(eval.Pearson(ma, mb), 2)
	}
	return out
}
