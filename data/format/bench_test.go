package format

import (
	"fmt"
	"path/filepath"
	"testing"
)

// npySizes is the ladder for the .npy benchmarks, up to a 4600 x 24000
// float32 recording (442 MB).
var npySizes = []struct{ rows, cols int }{{100, 1000}, {1000, 4000}, {4600, 24000}}

func benchFile(b *testing.B, rows, cols int, f64 bool) string {
	b.Helper()
	p := filepath.Join(b.TempDir(), "bench.npy")
	if f64 {
		d := make([]float64, rows*cols)
		for i := range d {
			d[i] = float64(i % 1000)
		}
		if err := WriteNPY64(p, []int{rows, cols}, d); err != nil {
			b.Fatal(err)
		}
		return p
	}
	d := make([]float32, rows*cols)
	for i := range d {
		d[i] = float32(i % 1000)
	}
	if err := WriteNPY(p, []int{rows, cols}, d); err != nil {
		b.Fatal(err)
	}
	return p
}

// BenchmarkReadNPY reads little-endian C-order float32 files (the direct
// read path) from the page cache; MB/s via SetBytes.
func BenchmarkReadNPY(b *testing.B) {
	for _, s := range npySizes {
		b.Run(fmt.Sprintf("f32_%dx%d", s.rows, s.cols), func(b *testing.B) {
			if testing.Short() && s.rows*s.cols > 1e7 {
				b.Skip("large file skipped in -short mode")
			}
			p := benchFile(b, s.rows, s.cols, false)
			b.SetBytes(int64(4 * s.rows * s.cols))
			b.ReportAllocs()
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				if _, err := ReadNPY(p); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
	// The chunked conversion path, for comparison.
	b.Run("f64_1000x4000", func(b *testing.B) {
		p := benchFile(b, 1000, 4000, true)
		b.SetBytes(8 * 1000 * 4000)
		b.ReportAllocs()
		b.ResetTimer()
		for i := 0; i < b.N; i++ {
			if _, err := ReadNPY(p); err != nil {
				b.Fatal(err)
			}
		}
	})
}

func BenchmarkWriteNPY(b *testing.B) {
	for _, s := range npySizes[:2] {
		b.Run(fmt.Sprintf("f32_%dx%d", s.rows, s.cols), func(b *testing.B) {
			d := make([]float32, s.rows*s.cols)
			p := filepath.Join(b.TempDir(), "w.npy")
			b.SetBytes(int64(4 * len(d)))
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				if err := WriteNPY(p, []int{s.rows, s.cols}, d); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
