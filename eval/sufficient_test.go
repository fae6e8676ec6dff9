package eval

import (
	"math"
	"math/rand/v2"
	"reflect"
	"testing"
)

// heldOutSumsOf forms the sums of HeldOutSums the way a streaming pass
// does: each held-out trial in the order given, relative to the values of
// trial ref (an index into trials).
func heldOutSumsOf(y []float32, n int, trials, cond []int, nbins, ref int) *HeldOutSums {
	h := &HeldOutSums{B: nbins, N: n, Count: make([]int, nbins), CountA: make([]int, nbins),
		Ref: make([]float64, n), RefCond: -1,
		Sum: make([]float64, nbins*n), SumA: make([]float64, nbins*n), SumSq: make([]float64, nbins*n)}
	if len(trials) > 0 {
		r0 := trials[ref]
		h.RefCond = cond[r0]
		for j := range h.Ref {
			h.Ref[j] = float64(y[r0*n+j])
		}
	}
	for _, r := range trials {
		c := cond[r]
		inA := h.Count[c]%2 == 0
		h.Count[c]++
		if inA {
			h.CountA[c]++
		}
		for j := 0; j < n; j++ {
			d := float64(y[r*n+j]) - h.Ref[j]
			h.Sum[c*n+j] += d
			h.SumSq[c*n+j] += d * d
			if inA {
				h.SumA[c*n+j] += d
			}
		}
	}
	return h
}

// scoreFields lists every field of Scores, by reflection so that a field
// added to Scores is compared without touching this test.
func scoreFields(s Scores) []float64 {
	v := reflect.ValueOf(s)
	out := make([]float64, v.NumField())
	for i := range out {
		out[i] = v.Field(i).Float()
	}
	return out
}

var scoreNames = func() []string {
	t := reflect.TypeOf(Scores{})
	out := make([]string, t.NumField())
	for i := range out {
		out[i] = t.Field(i).Name
	}
	return out
}()

// TestScoreSumsMatchesConditions checks ScoreSums against ScoreConditions
// (the reference: it reads the trials) on unequal counts, an empty
// condition, a one-trial condition, a constant neuron, a neuron with a
// large offset and a neuron without within-condition noise, over more
// than one block of neurons.
//
// With the sums ScoreConditions forms itself (ascending trials, the first
// as reference) the arithmetic is the same and the scores are bitwise
// equal (the test asks 1e-12 relative, so that a harmless reordering of
// either side does not break it). With another reference trial the sums
// are other roundings of the same numbers (float64 sums of float32 values
// in another order and shift), and agree to 1e-12 relative here; a score
// that is a difference of much larger terms (SP, FEV near 0) could need a
// looser bound on other data.
func TestScoreSumsMatchesConditions(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	const T, n, nb = 400, 150, 10
	y := make([]float32, T*n)
	cond := make([]int, T)
	for r := 0; r < T; r++ {
		c := rng.IntN(nb - 1) // condition nb-1 stays empty
		if c == 6 && rng.IntN(3) > 0 {
			c = 2 // unequal counts
		}
		cond[r] = c
		for j := 0; j < n; j++ {
			y[r*n+j] = float32(math.Sin(float64(c+j)) + rng.NormFloat64())
		}
		y[r*n+3] = 2.5                               // constant neuron
		y[r*n+4] = 1000 + float32(rng.NormFloat64()) // offset neuron
		y[r*n+5] = float32(c)                        // no noise within conditions
	}
	cond[1] = 7
	var trials []int
	for r := 0; r < T; r++ {
		if r%4 == 1 && (cond[r] != 7 || r == 1) { // condition 7: one held-out trial
			trials = append(trials, r)
		}
	}
	pc := make([]float64, nb*n)
	for i := range pc {
		pc[i] = rng.NormFloat64()
	}
	for b := 0; b < nb; b++ {
		pc[b*n+3] = 2.5 // constant prediction for the constant neuron
	}
	want := make([]Scores, n)
	ScoreConditions(want, y, n, trials, cond, pc, nb)

	cases := []struct {
		name string
		ref  int
		tol  float64
	}{
		{"same sums as ScoreConditions", 0, 1e-12},
		{"another reference trial", 17, 1e-12},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			h := heldOutSumsOf(y, n, trials, cond, nb, c.ref)
			got := make([]Scores, n)
			ScoreSums(got, h, pc)
			same, all := 0, 0
			for j := range want {
				g, w := scoreFields(got[j]), scoreFields(want[j])
				for k := range g {
					all++
					if g[k] == w[k] || (math.IsNaN(g[k]) && math.IsNaN(w[k])) {
						same++
						continue
					}
					if math.IsNaN(g[k]) != math.IsNaN(w[k]) || math.Abs(g[k]-w[k]) > c.tol*math.Abs(w[k]) {
						t.Errorf("neuron %d %s: got %v, want %v (ScoreConditions)", j, scoreNames[k], g[k], w[k])
					}
				}
			}
			t.Logf("%d of %d scores bitwise equal", same, all)
		})
	}
	if !math.IsNaN(want[3].TestR2) {
		t.Fatalf("constant neuron: ScoreConditions TestR2 %v, want NaN", want[3].TestR2)
	}
}

