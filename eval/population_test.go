package eval

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"testing"
)

// TestScorePopulationMatchesDirect compares the blocked, parallel
// ScorePopulation with the plain per-neuron functions on random data with
// unequal counts, a condition with one held-out trial and one with none.
// 150 neurons cross two block boundaries. Tolerance 1e-9: float32 inputs,
// the same formulas summed in a different order.
func TestScorePopulationMatchesDirect(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	const n, B = 150, 7
	var cond, trials []int
	T := 0
	for b := 0; b < B; b++ {
		reps := 2 + b%4
		if b == 5 {
			reps = 1
		}
		if b == 6 {
			reps = 0
		}
		for k := 0; k < reps; k++ {
			cond = append(cond, b)
			T++
		}
	}
	// Shuffle the rows and add two training rows not held out.
	rng.Shuffle(len(cond), func(i, j int) { cond[i], cond[j] = cond[j], cond[i] })
	cond = append(cond, 6, 0)
	T += 2
	for t := 0; t < T-2; t++ {
		trials = append(trials, t)
	}
	y := make([]float32, T*n)
	for i := range y {
		y[i] = float32(10 + rng.NormFloat64() + 0.5*float64(cond[i/n]))
	}
	M := len(trials)
	pred := make([]float64, M*n)
	for i := range pred {
		pred[i] = 10 + 0.4*float64(cond[trials[i/n]]) + 0.3*rng.NormFloat64()
	}
	dst := make([]Scores, n)
	ScorePopulation(dst, y, n, trials, cond, pred, B)

	for j := 0; j < n; j++ {
		yy := make([]float64, M)
		pp := make([]float64, M)
		for i, r := range trials {
			yy[i] = float64(y[r*n+j])
			pp[i] = pred[i*n+j]
		}
		counts := make([]int, B)
		my := make([]float64, B)
		mp := make([]float64, B)
		for i, r := range trials {
			counts[cond[r]]++
			my[cond[r]] += yy[i]
			mp[cond[r]] += pp[i]
		}
		vars := make([]float64, B)
		var ybar, yhat []float64
		var cnt []int
		var vv []float64
		for b := 0; b < B; b++ {
			if counts[b] == 0 {
				continue
			}
			my[b] /= float64(counts[b])
			mp[b] /= float64(counts[b])
			if counts[b] >= 2 {
				for i, r := range trials {
					if cond[r] == b {
						vars[b] += (yy[i] - my[b]) * (yy[i] - my[b])
					}
				}
				vars[b] /= float64(counts[b] - 1)
			}
			ybar, yhat, cnt, vv = append(ybar, my[b]), append(yhat, mp[b]), append(cnt, counts[b]), append(vv, vars[b])
		}
		noise := PooledNoiseVariance(cnt, vv)
		var mse float64
		for i := range yy {
			mse += (yy[i] - pp[i]) * (yy[i] - pp[i])
		}
		mse /= float64(M)
		sp := SignalPower(cnt, ybar, vv)
		want := Scores{
			TestR2: R2(yy, pp), TestR: Pearson(yy, pp), EVScore: ExplainedVarianceScore(yy, pp),
			ExplainableFraction: ExplainableFraction(variance0(yy), noise),
			FEV:                 FEV(mse, variance0(yy), noise),
			SP:                  sp, CCAbs: CCAbs(ybar, yhat), CCMax: CCMax(sp, ybar),
			CCNorm: CCNorm(ybar, yhat, sp), SPE: SPE(ybar, yhat, sp),
		}
		got := dst[j]
		pairs := [][2]float64{
			{got.TestR2, want.TestR2}, {got.TestR, want.TestR}, {got.EVScore, want.EVScore},
			{got.ExplainableFraction, want.ExplainableFraction}, {got.FEV, want.FEV},
			{got.SP, want.SP}, {got.CCAbs, want.CCAbs}, {got.CCMax, want.CCMax},
			{got.CCNorm, want.CCNorm}, {got.SPE, want.SPE},
		}
		for k, p := range pairs {
			if !near(p[0], p[1], 1e-9) {
				t.Fatalf("neuron %d field %d: got %v want %v\n got %+v\nwant %+v", j, k, p[0], p[1], got, want)
			}
		}
		if math.IsNaN(got.SplitHalf) {
			t.Fatalf("neuron %d: SplitHalf NaN", j)
		}
	}
	// Same input, same output: scores do not depend on scheduling.
	again := make([]Scores, n)
	ScorePopulation(again, y, n, trials, cond, pred, B)
	for j := range again {
		if fmt.Sprintf("%v", again[j]) != fmt.Sprintf("%v", dst[j]) { // %v prints NaN equal to NaN
			t.Fatalf("neuron %d: second run differs", j)
		}
	}
}

func TestScorePopulationEmpty(t *testing.T) {
	dst := make([]Scores, 2)
	ScorePopulation(dst, []float32{1, 2, 3, 4}, 2, nil, []int{0, 1}, nil, 2)
	if !math.IsNaN(dst[0].TestR2) || !math.IsNaN(dst[1].SP) || !math.IsNaN(dst[0].CCNorm) {
		t.Errorf("no held-out trials: got %+v", dst[0])
	}
}

// TestSignalFScipy: SignalF and SignalP of ScorePopulation and
// ScoreConditions against scipy.stats.f_oneway (testdata/eval/gen_anova.py).
// Tolerance 1e-9 relative: float32-exact inputs, sums in a different order,
// and gonum's regularised incomplete beta against scipy's.
func TestSignalFScipy(t *testing.T) {
	b, err := os.ReadFile("../testdata/eval/anova_ref.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Anova []struct {
			Name   string
			Groups [][]float64
			F, P   float64
		}
	}
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	for _, c := range ref.Anova {
		var y []float32
		var cond, trials []int
		for g, vals := range c.Groups {
			for _, v := range vals {
				trials = append(trials, len(y))
				y = append(y, float32(v))
				cond = append(cond, g)
			}
		}
		B := len(c.Groups)
		dst := make([]Scores, 1)
		ScorePopulation(dst, y, 1, trials, cond, make([]float64, len(y)), B)
		dc := make([]Scores, 1)
		ScoreConditions(dc, y, 1, trials, cond, make([]float64, B), B)
		for _, s := range []Scores{dst[0], dc[0]} {
			if !near(s.SignalF, c.F, 1e-9*c.F) || !near(s.SignalP(), c.P, 1e-9*c.P) {
				t.Errorf("%s: SignalF %.12g, SignalP %.12g; want scipy %.12g, %.12g", c.Name, s.SignalF, s.SignalP(), c.F, c.P)
			}
		}
	}
	// Trials that vary only between conditions: F = +Inf, p = 0; a constant
	// neuron: NaN.
	dst := make([]Scores, 2)
	ScorePopulation(dst, []float32{1, 5, 1, 5, 2, 5, 2, 5}, 2, []int{0, 1, 2, 3}, []int{0, 0, 1, 1}, make([]float64, 8), 2)
	if !math.IsInf(dst[0].SignalF, 1) || dst[0].SignalP() != 0 || !math.IsNaN(dst[1].SignalF) || !math.IsNaN(dst[1].SignalP()) {
		t.Errorf("noise-free neuron: F %v p %v (want +Inf, 0); constant neuron: F %v p %v (want NaN)", dst[0].SignalF, dst[0].SignalP(), dst[1].SignalF, dst[1].SignalP())
	}
}
