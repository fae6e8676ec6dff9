package eval

import "math"

// Statistics of a cross-validated comparison of models on the same neurons.
// Every function here takes plain slices: one value per neuron, neurons in
// recording order, NaN where a score is undefined.

// FoldAverage writes into dst each neuron's score averaged over folds:
// dst[j] is the mean of folds[f][j] over the folds where it is not NaN, and
// NaN when every fold is NaN or excluded[j] is true (excluded may be nil).
// It panics if a fold or excluded does not have len(dst) values.
func FoldAverage(dst []float64, folds [][]float64, excluded []bool) {
	if excluded != nil && len(excluded) != len(dst) {
		panic("eval: FoldAverage excluded length mismatch")
	}
	for j := range dst {
		sum, cnt := 0.0, 0
		for _, f := range folds {
			if len(f) != len(dst) {
				panic("eval: FoldAverage fold length mismatch")
			}
			if v := f[j]; !math.IsNaN(v) {
				sum += v
				cnt++
			}
		}
		dst[j] = math.NaN()
		if cnt > 0 && (excluded == nil || !excluded[j]) {
			dst[j] = sum / float64(cnt)
		}
	}
}

// ShareHigher returns the share of neurons, among those where both a and b
// are defined, where a scores strictly higher than b; NaN when no neuron
// has both. It panics if the lengths differ.
func ShareHigher(a, b []float64) float64 {
	if len(a) != len(b) {
		panic("eval: ShareHigher length mismatch")
	}
	var wins, both int
	for j := range a {
		if math.IsNaN(a[j]) || math.IsNaN(b[j]) {
			continue
		}
		both++
		if a[j] > b[j] {
			wins++
		}
	}
	if both == 0 {
		return math.NaN()
	}
	return float64(wins) / float64(both)
}

// PairTest compares models A and B (indices into the caller's list of
// models) across neurons: ShareA is ShareHigher(a, b) and the embedded
// Wilcoxon is WilcoxonSignedRank(a, b).
type PairTest struct {
	A, B   int
	ShareA float64
	Wilcoxon
}

// Pairs tests every pair of columns i < j, in the order (0,1), (0,2), ...,
// (1,2), ...; cols[m] holds model m's per-neuron scores.
func Pairs(cols [][]float64) []PairTest {
	var out []PairTest
	for i := range cols {
		for j := i + 1; j < len(cols); j++ {
			out = append(out, PairTest{A: i, B: j, ShareA: ShareHigher(cols[i], cols[j]), Wilcoxon: WilcoxonSignedRank(cols[i], cols[j])})
		}
	}
	return out
}

// Best returns the index of the largest value, the first one on ties;
// NaN and -Inf never win. It returns -1 when no value is above -Inf.
func Best(v []float64) int {
	best, bestV := -1, math.Inf(-1)
	for i, x := range v {
		if x > bestV {
			best, bestV = i, x
		}
	}
	return best
}

// Pool concatenates the per-neuron scores of several recordings into one
// slice, in the order given.
func Pool(parts ...[]float64) []float64 {
	var n int
	for _, p := range parts {
		n += len(p)
	}
	out := make([]float64, 0, n)
	for _, p := range parts {
		out = append(out, p...)
	}
	return out
}
