package eval

import (
	"math"
	"sort"
)

// Wilcoxon is the result of a two-sided Wilcoxon signed-rank test.
//
// W is min(W+, W-), the smaller of the rank sums of the positive and the
// negative differences (the convention of scipy.stats.wilcoxon for a
// two-sided test). P is the two-sided p-value. N is the number of pairs
// ranked (finite, non-zero differences), Dropped the number of pairs left out
// because x, y or their difference was NaN. Method is "exact", "normal", or
// "none" when no pair was left to rank (W and P are then NaN).
type Wilcoxon struct {
	W, P       float64
	N, Dropped int
	Method     string
}

// WilcoxonSignedRank tests whether the paired differences x_i - y_i are
// symmetric about zero (Wilcoxon 1945).
//
// Pairs with a NaN are dropped and counted in Dropped. Zero differences are
// then dropped ("wilcox" zero method, the scipy default). The absolute
// differences are ranked with average ranks for ties.
//
// The p-value is exact, from the null distribution of W+ over all 2^n sign
// patterns, when the number of pairs (zeros included) is at most 50 and there
// are no zero differences and no ties among |d|. Otherwise it uses the normal
// approximation
//
//	z = (W - n(n+1)/4) / sqrt((n(n+1)(2n+1) - sum_t t(t^2-1)/2) / 24),  P = 2 Phi(-|z|),
//
// with the tie correction over groups of t tied ranks and no continuity
// correction. This reproduces scipy.stats.wilcoxon 1.10 with its defaults
// (method "auto", zero_method "wilcox", correction False) except for ties
// without zeros at n <= 50, where scipy 1.10 keeps the exact distribution
// with a truncated rank sum and this function uses the normal approximation.
//
// WilcoxonSignedRank panics if len(x) != len(y).
func WilcoxonSignedRank(x, y []float64) Wilcoxon {
	checkLen(len(x), len(y), "WilcoxonSignedRank")
	d := make([]float64, 0, len(x))
	var res Wilcoxon
	for i, a := range x {
		v := a - y[i]
		if math.IsNaN(v) {
			res.Dropped++
			continue
		}
		d = append(d, v)
	}
	total := len(d)
	nz := d[:0]
	zeros := 0
	for _, v := range d {
		if v == 0 {
			zeros++
			continue
		}
		nz = append(nz, v)
	}
	d = nz
	n := len(d)
	res.N = n
	if n == 0 {
		res.W, res.P, res.Method = math.NaN(), math.NaN(), "none"
		return res
	}
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return math.Abs(d[idx[a]]) < math.Abs(d[idx[b]]) })
	var wPlus, wMinus, tieTerm float64
	ties := false
	for i := 0; i < n; {
		j := i + 1
		for j < n && math.Abs(d[idx[j]]) == math.Abs(d[idx[i]]) {
			j++
		}
		t := float64(j - i)
		if j-i > 1 {
			ties = true
			tieTerm += t * (t*t - 1)
		}
		r := float64(i+j+1) / 2 // average of ranks i+1..j
		for k := i; k < j; k++ {
			if d[idx[k]] > 0 {
				wPlus += r
			} else {
				wMinus += r
			}
		}
		i = j
	}
	res.W = math.Min(wPlus, wMinus)
	if total <= 50 && zeros == 0 && !ties {
		res.Method = "exact"
		res.P = exactSignedRankP(n, int(wPlus))
		return res
	}
	res.Method = "normal"
	nf := float64(n)
	mn := nf * (nf + 1) / 4
	se := math.Sqrt((nf*(nf+1)*(2*nf+1) - 0.5*tieTerm) / 24)
	z := (res.W - mn) / se
	res.P = math.Erfc(math.Abs(z) / math.Sqrt2)
	return res
}

// exactSignedRankP returns the two-sided exact p-value for W+ = w with n
// untied, non-zero differences: 2 min(P(W+ <= w), P(W+ >= w)), 1 at the
// centre of the distribution, clipped to 1. The counts of sign patterns per
// rank sum are exact in float64 for n <= 50 (at most 2^50).
func exactSignedRankP(n, w int) float64 {
	maxSum := n * (n + 1) / 2
	cnt := make([]float64, maxSum+1)
	cnt[0] = 1
	top := 0
	for k := 1; k <= n; k++ {
		top += k
		for s := top; s >= k; s-- {
			cnt[s] += cnt[s-k]
		}
	}
	if 2*w == maxSum {
		return 1
	}
	var lo, hi float64
	for s := 0; s <= maxSum; s++ {
		if s <= w {
			lo += cnt[s]
		}
		if s >= w {
			hi += cnt[s]
		}
	}
	total := math.Ldexp(1, n)
	p := 2 * math.Min(lo, hi) / total
	return math.Min(p, 1)
}