func TestScoreSumsEdgeCases(t *testing.T) {
	const n, nb = 3, 4
	y := []float32{1, 2, 3, 4, 5, 6, 7, 8, 9, 1, 1, 1}
	cond := []int{0, 1, 1, 2}
	pc := make([]float64, nb*n)
	for i := range pc {
		pc[i] = float64(i % 5)
	}
	cases := []struct {
		name   string
		trials []int
	}{
		{"no held-out trials", nil},
		{"one trial", []int{2}},
		{"one condition", []int{1, 2}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			want := make([]Scores, n)
			ScoreConditions(want, y, n, c.trials, cond, pc, nb)
			got := make([]Scores, n)
			ScoreSums(got, heldOutSumsOf(y, n, c.trials, cond, nb, 0), pc)
			for j := range want {
				g, w := scoreFields(got[j]), scoreFields(want[j])
				for k := range g {
					if !(g[k] == w[k] || (math.IsNaN(g[k]) && math.IsNaN(w[k]))) {
						t.Errorf("neuron %d %s: got %v, want %v", j, scoreNames[k], g[k], w[k])
					}
				}
			}
		})
	}
}

func TestScoreSumsPanics(t *testing.T) {
	h := heldOutSumsOf([]float32{1, 2, 3, 4}, 2, []int{0, 1}, []int{0, 0}, 2, 0)
	cases := []struct {
		name string
		f    func()
	}{
		{"short pred", func() { ScoreSums(make([]Scores, 2), h, make([]float64, 3)) }},
		{"short dst", func() { ScoreSums(make([]Scores, 1), h, make([]float64, 4)) }},
		{"bad halves", func() {
			h2 := *h
			h2.CountA = []int{0, 0}
			ScoreSums(make([]Scores, 2), &h2, make([]float64, 4))
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			defer func() {
				if recover() == nil {
					t.Fatal("no panic, want one")
				}
			}()
			c.f()
		})
	}
}

// BenchmarkScoreSums scores 24,000 neurons over 60 conditions from sums
// (the streamed path) against ScoreConditions on 920 held-out trials
// (the in-memory path, which also forms the sums).
func BenchmarkScoreSums(b *testing.B) {
	const T, n, nb = 920, 24000, 60
	rng := rand.New(rand.NewPCG(1, 2))
	y := make([]float32, T*n)
	for i := range y {
		y[i] = float32(rng.NormFloat64())
	}
	cond := make([]int, T)
	trials := make([]int, T)
	for i := range cond {
		cond[i] = i % nb
		trials[i] = i
	}
	pc := make([]float64, nb*n)
	dst := make([]Scores, n)
	b.Run("sums", func(b *testing.B) {
		h := heldOutSumsOf(y, n, trials, cond, nb, 0)
		b.ReportAllocs()
		for i := 0; i < b.N; i++ {
			ScoreSums(dst, h, pc)
		}
	})
	b.Run("conditions", func(b *testing.B) {
		b.ReportAllocs()
		for i := 0; i < b.N; i++ {
			ScoreConditions(dst, y, n, trials, cond, pc, nb)
		}
	})
	// 200,000 neurons: sums far larger than the caches, as at a million.
	b.Run("sums-200k", func(b *testing.B) {
		const N = 200000
		h := &HeldOutSums{B: nb, N: N, Count: make([]int, nb), CountA: make([]int, nb), Ref: make([]float64, N),
			Sum: make([]float64, nb*N), SumA: make([]float64, nb*N), SumSq: make([]float64, nb*N)}
		for c := range h.Count {
			h.Count[c], h.CountA[c] = 15, 8
		}
		for i := range h.Sum {
			h.Sum[i] = rng.NormFloat64()
			h.SumA[i] = h.Sum[i]/2 + 0.1*rng.NormFloat64()
			h.SumSq[i] = h.Sum[i]*h.Sum[i]/15 + 15*rng.Float64()
		}
		pred := make([]float64, nb*N)
		for i := range pred {
			pred[i] = rng.NormFloat64()
		}
		d := make([]Scores, N)
		b.ResetTimer()
		for i := 0; i < b.N; i++ {
			ScoreSums(d, h, pred)
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*N), "ns/neuron")
	})
}
