package acuity

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestCorrectionPoissonCounts measures how far the Gaussian-derived
// correction is from the truth for independent Poisson neurons (an
// approximation, doc.go): truth sum f'^2/f at the midpoint's condition rates
// [pub: textbook; linear Fisher information of independent neurons is
// sum f'^2/variance], estimate from counts.
func TestCorrectionPoissonCounts(t *testing.T) {
	sets := 200
	if !testing.Short() {
		sets = 2000
	}
	const n, T = 20, 60
	rng := rand.New(rand.NewPCG(8, 8))
	ra, rb := make([]float64, n), make([]float64, n)
	truth := 0.0
	for i := range ra {
		ra[i] = 2 + 6*rng.Float64()
		rb[i] = ra[i] * (1 + 0.3*(rng.Float64()-0.5))
		// Linear Fisher information with the pooled variance (ra+rb)/2.
		d := rb[i] - ra[i]
		truth += d * d / ((ra[i] + rb[i]) / 2)
	}
	ax := Conditions{Values: []float64{0, 1}}
	y := make([]float32, 2*T*n)
	cond := make([]int, 2*T)
	sum, sum2 := 0.0, 0.0
	for k := 0; k < sets; k++ {
		for tr := 0; tr < 2*T; tr++ {
			cond[tr] = tr / T
			r := ra
			if cond[tr] == 1 {
				r = rb
			}
			for i := 0; i < n; i++ {
				y[tr*n+i] = float32(poisson(rng, r[i]))
			}
		}
		res, err := LinearInfo(y, n, cond, ax, nil)
		if err != nil {
			t.Fatal(err)
		}
		sum += res[0].Info
		sum2 += res[0].Info * res[0].Info
	}
	m := sum / float64(sets)
	sem := math.Sqrt((sum2/float64(sets) - m*m) / float64(sets))
	t.Logf("Poisson counts, N %d, T %d: mean corrected / truth %.4f (s.e.m. %.4f)", n, T, m/truth, sem/truth)
	// Approximation: accept 10% plus 4 s.e.m.
	if math.Abs(m-truth) > 0.1*truth+4*sem {
		t.Errorf("mean corrected %v, truth %v", m, truth)
	}
}
