package projection

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// TestMulWeightsMatchesDgemm: mulWeights gives gonum's Dgemm bit for bit,
// on shapes with and without whole 4 x 8 tiles, with zeros among the
// operands (Dgemm skips a zero of z) and values of many magnitudes.
func TestMulWeightsMatchesDgemm(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 9))
	val := func() float64 {
		if rng.IntN(10) == 0 {
			return 0
		}
		return rng.NormFloat64() * math.Pow(10, float64(rng.IntN(13)-6))
	}
	t.Logf("amd64 kernel in use: %v", hasTile4x8)
	for _, s := range []struct{ nb, Bt, F int }{
		{1, 1, 1}, {4, 60, 8}, {7, 5, 13}, {9, 60, 480}, {5, 0, 20}, {12, 31, 17}, {3, 60, 480}, {64, 60, 96},
	} {
		t.Run(fmt.Sprintf("%dx%dx%d", s.nb, s.Bt, s.F), func(t *testing.T) {
			z := make([]float64, s.nb*s.Bt)
			a := make([]float64, s.Bt*s.F)
			for i := range z {
				z[i] = val()
			}
			for i := range a {
				a[i] = val()
			}
			want := make([]float64, s.nb*s.F)
			got := make([]float64, s.nb*s.F)
			for i := range got {
				got[i] = math.NaN() // every element must be written
			}
			if s.Bt > 0 {
				blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(z, s.nb, s.Bt), gen(a, s.Bt, s.F), 0, gen(want, s.nb, s.F))
			}
			mulWeights(got, z, a, s.nb, s.Bt, s.F)
			for i := range want {
				if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
					t.Fatalf("element (%d, %d): got %v want %v (gonum Dgemm)", i/s.F, i%s.F, got[i], want[i])
				}
			}
		})
	}
}
