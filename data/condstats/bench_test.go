package condstats

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"github.com/strialab/stria/data/format"
)

// BenchmarkCondStats accumulates all trials into 60 conditions.
func BenchmarkCondStats(b *testing.B) {
	for _, s := range []struct{ rows, cols int }{{1200, 400}, {4600, 2400}, {4600, 24000}} {
		b.Run(fmt.Sprintf("%dx%d", s.rows, s.cols), func(b *testing.B) {
			if testing.Short() && s.rows*s.cols > 1e7 {
				b.Skip("large size skipped in -short mode")
			}
			y := format.NewMatrix(s.rows, s.cols)
			rng := rand.New(rand.NewPCG(1, 2))
			cond := make([]int, s.rows)
			trials := make([]int, s.rows)
			for t := range cond {
				cond[t] = rng.IntN(60)
				trials[t] = t
			}
			b.SetBytes(int64(4 * s.rows * s.cols))
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				New(y, cond, trials, 60)
			}
		})
	}
}
