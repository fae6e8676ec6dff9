package condstats_test

import (
	"math"
	"math/rand/v2"
	"path/filepath"
	"reflect"
	"testing"

	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/eval"
)

// TestStreamedScoresMatchInMemory runs the streaming path end to end: a
// file written by synth.WriteNPY, its test part accumulated by
// AccumulateParts, scored by eval.ScoreSums, against eval.ScoreConditions
// on the whole matrix read by ReadNPY (the in-memory reference). The
// sums are formed in the same order and with the same reference trial, so
// the scores are expected bitwise equal; the test allows 1e-12 relative.
// (An external test: data itself does not import eval.)
func TestStreamedScoresMatchInMemory(t *testing.T) {
	const T, N, B = 240, 530, 12
	path := filepath.Join(t.TempDir(), "y.npy")
	stim, err := synth.WriteNPY(path, synth.StreamConfig{Neurons: N, Trials: T, UntunedFrac: 0.2, GainSD: 0.15, NoiseSD: 0.5, Seed: 3, BlockRows: 7})
	if err != nil {
		t.Fatal(err)
	}
	cond := make([]int, T)
	for i, th := range stim {
		cond[i] = min(int(th/360*B), B-1)
	}
	rng := rand.New(rand.NewPCG(5, 6))
	var train, test []int
	for r := 0; r < T; r++ {
		if rng.IntN(4) == 0 && cond[r] != 4 { // condition 4: no test trials
			test = append(test, r)
		} else {
			train = append(train, r)
		}
	}
	part, err := condstats.PartOf(T, train, test)
	if err != nil {
		t.Fatal(err)
	}
	s, err := format.OpenNPYStream(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	parts, err := condstats.AccumulateParts(s, condstats.StreamPlan{NBins: B, Cond: cond, Part: part,
		Specs: []condstats.PartSpec{{}, {Halves: true, CondSquares: true}}}, condstats.StreamOptions{Workers: 2, BlockBytes: 1 << 16})
	if err != nil {
		t.Fatal(err)
	}
	ps := parts[1]
	h := &eval.HeldOutSums{B: ps.B, N: ps.N, Count: ps.Count, CountA: ps.CountA, Ref: ps.Ref,
		RefCond: ps.RefCond, Sum: ps.Sum, SumA: ps.SumA, SumSq: ps.SumSq}
	// A one-hot model: the training condition means.
	pred := parts[0].Means(nil)
	for i, v := range pred {
		if math.IsNaN(v) {
			pred[i] = 0
		}
	}
	got := make([]eval.Scores, N)
	eval.ScoreSums(got, h, pred)

	y, err := format.ReadNPY(path)
	if err != nil {
		t.Fatal(err)
	}
	want := make([]eval.Scores, N)
	eval.ScoreConditions(want, y.Data, N, test, cond, pred, B)
	for j := range want {
		g, w := reflect.ValueOf(got[j]), reflect.ValueOf(want[j])
		for k := 0; k < g.NumField(); k++ { // every field of Scores
			gk, wk := g.Field(k).Float(), w.Field(k).Float()
			if math.IsNaN(gk) != math.IsNaN(wk) || math.Abs(gk-wk) > 1e-12*math.Abs(wk) {
				t.Fatalf("neuron %d %s: streamed %v, in memory %v", j, g.Type().Field(k).Name, gk, wk)
			}
		}
	}
}
