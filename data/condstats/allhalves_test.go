package condstats

import (
	"math"
	"slices"
	"testing"

	"github.com/strialab/stria/data/format"
)

// TestAllHalves checks the split-half sums over all trials of all parts
// against sums dealt directly as eval.SplitHalf deals them (within each
// condition, the trials in recording order alternately to half A and B),
// that asking for them leaves the parts' own statistics bitwise unchanged,
// and that a column view of the file gives, column for column, the same
// bits as the whole file (array tasks of stria fit read neuron ranges).
func TestAllHalves(t *testing.T) {
	const T, N, B = 300, 9, 7
	y, cond, path := streamCase(t, T, N, B)
	part := make([]int, T)
	for r := range part {
		part[r] = []int{0, 1, 2, 0, NoPart}[r%5]
	}
	specs := []PartSpec{{}, {}, {Halves: true, CondSquares: true}}
	without, err := AccumulatePartsMatrix(y, StreamPlan{NBins: B, Cond: cond, Part: part, Specs: specs}, StreamOptions{})
	if err != nil {
		t.Fatal(err)
	}
	with, err := AccumulatePartsMatrix(y, StreamPlan{NBins: B, Cond: cond, Part: part, Specs: specs, AllHalves: true}, StreamOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(with) != 4 {
		t.Fatalf("got %d PartStats, want the 3 parts and the dealing over all trials", len(with))
	}
	for i := range without {
		a, b := without[i], with[i]
		for _, pair := range [][2][]float64{{a.Sum, b.Sum}, {a.TotSq, b.TotSq}, {a.SumSq, b.SumSq}, {a.SumA, b.SumA}} {
			if !slices.Equal(pair[0], pair[1]) {
				t.Fatalf("part %d: statistics change when AllHalves is asked for", i)
			}
		}
	}
	// Direct dealing, in float64, relative to all.Ref (the first trial in a part).
	all := with[3]
	seen := make([]int, B)
	cntA := make([]int, B)
	cnt := make([]int, B)
	sumA := make([]float64, B*N)
	first := -1
	for r := 0; r < T; r++ {
		if part[r] == NoPart {
			continue
		}
		if first < 0 {
			first = r
		}
		c := cond[r]
		cnt[c]++
		if seen[c]%2 == 0 {
			cntA[c]++
			for n := 0; n < N; n++ {
				sumA[c*N+n] += float64(y.Data[r*N+n]) - float64(y.Data[first*N+n])
			}
		}
		seen[c]++
	}
	if !slices.Equal(all.Count, cnt) || !slices.Equal(all.CountA, cntA) || all.RefCond != cond[first] {
		t.Fatalf("counts %v %v refcond %d, want %v %v %d", all.Count, all.CountA, all.RefCond, cnt, cntA, cond[first])
	}
	for i, v := range sumA {
		// Summed relative to each part's reference and corrected: equal to rounding.
		if math.Abs(all.SumA[i]-v) > 1e-9*math.Max(1, math.Abs(v)) {
			t.Errorf("SumA[%d] = %v, want %v (direct dealing)", i, all.SumA[i], v)
		}
	}
	// Neuron ranges of the file: the same bits as the whole.
	s, err := format.OpenNPYStream(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	plan := StreamPlan{NBins: B, Cond: cond, Part: part, Specs: specs, AllHalves: true}
	for _, r := range [][2]int{{0, 4}, {4, 9}} {
		got, err := AccumulateParts(s.Columns(r[0], r[1]), plan, StreamOptions{BlockBytes: 64})
		if err != nil {
			t.Fatal(err)
		}
		for i, ps := range got {
			w := with[i]
			for b := 0; b < B; b++ {
				if ps.Sum != nil && !slices.Equal(ps.Sum[b*ps.N:(b+1)*ps.N], w.Sum[b*N+r[0]:b*N+r[1]]) {
					t.Errorf("neurons %v, part %d: sums differ from the whole file's", r, i)
				}
				if ps.SumA != nil && !slices.Equal(ps.SumA[b*ps.N:(b+1)*ps.N], w.SumA[b*N+r[0]:b*N+r[1]]) {
					t.Errorf("neurons %v, part %d: half-A sums differ from the whole file's", r, i)
				}
			}
		}
	}
}

// TestJoinNeurons: the statistics of neuron ranges joined are bitwise
// those of all the neurons at once; ranges of other trials are refused.
func TestJoinNeurons(t *testing.T) {
	const T, N, B = 200, 10, 6
	y, cond, path := streamCase(t, T, N, B)
	part := make([]int, T)
	for r := range part {
		part[r] = r % 3
	}
	plan := StreamPlan{NBins: B, Cond: cond, Part: part, Specs: []PartSpec{{}, {}, {Halves: true, CondSquares: true}}, AllHalves: true}
	whole, err := AccumulatePartsMatrix(y, plan, StreamOptions{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := format.OpenNPYStream(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	var pieces [][]*PartStats
	for _, r := range [][2]int{{0, 3}, {3, 3}, {3, 10}} {
		ps, err := AccumulateParts(s.Columns(r[0], r[1]), plan, StreamOptions{})
		if err != nil {
			t.Fatal(err)
		}
		pieces = append(pieces, ps)
	}
	for i := range whole {
		got, err := JoinNeurons(pieces[0][i], pieces[1][i], pieces[2][i])
		if err != nil {
			t.Fatal(err)
		}
		w := whole[i]
		if got.N != N || !slices.Equal(got.Count, w.Count) || !slices.Equal(got.Ref, w.Ref) || !slices.Equal(got.Sum, w.Sum) ||
			!slices.Equal(got.TotSq, w.TotSq) || !slices.Equal(got.SumSq, w.SumSq) || !slices.Equal(got.SumA, w.SumA) || !slices.Equal(got.CountA, w.CountA) {
			t.Errorf("part %d: joined ranges differ from the whole", i)
		}
	}
	if _, err := JoinNeurons(pieces[0][0], pieces[1][1]); err == nil {
		t.Error("ranges of different parts were joined")
	}
}
