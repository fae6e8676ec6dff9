package data

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// randomConds returns T condition ids in [0, B) from a seeded generator,
// making sure every condition has at least minPer trials.
func randomConds(T, B, minPer int, seed uint64) []int {
	rng := rand.New(rand.NewPCG(seed, 1))
	c := make([]int, T)
	for t := range c {
		if t < B*minPer {
			c[t] = t % B
		} else {
			c[t] = rng.IntN(B)
		}
	}
	rng.Shuffle(T, func(i, j int) { c[i], c[j] = c[j], c[i] })
	return c
}

func checkSplit(t *testing.T, s Split, T int) {
	t.Helper()
	if !slices.IsSorted(s.Train) || !slices.IsSorted(s.Test) {
		t.Fatal("sets not sorted")
	}
	seen := make([]int, T)
	for _, x := range s.Train {
		seen[x]++
	}
	for _, x := range s.Test {
		seen[x]++
	}
	for i, k := range seen {
		if k != 1 {
			t.Fatalf("trial %d appears %d times in train+test", i, k)
		}
	}
}

// TestHoldOutStratified: each condition's test count is within one trial of
// testFrac * count (the task's stratification rule), both sides are
// non-empty for each condition, and the total is within half a trial of
// testFrac * T (the running rounding in HoldOut's doc).
func TestHoldOutStratified(t *testing.T) {
	for _, f := range []float64{0.1, 0.2, 0.5, 0.9} {
		cond := randomConds(1000, 60, 2, 3)
		s, err := HoldOut(cond, nil, 60, f, 42)
		if err != nil {
			t.Fatal(err)
		}
		checkSplit(t, s, len(cond))
		n := make([]int, 60)
		nt := make([]int, 60)
		for _, c := range cond {
			n[c]++
		}
		for _, x := range s.Test {
			nt[cond[x]]++
		}
		for c := range n {
			if math.Abs(float64(nt[c])-f*float64(n[c])) >= 1 || nt[c] < 1 || nt[c] > n[c]-1 {
				t.Errorf("f=%v condition %d: %d of %d in test", f, c, nt[c], n[c])
			}
		}
		if d := math.Abs(float64(len(s.Test)) - f*1000); d > 0.5+1e-9 {
			t.Errorf("f=%v: %d test trials, want within 0.5 of %v", f, len(s.Test), f*1000)
		}
	}
}

func TestSplitDeterminism(t *testing.T) {
	cond := randomConds(600, 30, 5, 7)
	a, _ := HoldOut(cond, nil, 30, 0.2, 1)
	b, _ := HoldOut(cond, nil, 30, 0.2, 1)
	c, _ := HoldOut(cond, nil, 30, 0.2, 2)
	if !slices.Equal(a.Test, b.Test) {
		t.Error("same seed, different hold-out split")
	}
	if slices.Equal(a.Test, c.Test) {
		t.Error("different seeds, same hold-out split")
	}
	fa, _ := KFold(cond, nil, 30, 5, 1)
	fb, _ := KFold(cond, nil, 30, 5, 1)
	fc, _ := KFold(cond, nil, 30, 5, 2)
	if !slices.Equal(fa[3].Test, fb[3].Test) || slices.Equal(fa[3].Test, fc[3].Test) {
		t.Error("k-fold determinism")
	}
	blocks := make([]int, 600)
	for i := range blocks {
		blocks[i] = i / 30 // 20 blocks of 30 consecutive trials
	}
	ba, _ := HoldOut(cond, blocks, 30, 0.2, 1)
	bb, _ := HoldOut(cond, blocks, 30, 0.2, 1)
	bc, _ := HoldOut(cond, blocks, 30, 0.2, 9)
	if !slices.Equal(ba.Test, bb.Test) || slices.Equal(ba.Test, bc.Test) {
		t.Error("blocked hold-out determinism")
	}
}

