package eval

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestScoreConditionsMatchesPopulation checks ScoreConditions against
// ScorePopulation with each trial's prediction spelled out, on unequal
// counts, a one-trial and an empty condition, a constant neuron and a
// neuron with a large offset. Tolerance: the two compute the same sums in
// a different order (per-condition sums of squares against two passes);
// 1e-9 relative is far above float64 rounding at these sizes.
func TestScoreConditionsMatchesPopulation(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 5))
	const T, n, nb = 300, 70, 9
	y := make([]float32, T*n)
	cond := make([]int, T)
	for r := 0; r < T; r++ {
		cond[r] = rng.IntN(nb - 1) // condition nb-1 stays empty
		for j := 0; j < n; j++ {
			y[r*n+j] = float32(math.Sin(float64(cond[r]+j)) + rng.NormFloat64())
		}
		y[r*n+3] = 2.5                               // constant neuron
		y[r*n+4] = 1000 + float32(rng.NormFloat64()) // offset neuron
	}
	cond[0] = 7 // make condition 7 rare: one held-out trial below
	var trials []int
	for r := 0; r < T; r++ {
		if r%3 == 0 && (cond[r] != 7 || r == 0) {
			trials = append(trials, r)
		}
	}
	pc := make([]float64, nb*n)
	for i := range pc {
		pc[i] = rng.NormFloat64()
	}
	pt := make([]float64, len(trials)*n)
	for i, r := range trials {
		copy(pt[i*n:(i+1)*n], pc[cond[r]*n:(cond[r]+1)*n])
	}
	want := make([]Scores, n)
	ScorePopulation(want, y, n, trials, cond, pt, nb)
	got := make([]Scores, n)
	ScoreConditions(got, y, n, trials, cond, pc, nb)
	close := func(a, b float64) bool {
		if math.IsNaN(a) || math.IsNaN(b) {
			return math.IsNaN(a) && math.IsNaN(b)
		}
		return math.Abs(a-b) <= 1e-9*math.Max(1, math.Abs(b))
	}
	for j := range want {
		w, g := want[j], got[j]
		for k, pair := range [][2]float64{{g.TestR2, w.TestR2}, {g.TestR, w.TestR}, {g.EVScore, w.EVScore},
			{g.ExplainableFraction, w.ExplainableFraction}, {g.FEV, w.FEV}, {g.SP, w.SP}, {g.CCAbs, w.CCAbs},
			{g.CCMax, w.CCMax}, {g.CCNorm, w.CCNorm}, {g.SPE, w.SPE}, {g.SplitHalf, w.SplitHalf}} {
			if !close(pair[0], pair[1]) {
				t.Errorf("neuron %d, score %d: conditions %v, trials %v", j, k, pair[0], pair[1])
			}
		}
	}
	if !math.IsNaN(got[3].TestR2) {
		t.Errorf("constant neuron: TestR2 %v, want NaN", got[3].TestR2)
	}
}
