package condstats

import (
	"flag"
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
)

var (
	streamFile  = flag.String("stream.file", "", "BenchmarkStream: an existing trials x neurons float32 .npy to pass over (default: synthetic files of the size ladder, written to a temporary folder)")
	streamSizes = flag.String("stream.sizes", "", "BenchmarkStream: size ladder as TRIALSxNEURONS,... (default 1000x4000,4600x24000; -short keeps the first)")
	streamBins  = flag.Int("stream.bins", 60, "BenchmarkStream: number of conditions")
)

// streamPlan splits T trials 64/16/20 into training, validation and test
// parts at random over nbins conditions, the test part keeping halves and
// per-condition squares, with the split-half sums over all trials, as
// stria fit does.
func streamPlan(T, nbins int) StreamPlan {
	rng := rand.New(rand.NewPCG(11, 12))
	cond := make([]int, T)
	part := make([]int, T)
	for t := range cond {
		cond[t] = rng.IntN(nbins)
		switch k := rng.IntN(100); {
		case k < 64:
			part[t] = 0
		case k < 80:
			part[t] = 1
		default:
			part[t] = 2
		}
	}
	return StreamPlan{NBins: nbins, Cond: cond, Part: part,
		Specs: []PartSpec{{}, {}, {Halves: true, CondSquares: true}}, AllHalves: true}
}

// BenchmarkStream passes over a float32 .npy: "read" only reads the row
// blocks (the sequential-read floor of this process), "parts" accumulates
// the training, validation and test statistics of a fit. MB/s is file
// bytes per second from the page cache (the file was just written or is
// warm). Sizes: -stream.sizes or -stream.file.
func BenchmarkStream(b *testing.B) {
	type size struct{ rows, cols int }
	var sizes []size
	if *streamFile == "" {
		spec := *streamSizes
		if spec == "" {
			spec = "1000x4000,4600x24000"
		}
		for _, f := range strings.Split(spec, ",") {
			var s size
			if _, err := fmt.Sscanf(f, "%dx%d", &s.rows, &s.cols); err != nil {
				b.Fatalf("-stream.sizes %q: %v", f, err)
			}
			sizes = append(sizes, s)
		}
		if testing.Short() {
			sizes = sizes[:1]
		}
	} else {
		sizes = []size{{0, 0}}
	}
	for _, sz := range sizes {
		path := *streamFile
		name := "file"
		if path == "" {
			name = fmt.Sprintf("%dx%d", sz.rows, sz.cols)
		}
		b.Run(name, func(b *testing.B) {
			if path == "" {
				path = filepath.Join(b.TempDir(), "stream.npy")
				if _, err := synth.WriteNPY(path, synth.StreamConfig{Neurons: sz.cols, Trials: sz.rows, GainSD: 0.15, NoiseSD: 0.5, Seed: 1}); err != nil {
					b.Fatal(err)
				}
			}
			s, err := format.OpenNPYStream(path)
			if err != nil {
				b.Fatal(err)
			}
			defer s.Close()
			bytes := int64(4) * int64(s.Rows()) * int64(s.Cols())
			b.Run("read", func(b *testing.B) {
				R := max(1, defaultBlockBytes/(4*s.Cols()))
				buf := make([]float32, R*s.Cols())
				b.SetBytes(bytes)
				c0 := cpuTime()
				defer func() { b.ReportMetric((cpuTime()-c0)/float64(b.N), "cpu-s/op") }()
				for i := 0; i < b.N; i++ {
					for lo := 0; lo < s.Rows(); lo += R {
						if _, err := s.ReadRows32(buf, lo, min(lo+R, s.Rows())); err != nil {
							b.Fatal(err)
						}
					}
				}
			})
			plan := streamPlan(s.Rows(), *streamBins)
			b.Run("parts", func(b *testing.B) {
				b.SetBytes(bytes)
				b.ReportAllocs()
				c0 := cpuTime()
				for i := 0; i < b.N; i++ {
					if _, err := AccumulateParts(s, plan, StreamOptions{}); err != nil {
						b.Fatal(err)
					}
				}
				b.ReportMetric((cpuTime()-c0)/float64(b.N), "cpu-s/op")
			})
		})
	}
}

// cpuTime is the user plus system CPU time of the process so far, in
// seconds: on a shared machine it says more than the wall time.
func cpuTime() float64 {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
}

// BenchmarkStreamAddRow is the inner loop of AccumulateParts on data in
// cache: ns per element is its compute floor.
func BenchmarkStreamAddRow(b *testing.B) {
	const w = 256
	row := make([]float32, w)
	sum, sq, ref := make([]float64, w), make([]float64, w), make([]float64, w)
	b.SetBytes(4 * w)
	for i := 0; i < b.N; i++ {
		addRow(sum, sq, row, ref)
	}
}
