package figure

import (
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"testing"
)

// BenchmarkScatter draws the per-neuron scatter (SVG and PNG written) for
// population sizes from a small recording to a large one.
func BenchmarkScatter(b *testing.B) {
	dir := b.TempDir()
	for _, n := range []int{100, 1000, 10000} {
		x, y := scores(rand.New(rand.NewPCG(1, uint64(n))), n)
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if err := toFiles(filepath.Join(dir, "s"))(Scatter(x, y, "A", "B", "CC_norm")); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkHistogram draws one score histogram for growing populations.
func BenchmarkHistogram(b *testing.B) {
	dir := b.TempDir()
	for _, n := range []int{100, 10000, 100000} {
		x, _ := scores(rand.New(rand.NewPCG(2, uint64(n))), n)
		b.Run(fmt.Sprintf("neurons=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if err := toFiles(filepath.Join(dir, "h"))(Histogram(x, "CC_norm", 30)); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
