package report

import (
	"fmt"
	"testing"
)

// BenchmarkRender renders the sample report with its figures repeated
// 1, 4 and 16 times (6 to 96 figures).
func BenchmarkRender(b *testing.B) {
	r, _ := sampleReport(b, b.TempDir())
	for _, rep := range []int{1, 4, 16} {
		big := &Report{Title: r.Title, Cautions: r.Cautions}
		for range rep {
			big.Sections = append(big.Sections, r.Sections...)
		}
		b.Run(fmt.Sprintf("figures=%d", 6*rep), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := Render(big); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
