package condstats

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/strialab/stria/data/format"
)

func randomMatrix(rows, cols int, seed uint64) *format.Matrix {
	rng := rand.New(rand.NewPCG(seed, 2))
	m := format.NewMatrix(rows, cols)
	for i := range m.Data {
		m.Data[i] = float32(3 + rng.NormFloat64())
	}
	return m
}

// TestCondStatsE3 uses eval/methods.md §9 E3 [computed]: four repeats x five
// conditions, rows are repeats: ybar = [15/2, 13/4, 6, 3, 31/4] and the
// mean within-condition variance (ddof 1) sigma2_noise = 19/10. Trials are
// laid out repeat by repeat, one neuron. Tolerance 1e-12: sums of small
// integers are exact in float64, one division each.
func TestCondStatsE3(t *testing.T) {
	reps := [][]float32{{9, 5, 4, 2, 7}, {7, 2, 7, 2, 10}, {8, 3, 6, 5, 7}, {6, 3, 7, 3, 7}}
	y := format.NewMatrix(20, 1)
	cond := make([]int, 20)
	trials := make([]int, 20)
	for r, row := range reps {
		for b, v := range row {
			t := r*5 + b
			y.Data[t] = v
			cond[t] = b
			trials[t] = t
		}
	}
	s := New(y, cond, trials, 5)
	mean := s.Mean(nil)
	want := []float64{15.0 / 2, 13.0 / 4, 6, 3, 31.0 / 4}
	for b := range want {
		if math.Abs(mean[b]-want[b]) > 1e-12 {
			t.Errorf("mean[%d] = %v, want %v", b, mean[b], want[b])
		}
	}
	v := s.Var(nil)
	avg := 0.0
	for _, x := range v {
		avg += x / 5
	}
	if math.Abs(avg-19.0/10) > 1e-12 {
		t.Errorf("mean within-condition variance = %v, want 19/10", avg)
	}
}

// TestCondStatsDirect compares with a direct two-pass computation over a
// random subset of trials, on a size that takes the parallel path. Tolerance
// 1e-9 relative: float64 sums of ~100 float32 values differ from the
// two-pass result only by rounding.
func TestCondStatsDirect(t *testing.T) {
	const T, N, B = 3200, 700, 12 // 1600 x 700 > 1<<20: the parallel path
	y := randomMatrix(T, N, 1)
	cond := randomConds(T, B, 3, 2)
	var trials []int
	for i := 0; i < T; i += 2 {
		trials = append(trials, i)
	}
	cond[5] = B - 1                // an odd trial: must not count
	s := New(y, cond, trials, B+1) // condition B is empty
	mean, vr := s.Mean(nil), s.Var(make([]float64, (B+1)*N))
	for b := 0; b <= B; b++ {
		var idx []int
		for _, x := range trials {
			if cond[x] == b {
				idx = append(idx, x)
			}
		}
		if s.Count[b] != len(idx) {
			t.Fatalf("Count[%d] = %d, want %d", b, s.Count[b], len(idx))
		}
		for n := 0; n < N; n += 37 {
			if len(idx) == 0 {
				if !math.IsNaN(mean[b*N+n]) || !math.IsNaN(vr[b*N+n]) {
					t.Errorf("empty condition: mean %v var %v, want NaN", mean[b*N+n], vr[b*N+n])
				}
				continue
			}
			m := 0.0
			for _, x := range idx {
				m += float64(y.Data[x*N+n])
			}
			m /= float64(len(idx))
			ss := 0.0
			for _, x := range idx {
				d := float64(y.Data[x*N+n]) - m
				ss += d * d
			}
			v := ss / float64(len(idx)-1)
			if math.Abs(mean[b*N+n]-m) > 1e-9*math.Abs(m) || math.Abs(vr[b*N+n]-v) > 1e-9*v {
				t.Errorf("b=%d n=%d: mean %v var %v, want %v %v", b, n, mean[b*N+n], vr[b*N+n], m, v)
			}
		}
	}
	// Same result with one goroutine (the serial path on a small slice of neurons).
	one := &Stats{B: B + 1, N: N, Count: s.Count, Sum: make([]float64, (B+1)*N), SumSq: make([]float64, (B+1)*N)}
	one.accumulate(y, cond, trials, 0, N)
	for i := range one.Sum {
		if one.Sum[i] != s.Sum[i] || one.SumSq[i] != s.SumSq[i] {
			t.Fatalf("parallel and serial sums differ at %d", i)
		}
	}
}

// TestNormalizerTrainOnly: the fit uses only the listed trials, so changing
// the other trials changes nothing; fitted trials come out with mean 0 and
// std 1 (ddof 0) [by definition]; a constant neuron keeps Scale 1.
func TestNormalizerTrainOnly(t *testing.T) {
	y := randomMatrix(100, 5, 3)
	for i := 0; i < 100; i++ {
		y.Data[i*5+4] = 2 // constant neuron 4
	}
	train := make([]int, 0, 70)
	for i := 0; i < 70; i++ {
		train = append(train, i)
	}
	z1 := FitNormalizer(y, train)
	for i := 70; i < 100; i++ {
		for n := 0; n < 4; n++ {
			y.Data[i*5+n] = 1e6 // wild test values
		}
	}
	z2 := FitNormalizer(y, train)
	for n := range z1.Mean {
		if z1.Mean[n] != z2.Mean[n] || z1.Scale[n] != z2.Scale[n] {
			t.Errorf("neuron %d: test trials changed the fit", n)
		}
	}
	if z1.Scale[4] != 1 || z1.Mean[4] != 2 {
		t.Errorf("constant neuron: mean %v scale %v, want 2 and 1", z1.Mean[4], z1.Scale[4])
	}
	z1.Apply(y)
	for n := 0; n < 5; n++ {
		m, ss := 0.0, 0.0
		for _, i := range train {
			m += float64(y.Data[i*5+n]) / 70
		}
		for _, i := range train {
			d := float64(y.Data[i*5+n]) - m
			ss += d * d / 70
		}
		wantSS := 1.0
		if n == 4 {
			wantSS = 0
		}
		// Tolerance 1e-5: results are stored as float32 (eps 6e-8) over 70 values.
		if math.Abs(m) > 1e-5 || math.Abs(ss-wantSS) > 1e-5 {
			t.Errorf("neuron %d after Apply: mean %v var %v", n, m, ss)
		}
	}
}

func TestStatsPanics(t *testing.T) {
	y := format.NewMatrix(3, 2)
	for name, f := range map[string]func(){
		"bad trial":     func() { New(y, []int{0, 0, 0}, []int{3}, 1) },
		"bad cond":      func() { New(y, []int{0, 2, 0}, []int{1}, 2) },
		"cond length":   func() { New(y, []int{0}, nil, 1) },
		"dst length":    func() { New(y, []int{0, 0, 0}, nil, 1).Mean(make([]float64, 3)) },
		"no trials":     func() { FitNormalizer(y, nil) },
		"apply columns": func() { FitNormalizer(y, []int{0}).Apply(format.NewMatrix(1, 3)) },
	} {
		func() {
			defer func() {
				if r := recover(); r == nil {
					t.Errorf("%s: no panic", name)
				}
			}()
			f()
		}()
	}
}
