package condstats

import (
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
)

// streamCase is a small recording with unequal condition counts, an empty
// condition (3) and a constant neuron (2), stored as float32.
func streamCase(t *testing.T, T, N, B int) (*format.Matrix, []int, string) {
	t.Helper()
	rng := rand.New(rand.NewPCG(7, 8))
	y := format.NewMatrix(T, N)
	cond := make([]int, T)
	for r := 0; r < T; r++ {
		c := rng.IntN(B)
		if c == 3 {
			c = (r % 2) * 5 // skew counts towards 0 and 5, leave 3 empty
		}
		cond[r] = c
		for n := 0; n < N; n++ {
			v := 100 + float64(c) + 2*rng.NormFloat64() // offset far from 0
			if n == 2 {
				v = 7.25
			}
			y.Data[r*N+n] = float32(v)
		}
	}
	p := filepath.Join(t.TempDir(), "y.npy")
	if err := format.WriteNPY(p, []int{T, N}, y.Data); err != nil {
		t.Fatal(err)
	}
	return y, cond, p
}

func relClose(got, want, tol float64) bool {
	if math.IsNaN(want) {
		return math.IsNaN(got)
	}
	return math.Abs(got-want) <= tol*math.Max(1, math.Abs(want))
}

// TestAccumulatePartsMatchesCondStats checks the streamed statistics of
// three parts (and unused trials) against New and two-pass sums
// over the matrix in memory, and that the sums are bitwise the same for
// any number of workers and block size. The second size (skipped with
// -short) has blocks of many rows and two workers with wide column ranges.
func TestAccumulatePartsMatchesCondStats(t *testing.T) {
	sizes := []struct{ T, N int }{{301, 700}, {1500, 3000}}
	if testing.Short() {
		sizes = sizes[:1]
	}
	for _, sz := range sizes {
		t.Run(fmt.Sprintf("%dx%d", sz.T, sz.N), func(t *testing.T) { testAccumulateParts(t, sz.T, sz.N) })
	}
}

