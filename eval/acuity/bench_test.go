package acuity

import (
	"math"
	"math/rand/v2"
	"sync"
	"testing"
)

// Full-scale benchmark data: 24,000 neurons x 4,600 trials, 60 direction
// conditions (6 degree bins), float32. Von Mises tuning with random
// preferred directions, Gaussian private noise and a weak shared gain
// fluctuation. Built once (about 440 MB).
const (
	benchN, benchT, benchB = 24000, 4600, 60
	benchFolds             = 5
)

var (
	benchOnce  sync.Once
	benchY     []float32
	benchCond  []int
	benchAxis  Conditions
	benchFold  []Fold
	benchPredF [][]float64
)

func benchData() {
	rng := rand.New(rand.NewPCG(2026, 12))
	benchAxis = Conditions{Values: make([]float64, benchB), Period: 360}
	for b := range benchAxis.Values {
		benchAxis.Values[b] = float64(b) * 360 / benchB
	}
	mean := make([]float64, benchB*benchN)
	sd := make([]float32, benchN)
	for i := 0; i < benchN; i++ {
		pref := 360 * rng.Float64()
		base, amp, kappa := 0.5+rng.Float64(), 2*rng.Float64(), 0.5+3*rng.Float64()
		for b, s := range benchAxis.Values {
			mean[b*benchN+i] = base + amp*math.Exp(kappa*(math.Cos((s-pref)*math.Pi/180)-1))
		}
		sd[i] = float32(0.5 + rng.Float64())
	}
	benchY = make([]float32, benchT*benchN)
	benchCond = make([]int, benchT)
	perm := rng.Perm(benchT)
	for t := 0; t < benchT; t++ {
		benchCond[perm[t]] = t % benchB
	}
	for t := 0; t < benchT; t++ {
		m := mean[benchCond[t]*benchN : benchCond[t]*benchN+benchN]
		g := float32(1 + 0.05*rng.NormFloat64())
		row := benchY[t*benchN : t*benchN+benchN]
		for i := range row {
			row[i] = g*float32(m[i]) + sd[i]*float32(rng.NormFloat64())
		}
	}
	// Folds: trials dealt round-robin within each condition.
	seen := make([]int, benchB)
	fid := make([]int, benchT)
	for t, c := range benchCond {
		fid[t] = seen[c] % benchFolds
		seen[c]++
	}
	benchFold = make([]Fold, benchFolds)
	for t, f := range fid {
		for g := range benchFold {
			if g == f {
				benchFold[g].Test = append(benchFold[g].Test, t)
			} else {
				benchFold[g].Train = append(benchFold[g].Train, t)
			}
		}
	}
	// Model predictions: the true means, the same for every fold (a stand-in
	// for a fitted model; only the cost matters here).
	benchPredF = make([][]float64, benchFolds)
	for f := range benchPredF {
		benchPredF[f] = mean
	}
}

// benchSizes is a log-spaced ladder up to about half the estimator limit
// (pairs of 153 trials allow N <= 149).
var benchSizes = []int{5, 10, 20, 40, 74}

// BenchmarkLinearInfo: information of one random 74-neuron subset for all 60
// neighbouring pairs (wrap pair included).
func BenchmarkLinearInfo(b *testing.B) {
	benchOnce.Do(benchData)
	rng := rand.New(rand.NewPCG(1, 1))
	sub := randomSubset(rng, benchN, 74)
	b.ResetTimer()
	defer reportCPU(b)()
	for range b.N {
		if _, err := LinearInfo(benchY, benchN, benchCond, benchAxis, sub); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkInfoVsSize: 60 pairs x 5 sizes x 20 repeats, then the saturation
// fit of the pair-mean curve with 1000 bootstrap resamples.
func BenchmarkInfoVsSize(b *testing.B) {
	benchOnce.Do(benchData)
	b.ResetTimer()
	defer reportCPU(b)()
	for range b.N {
		rng := rand.New(rand.NewPCG(2, 2))
		c, err := InfoVsSize(benchY, benchN, benchCond, benchAxis, benchSizes, 20, rng)
		if err != nil {
			b.Fatal(err)
		}
		if _, err := FitSaturation(c.Sizes, c.Curves(-1), 1000, rng); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkDecode: 5-fold decoding of all 4,600 trials from all 24,000
// neurons, by diagonal LDA and by the Gaussian model likelihood.
func BenchmarkDecode(b *testing.B) {
	benchOnce.Do(benchData)
	dec := make([]int, benchT)
	for _, c := range []struct {
		name string
		d    Decoder
	}{
		{"diagonal_lda", Decoder{Kind: LinearDiscriminant, Shrinkage: 1}},
		{"gaussian_model", Decoder{Kind: GaussianModel, Pred: benchPredF}},
	} {
		b.Run(c.name, func(b *testing.B) {
			done := reportCPU(b)
			for range b.N {
				if _, err := c.d.Decode(dec, benchY, benchN, benchCond, benchB, benchFold, nil); err != nil {
					b.Fatal(err)
				}
			}
			done()
			s, err := Summarize(benchAxis, benchCond, dec)
			if err != nil {
				b.Fatal(err)
			}
			b.ReportMetric(s.MAE, "MAE_deg")
		})
	}
}

// BenchmarkDecodeVsSize: diagonal LDA, 5 folds, subsets of 100, 1,000 and
// 10,000 neurons, 3 repeats.
func BenchmarkDecodeVsSize(b *testing.B) {
	benchOnce.Do(benchData)
	d := Decoder{Kind: LinearDiscriminant, Shrinkage: 1}
	b.ResetTimer()
	defer reportCPU(b)()
	for range b.N {
		rng := rand.New(rand.NewPCG(3, 3))
		if _, err := d.VsSize(benchY, benchN, benchCond, benchAxis, benchFold, []int{100, 1000, 10000}, 3, rng); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAcuityAll is the whole analysis at full scale: information per
// pair and against size (20 repeats, fit with 1000 bootstrap resamples),
// 5-fold diagonal-LDA decoding of all neurons, and decoding against size.
func BenchmarkAcuityAll(b *testing.B) {
	benchOnce.Do(benchData)
	dec := make([]int, benchT)
	d := Decoder{Kind: LinearDiscriminant, Shrinkage: 1}
	b.ResetTimer()
	defer reportCPU(b)()
	for range b.N {
		rng := rand.New(rand.NewPCG(4, 4))
		c, err := InfoVsSize(benchY, benchN, benchCond, benchAxis, benchSizes, 20, rng)
		if err != nil {
			b.Fatal(err)
		}
		if _, err := FitSaturation(c.Sizes, c.Curves(-1), 1000, rng); err != nil {
			b.Fatal(err)
		}
		if _, err := d.Decode(dec, benchY, benchN, benchCond, benchB, benchFold, nil); err != nil {
			b.Fatal(err)
		}
		if _, err := Summarize(benchAxis, benchCond, dec); err != nil {
			b.Fatal(err)
		}
		if _, err := d.VsSize(benchY, benchN, benchCond, benchAxis, benchFold, []int{100, 1000, 10000}, 3, rng); err != nil {
			b.Fatal(err)
		}
	}
}

// reportCPU starts a CPU clock and returns the function that reports the CPU
// seconds per operation (user + system, all threads) as "cpu-s/op".
func reportCPU(b *testing.B) func() {
	c0 := cpuSeconds()
	return func() { b.ReportMetric((cpuSeconds()-c0)/float64(b.N), "cpu-s/op") }
}
