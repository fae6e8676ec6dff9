package eval

import (
	"math"
	"math/rand/v2"
	"testing"
)

// sameScores reports whether two Scores hold the same bits in every field.
func sameScores(a, b Scores) bool {
	x := []float64{a.TestR2, a.TestR, a.EVScore, a.ExplainableFraction, a.FEV, a.SP, a.CCAbs, a.CCMax, a.CCNorm, a.SPE, a.SplitHalf, a.SignalF, a.SignalDF1, a.SignalDF2}
	y := []float64{b.TestR2, b.TestR, b.EVScore, b.ExplainableFraction, b.FEV, b.SP, b.CCAbs, b.CCMax, b.CCNorm, b.SPE, b.SplitHalf, b.SignalF, b.SignalDF1, b.SignalDF2}
	for i := range x {
		if math.Float64bits(x[i]) != math.Float64bits(y[i]) {
			return false
		}
	}
	return true
}

// TestHeldOutSumsOfMatchesScoreConditions: scoring from HeldOutSumsOf with
// ScoreSums gives ScoreConditions' scores bit for bit (the reference is
// ScoreConditions itself), for several predictions from one set of sums,
// with constant neurons, a condition with one held-out trial, an empty
// condition, trials out of order, and more neurons than one block.
func TestHeldOutSumsOfMatchesScoreConditions(t *testing.T) {
	for _, tc := range []struct {
		name                string
		trials, n, nbins    int
		shuffle, emptyCond  bool
		constant, oneInCond bool
	}{
		{"small", 60, 7, 6, false, false, false, false},
		{"blocks of neurons", 200, 1100, 12, false, false, true, false},
		{"trials out of order", 150, 90, 8, true, false, false, true},
		{"empty condition", 120, 70, 10, false, true, true, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(31, uint64(tc.n)))
			T := tc.trials + 40
			y := make([]float32, T*tc.n)
			cond := make([]int, T)
			for r := 0; r < T; r++ {
				cond[r] = rng.IntN(tc.nbins)
				if tc.emptyCond && cond[r] == 2 {
					cond[r] = 3
				}
				for j := 0; j < tc.n; j++ {
					y[r*tc.n+j] = float32(0.3*float64(j%5) + math.Sin(float64(cond[r]+j)) + rng.NormFloat64())
				}
			}
			if tc.constant {
				for r := 0; r < T; r++ {
					y[r*tc.n+1] = 2.5
				}
			}
			// Held-out trials: a subset of the rows.
			var trials []int
			for r := 0; r < T && len(trials) < tc.trials; r++ {
				if rng.Float64() < 0.85 {
					trials = append(trials, r)
				}
			}
			if tc.oneInCond {
				// Keep a single held-out trial of condition 0.
				var kept []int
				seen := false
				for _, r := range trials {
					if cond[r] == 0 {
						if seen {
							continue
						}
						seen = true
					}
					kept = append(kept, r)
				}
				trials = kept
			}
			if tc.shuffle {
				rng.Shuffle(len(trials), func(i, j int) { trials[i], trials[j] = trials[j], trials[i] })
			}
			h := HeldOutSumsOf(y, tc.n, trials, cond, tc.nbins)
			for k := 0; k < 3; k++ {
				pred := make([]float64, tc.nbins*tc.n)
				for i := range pred {
					pred[i] = rng.NormFloat64()
				}
				if k == 2 {
					for i := range pred {
						pred[i] = 1 // a constant prediction
					}
				}
				want := make([]Scores, tc.n)
				ScoreConditions(want, y, tc.n, trials, cond, pred, tc.nbins)
				got := make([]Scores, tc.n)
				ScoreSums(got, h, pred)
				for j := range got {
					if !sameScores(got[j], want[j]) {
						t.Fatalf("prediction %d, neuron %d: ScoreSums(HeldOutSumsOf) %+v, ScoreConditions %+v", k, j, got[j], want[j])
					}
				}
			}
		})
	}
}