func testAccumulateParts(t *testing.T, T, N int) {
	const B = 8
	y, cond, path := streamCase(t, T, N, B)
	rng := rand.New(rand.NewPCG(3, 4))
	var train, val, test []int
	for r := 0; r < T; r++ {
		switch k := rng.IntN(10); {
		case k < 6:
			train = append(train, r)
		case k < 7:
			val = append(val, r)
		case k < 9:
			test = append(test, r)
		default: // in no part: not read
		}
	}
	part, err := PartOf(T, train, val, test)
	if err != nil {
		t.Fatal(err)
	}
	plan := StreamPlan{NBins: B, Cond: cond, Part: part,
		Specs: []PartSpec{{}, {}, {Halves: true, CondSquares: true}}}
	s, err := format.OpenNPYStream(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()

	var ref []*PartStats
	for _, o := range []struct {
		name string
		opt  StreamOptions
	}{
		{"one worker, spans of 256 neurons", StreamOptions{Workers: 1, BlockBytes: 1, Read: ReadCached}},
		{"two workers, 7 rows per block", StreamOptions{Workers: 2, BlockBytes: 7 * 4 * N}},
		{"three workers, default blocks", StreamOptions{Workers: 3}},
		{"past the page cache, two workers", StreamOptions{Workers: 2, Read: ReadDirect}},
	} {
		t.Run(o.name, func(t *testing.T) {
			if o.opt.Read == ReadDirect {
				d := s.Direct(true)
				if d == nil {
					t.Skip("the file system of the test's temporary folder refuses O_DIRECT (or not Linux)")
				}
				d.Close()
			}
			got, err := AccumulateParts(s, plan, o.opt)
			if err != nil {
				t.Fatal(err)
			}
			if ref == nil {
				ref = got
				// The in-memory pass gives the same numbers bitwise.
				mem, err := AccumulatePartsMatrix(y, plan, StreamOptions{})
				if err != nil {
					t.Fatal(err)
				}
				for i := range got {
					for k, arr := range [][2][]float64{{mem[i].Sum, got[i].Sum}, {mem[i].TotSq, got[i].TotSq}, {mem[i].SumSq, got[i].SumSq}, {mem[i].SumA, got[i].SumA}, {mem[i].Ref, got[i].Ref}} {
						if len(arr[0]) != len(arr[1]) {
							t.Fatalf("part %d array %d: in memory %d values, streamed %d", i, k, len(arr[0]), len(arr[1]))
						}
						for e := range arr[0] {
							if arr[0][e] != arr[1][e] {
								t.Fatalf("part %d array %d element %d: in memory %v, streamed %v", i, k, e, arr[0][e], arr[1][e])
							}
						}
					}
				}
			} else {
				// Same summation order for every element: bitwise equal.
				for i := range got {
					for k, arr := range [][2][]float64{{ref[i].Sum, got[i].Sum}, {ref[i].TotSq, got[i].TotSq}, {ref[i].SumSq, got[i].SumSq}, {ref[i].SumA, got[i].SumA}, {ref[i].Ref, got[i].Ref}} {
						if len(arr[0]) != len(arr[1]) {
							t.Fatalf("part %d array %d: %d values with one worker, %d with these options", i, k, len(arr[0]), len(arr[1]))
						}
						for e := range arr[0] {
							if math.Float64bits(arr[0][e]) != math.Float64bits(arr[1][e]) {
								t.Fatalf("part %d array %d element %d = %v with these options, %v with one worker", i, k, e, arr[1][e], arr[0][e])
							}
						}
					}
				}
			}
			// Reference: the in-memory statistics of data.New,
			// summed without the shift (so equal up to rounding).
			for i, set := range [][]int{train, val, test} {
				want := New(y, cond, set, B)
				ps := got[i]
				for b := 0; b < B; b++ {
					if ps.Count[b] != want.Count[b] {
						t.Fatalf("part %d Count[%d] = %d, want %d", i, b, ps.Count[b], want.Count[b])
					}
				}
				if ps.Trials != len(set) {
					t.Fatalf("part %d Trials = %d, want %d", i, ps.Trials, len(set))
				}
				sums := ps.Sums(nil)
				for k := range sums {
					if !relClose(sums[k], want.Sum[k], 1e-12) {
						t.Fatalf("part %d Sums[%d] = %v, want %v", i, k, sums[k], want.Sum[k])
					}
				}
				mean := ps.Means(nil)
				wmean := want.Mean(nil)
				for k := range mean {
					if !relClose(mean[k], wmean[k], 1e-12) {
						t.Fatalf("part %d mean[%d] = %v, want %v", i, k, mean[k], wmean[k])
					}
				}
				// WithinSS and TotalSS against two-pass sums over the trials.
				within, total := ps.WithinSS(nil), ps.TotalSS(nil)
				grand := ps.GrandMean(nil)
				cm := ps.CentredMeans(nil)
				for n := 0; n < N; n++ {
					var g float64
					for _, r := range set {
						g += float64(y.Data[r*N+n])
					}
					g /= float64(len(set))
					var w2, t2 float64
					for _, r := range set {
						v := float64(y.Data[r*N+n])
						d := v - wmean[cond[r]*N+n]
						w2 += d * d
						t2 += (v - g) * (v - g)
					}
					if !relClose(grand[n], g, 1e-12) {
						t.Fatalf("part %d grand mean of neuron %d = %v, want %v", i, n, grand[n], g)
					}
					// Tolerance relative to the total: one-pass sums of
					// squares of values within a few s.d. of Ref.
					if math.Abs(within[n]-w2) > 1e-10*math.Max(1, t2) || math.Abs(total[n]-t2) > 1e-10*math.Max(1, t2) {
						t.Fatalf("part %d neuron %d: within %v total %v, want %v %v", i, n, within[n], total[n], w2, t2)
					}
					if n == 2 && (within[n] != 0 || total[n] != 0) {
						t.Fatalf("constant neuron: within %v total %v, want exactly 0", within[n], total[n])
					}
					for b := 0; b < B; b++ {
						wc := wmean[b*N+n] - g
						if !relClose(cm[b*N+n], wc, 1e-10) {
							t.Fatalf("part %d centred mean (%d, %d) = %v, want %v", i, b, n, cm[b*N+n], wc)
						}
					}
				}
			}
			// The test part's per-condition squares through Stats.
			cs := got[2].Stats()
			want := New(y, cond, test, B)
			wv, gv := want.Var(nil), cs.Var(nil)
			for k := range wv {
				if math.IsNaN(wv[k]) != math.IsNaN(gv[k]) || (!math.IsNaN(wv[k]) && math.Abs(wv[k]-gv[k]) > 1e-9*math.Max(1, wv[k])) {
					t.Fatalf("test part Var[%d] = %v, want %v", k, gv[k], wv[k])
				}
			}
			// Split halves: dealt alternately within each condition in
			// ascending trial order.
			seen := make([]int, B)
			sumA := make([]float64, B*N)
			cntA := make([]int, B)
			for _, r := range test {
				c := cond[r]
				if seen[c]%2 == 0 {
					cntA[c]++
					for n := 0; n < N; n++ {
						sumA[c*N+n] += float64(y.Data[r*N+n]) - got[2].Ref[n]
					}
				}
				seen[c]++
			}
			for b := 0; b < B; b++ {
				if got[2].CountA[b] != cntA[b] {
					t.Fatalf("CountA[%d] = %d, want %d", b, got[2].CountA[b], cntA[b])
				}
			}
			for k := range sumA {
				if got[2].SumA[k] != sumA[k] { // same order, same shift
					t.Fatalf("SumA[%d] = %v, want %v", k, got[2].SumA[k], sumA[k])
				}
			}
			if c := ConstantNeurons(got...); len(c) != 1 || c[0] != 2 {
				t.Fatalf("ConstantNeurons = %v, want [2]", c)
			}
			if got[0].SumSq != nil || got[0].SumA != nil {
				t.Fatal("training part kept SumSq or SumA without asking")
			}
			// Normalizer from the parts equals the one from Stats.
			zp := NormalizerFromParts(got[0], got[1])
			zs := NormalizerFromStats(New(y, cond, train, B), New(y, cond, val, B))
			for n := 0; n < N; n++ {
				if !relClose(zp.Mean[n], zs.Mean[n], 1e-12) || !relClose(zp.Scale[n], zs.Scale[n], 1e-9) {
					t.Fatalf("normalizer of neuron %d = (%v, %v), want (%v, %v)", n, zp.Mean[n], zp.Scale[n], zs.Mean[n], zs.Scale[n])
				}
			}
		})
	}
}

func TestAccumulatePartsErrors(t *testing.T) {
	const T, N, B = 40, 300, 8
	y, cond, path := streamCase(t, T, N, B)
	all := make([]int, T)
	for i := range all {
		all[i] = i
	}
	part, _ := PartOf(T, all)
	s, err := format.OpenNPYStream(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	cases := []struct {
		name string
		plan StreamPlan
		want string
	}{
		{"short plan", StreamPlan{NBins: B, Cond: cond[:T-1], Part: part, Specs: []PartSpec{{}}}, "has 40 trials"},
		{"bad condition", StreamPlan{NBins: 2, Cond: cond, Part: part, Specs: []PartSpec{{}}}, "outside [0, 2)"},
		{"bad part", StreamPlan{NBins: B, Cond: cond, Part: part, Specs: nil}, "has part 0"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := AccumulateParts(s, c.plan, StreamOptions{})
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("got error %v, want one containing %q", err, c.want)
			}
		})
	}
	t.Run("non-finite value", func(t *testing.T) {
		y.Data[17*N+123] = float32(math.NaN())
		p := filepath.Join(t.TempDir(), "nan.npy")
		if err := format.WriteNPY(p, []int{T, N}, y.Data); err != nil {
			t.Fatal(err)
		}
		s2, err := format.OpenNPYStream(p)
		if err != nil {
			t.Fatal(err)
		}
		defer s2.Close()
		_, err = AccumulateParts(s2, StreamPlan{NBins: B, Cond: cond, Part: part, Specs: []PartSpec{{}}}, StreamOptions{})
		if err == nil || !strings.Contains(err.Error(), "neuron 123") || !strings.Contains(err.Error(), "trial 17") {
			t.Fatalf("got error %v, want one naming neuron 123 and trial 17", err)
		}
		_, err = AccumulatePartsMatrix(y, StreamPlan{NBins: B, Cond: cond, Part: part, Specs: []PartSpec{{}}}, StreamOptions{})
		if err == nil || !strings.Contains(err.Error(), "neuron 123") || !strings.Contains(err.Error(), "trial 17") {
			t.Fatalf("in memory: got error %v, want one naming neuron 123 and trial 17", err)
		}
	})
	t.Run("duplicate trial", func(t *testing.T) {
		if _, err := PartOf(T, []int{1, 2}, []int{2}); err == nil || !strings.Contains(err.Error(), "trial 2") {
			t.Fatalf("got error %v, want one naming trial 2", err)
		}
	})
}
