package eval

import (
	"math"
	"slices"
	"testing"
)

// Expected values in this file are worked by hand from the definitions.

func TestFoldAverage(t *testing.T) {
	nan := math.NaN()
	folds := [][]float64{{1, nan, 3, nan}, {2, 4, nan, nan}, {6, 5, 5, nan}}
	dst := make([]float64, 4)
	FoldAverage(dst, folds, nil)
	// (1+2+6)/3, (4+5)/2, (3+5)/2, no finite fold.
	want := []float64{3, 4.5, 4, nan}
	for j := range want {
		if !(dst[j] == want[j] || math.IsNaN(dst[j]) && math.IsNaN(want[j])) {
			t.Errorf("neuron %d: got %v want %v", j, dst[j], want[j])
		}
	}
	FoldAverage(dst, folds, []bool{false, true, false, false})
	if !math.IsNaN(dst[1]) || dst[0] != 3 {
		t.Errorf("excluded neuron 1: got %v", dst)
	}
	defer func() {
		if r := recover(); r == nil {
			t.Error("no panic on a short fold")
		}
	}()
	FoldAverage(dst, [][]float64{{1}}, nil)
}

func TestShareAndPairs(t *testing.T) {
	nan := math.NaN()
	a := []float64{1, 2, 3, nan, 5}
	b := []float64{0, 2, 4, 1, 4}
	// Both defined on neurons 0, 1, 2, 4; a higher on 0 and 4: 2/4.
	if got := ShareHigher(a, b); got != 0.5 {
		t.Errorf("ShareHigher = %v, want 0.5", got)
	}
	if got := ShareHigher([]float64{nan}, []float64{1}); !math.IsNaN(got) {
		t.Errorf("no neuron with both: %v, want NaN", got)
	}
	c := []float64{9, 9, 9, 9, 9}
	ps := Pairs([][]float64{a, b, c})
	if len(ps) != 3 || ps[0].A != 0 || ps[0].B != 1 || ps[1].B != 2 || ps[2].A != 1 || ps[2].B != 2 {
		t.Fatalf("pair order %+v, want (0,1), (0,2), (1,2)", ps)
	}
	if ps[1].ShareA != 0 || ps[2].ShareA != 0 || ps[0].ShareA != 0.5 {
		t.Errorf("shares %v %v %v", ps[0].ShareA, ps[1].ShareA, ps[2].ShareA)
	}
	if w := WilcoxonSignedRank(a, b); ps[0].Wilcoxon != w {
		t.Errorf("pair test %+v, WilcoxonSignedRank %+v", ps[0].Wilcoxon, w)
	}
}

func TestBestAndPool(t *testing.T) {
	for _, c := range []struct {
		name string
		v    []float64
		want int
	}{
		{"largest", []float64{0.2, 0.7, 0.5}, 1},
		{"first on ties", []float64{0.7, 0.7}, 0},
		{"NaN never wins", []float64{math.NaN(), 0.1}, 1},
		{"all NaN", []float64{math.NaN(), math.NaN()}, -1},
		{"empty", nil, -1},
	} {
		if got := Best(c.v); got != c.want {
			t.Errorf("%s: Best(%v) = %d, want %d", c.name, c.v, got, c.want)
		}
	}
	if got := Pool([]float64{1, 2}, nil, []float64{3}); !slices.Equal(got, []float64{1, 2, 3}) {
		t.Errorf("Pool = %v", got)
	}
}

func TestSplitHalf(t *testing.T) {
	// 2 neurons, 3 conditions, 2 trials each, dealt alternately: trial
	// order within a condition decides the half. Neuron 0's halves are
	// (1, 2, 3) and (1.5, 2.5, 3.5): r = 1, Spearman-Brown 2r/(1+r) = 1.
	// Neuron 1's halves are (1, 2, 3) and (3, 2, 1): r = -1, and
	// 2(-1)/(1-1) is -Inf [by the formula].
	y := []float32{
		1, 1, // trial 0, cond 0, half A
		2, 2, // trial 1, cond 1, half A
		3, 3, // trial 2, cond 2, half A
		1.5, 3, // trial 3, cond 0, half B
		2.5, 2, // trial 4, cond 1, half B
		3.5, 1, // trial 5, cond 2, half B
	}
	cond := []int{0, 1, 2, 0, 1, 2}
	got := SplitHalf(y, 2, cond, []int{0, 1, 2, 3, 4, 5}, 3)
	if math.Abs(got[0]-1) > 1e-12 {
		t.Errorf("neuron 0: %v, want 1", got[0])
	}
	if want := SpearmanBrown(-1, 2); !(got[1] == want || math.IsNaN(got[1]) && math.IsNaN(want)) {
		t.Errorf("neuron 1: %v, want SpearmanBrown(-1, 2) = %v", got[1], want)
	}
	// Fewer than three conditions with trials in both halves: NaN.
	got = SplitHalf(y, 2, cond, []int{0, 3, 1, 4}, 3)
	if !math.IsNaN(got[0]) {
		t.Errorf("two conditions: %v, want NaN", got[0])
	}
}
