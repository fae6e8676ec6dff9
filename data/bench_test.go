package data

import (
	"fmt"
	"path/filepath"
	"testing"

	"github.com/strialab/stria/data/format"
)

func benchFile(b *testing.B, rows, cols int, f64 bool) string {
	b.Helper()
	p := filepath.Join(b.TempDir(), "bench.npy")
	if f64 {
		d := make([]float64, rows*cols)
		for i := range d {
			d[i] = float64(i % 1000)
		}
		if err := format.WriteNPY64(p, []int{rows, cols}, d); err != nil {
			b.Fatal(err)
		}
		return p
	}
	d := make([]float32, rows*cols)
	for i := range d {
		d[i] = float32(i % 1000)
	}
	if err := format.WriteNPY(p, []int{rows, cols}, d); err != nil {
		b.Fatal(err)
	}
	return p
}

func BenchmarkHoldOutBlocked(b *testing.B) {
	for _, T := range []int{1200, 4600} {
		b.Run(fmt.Sprint(T), func(b *testing.B) {
			cond := randomConds(T, 60, 2, 1)
			blocks := make([]int, T)
			for t := range blocks {
				blocks[t] = t * 20 / T
			}
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				if _, err := HoldOut(cond, blocks, 60, 0.2, uint64(i)); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkCheckHash measures what the content hash adds to the checking
// pass on the full-scale recording (4600 x 24000 float32, 442 MB, mapped):
// load and check without a hash; load and check with CheckOptions.Hash (the
// hash computed in the same pass); load, check, then HashFiles (a second
// pass over the mapping); and Identify alone (the file read in pieces).
// Each iteration maps the file afresh, as a fit does, so the page faults
// of the first touch are included. MB/s via SetBytes.
func BenchmarkCheckHash(b *testing.B) {
	rows, cols := 4600, 24000
	if testing.Short() {
		rows, cols = 1000, 4000
	}
	resp := benchFile(b, rows, cols, false)
	stim := filepath.Join(filepath.Dir(resp), "stim.npy")
	s := make([]float64, rows)
	cond := make([]int, rows)
	for t := range s {
		cond[t] = t % 60
		s[t] = float64(cond[t]) * 6
	}
	if err := format.WriteNPY64(stim, []int{rows}, s); err != nil {
		b.Fatal(err)
	}
	saved := format.MapThreshold
	format.MapThreshold = 0
	defer func() { format.MapThreshold = saved }()
	src := Source{Responses: resp, Stimulus: stim}
	opt := CheckOptions{NBins: 60}
	for _, c := range []struct {
		name string
		run  func() error
	}{
		{"check", func() error {
			rec, err := Load(src)
			if err == nil {
				_, err = CheckWith(rec, cond, opt)
			}
			return err
		}},
		{"check_with_hash", func() error {
			rec, err := Load(src)
			if err == nil {
				o := opt
				o.Hash = true
				_, err = CheckWith(rec, cond, o)
			}
			return err
		}},
		{"check_then_hash", func() error {
			rec, err := Load(src)
			if err == nil {
				_, err = CheckWith(rec, cond, opt)
			}
			if err == nil {
				err = rec.HashFiles()
			}
			return err
		}},
		{"identify", func() error {
			_, err := format.Identify(resp)
			return err
		}},
	} {
		b.Run(c.name, func(b *testing.B) {
			b.SetBytes(int64(4 * rows * cols))
			cpu := cpuSeconds()
			n := 0
			for b.Loop() {
				if err := c.run(); err != nil {
					b.Fatal(err)
				}
				n++
			}
			b.ReportMetric((cpuSeconds()-cpu)/float64(n), "cpu-s/op")
		})
	}
}