// TestKFoldPartition: the k test sets partition the trials, each split's
// train is the complement of its test, folds differ in size by at most one,
// and each condition has floor or ceil of n_c/k trials per fold.
func TestKFoldPartition(t *testing.T) {
	cond := randomConds(997, 40, 5, 11)
	const k = 5
	folds, err := KFold(cond, nil, 40, k, 3)
	if err != nil {
		t.Fatal(err)
	}
	seen := make([]int, len(cond))
	minSz, maxSz := len(cond), 0
	n := make([]int, 40)
	for _, c := range cond {
		n[c]++
	}
	for _, s := range folds {
		checkSplit(t, s, len(cond))
		for _, x := range s.Test {
			seen[x]++
		}
		minSz, maxSz = min(minSz, len(s.Test)), max(maxSz, len(s.Test))
		nt := make([]int, 40)
		for _, x := range s.Test {
			nt[cond[x]]++
		}
		for c := range n {
			if nt[c] != n[c]/k && nt[c] != (n[c]+k-1)/k {
				t.Errorf("condition %d: %d of %d in a fold", c, nt[c], n[c])
			}
		}
	}
	for i, k := range seen {
		if k != 1 {
			t.Fatalf("trial %d in %d test sets", i, k)
		}
	}
	if maxSz-minSz > 1 {
		t.Errorf("fold sizes from %d to %d", minSz, maxSz)
	}
}

// TestBlockedSplits: no block spans train and test; with 20 interleaved
// blocks the stratification stays close (each condition's test share within
// a few trials of the target) and the k-fold test sets still partition.
func TestBlockedSplits(t *testing.T) {
	const T, B = 1200, 30
	cond := randomConds(T, B, 10, 5)
	blocks := make([]int, T)
	for i := range blocks {
		blocks[i] = 100 + i/60 // 20 blocks of 60 consecutive trials, ids 100..119
	}
	side := func(s Split) map[int]string {
		m := map[int]string{}
		for _, x := range s.Train {
			if m[blocks[x]] == "test" {
				t.Fatalf("block %d on both sides", blocks[x])
			}
			m[blocks[x]] = "train"
		}
		for _, x := range s.Test {
			if m[blocks[x]] == "train" {
				t.Fatalf("block %d on both sides", blocks[x])
			}
			m[blocks[x]] = "test"
		}
		return m
	}
	s, err := HoldOut(cond, blocks, B, 0.25, 4)
	if err != nil {
		t.Fatal(err)
	}
	checkSplit(t, s, T)
	side(s)
	if len(s.Test) != 300 {
		t.Errorf("%d test trials, want 300 (5 of 20 blocks of 60)", len(s.Test))
	}
	noTrain, noTest := s.Coverage(cond, B)
	if len(noTrain)+len(noTest) > 0 {
		t.Errorf("conditions missing: train %v test %v", noTrain, noTest)
	}
	folds, err := KFold(cond, blocks, B, 4, 4)
	if err != nil {
		t.Fatal(err)
	}
	seen := make([]int, T)
	for _, f := range folds {
		checkSplit(t, f, T)
		side(f)
		for _, x := range f.Test {
			seen[x]++
		}
		if len(f.Test) != 300 {
			t.Errorf("fold of %d trials, want 300 (5 blocks of 60)", len(f.Test))
		}
	}
	for i, k := range seen {
		if k != 1 {
			t.Fatalf("trial %d in %d test sets", i, k)
		}
	}
}

func TestSplitErrors(t *testing.T) {
	cond := []int{0, 0, 1, 1, 2, 2, 2, 3}
	cases := []struct {
		err  error
		want string
	}{
		{second(HoldOut(cond, nil, 4, 0.2, 1)), "condition 3 has only 1 trial (trial 7, 0-based)"},
		{second(HoldOut(cond, nil, 4, 0, 1)), "test fraction 0"},
		{second(HoldOut(cond, nil, 4, 1, 1)), "test fraction 1"},
		{second(HoldOut(cond, nil, 4, math.NaN(), 1)), "test fraction NaN"},
		{second(HoldOut(cond, nil, 3, 0.5, 1)), "trial 7 (0-based) has condition 3"},
		{second(HoldOut(cond, []int{1, 1, 1, 1, 1, 1, 1, 1}, 4, 0.5, 1)), "at least 2 distinct block ids, found 1"},
		{second(HoldOut(cond, []int{1, 2}, 4, 0.5, 1)), "2 block ids for 8 trials"},
		{secondK(KFold(cond, nil, 4, 1, 1)), "k >= 2"},
		{secondK(KFold(cond, nil, 4, 3, 1)), "condition 0 has 2 trial(s); 3-fold"},
		{secondK(KFold(cond, []int{0, 0, 0, 0, 1, 1, 1, 1}, 4, 3, 1)), "at least 3 distinct block ids, found 2"},
		{secondK(KFold(nil, nil, 4, 3, 1)), "no trials"},
	}
	for i, c := range cases {
		if c.err == nil || !strings.Contains(c.err.Error(), c.want) {
			t.Errorf("case %d: error %v, want %q", i, c.err, c.want)
		}
	}
}

func second(_ Split, err error) error    { return err }
func secondK(_ []Split, err error) error { return err }
