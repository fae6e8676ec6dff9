package data

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
)

// Split is a division of trial indices into a training and a test set, each
// sorted ascending.
type Split struct{ Train, Test []int }

// newRNG returns the package's deterministic generator for a seed.
func newRNG(seed uint64) *rand.Rand {
	return rand.New(rand.NewPCG(seed, 0x73747269615f7370)) // second word: "stria_sp"
}

// groupByCond returns the trials of each condition in ascending order.
func groupByCond(cond []int, nbins int) ([][]int, error) {
	if nbins < 1 {
		return nil, fmt.Errorf("data: number of conditions %d must be at least 1", nbins)
	}
	if len(cond) == 0 {
		return nil, fmt.Errorf("data: no trials to split")
	}
	g := make([][]int, nbins)
	for t, c := range cond {
		if c < 0 || c >= nbins {
			return nil, fmt.Errorf("data: trial %d (0-based) has condition %d, outside [0, %d)", t, c, nbins)
		}
		g[c] = append(g[c], t)
	}
	return g, nil
}

// blockTable numbers the distinct block ids (in ascending id order) and
// counts the trials of each condition in each block.
type blockTable struct {
	ids    []int   // distinct block ids, ascending
	of     []int   // of[t]: block index of trial t
	counts [][]int // counts[b][c]
	size   []int   // trials per block
	nCond  []int   // trials per condition
}

func newBlockTable(cond, blocks []int, nbins int) (*blockTable, error) {
	if len(blocks) != len(cond) {
		return nil, fmt.Errorf("data: %d block ids for %d trials; need one per trial", len(blocks), len(cond))
	}
	ids := slices.Clone(blocks)
	slices.Sort(ids)
	ids = slices.Compact(ids)
	bt := &blockTable{ids: ids, of: make([]int, len(cond)), counts: make([][]int, len(ids)), size: make([]int, len(ids)), nCond: make([]int, nbins)}
	for b := range bt.counts {
		bt.counts[b] = make([]int, nbins)
	}
	for t, id := range blocks {
		b, _ := slices.BinarySearch(ids, id)
		bt.of[t] = b
		bt.counts[b][cond[t]]++
		bt.size[b]++
		bt.nCond[cond[t]]++
	}
	return bt, nil
}

func checkFrac(f float64) error {
	if !(f > 0 && f < 1) {
		return fmt.Errorf("data: test fraction %g must be strictly between 0 and 1", f)
	}
	return nil
}

// HoldOut splits the trials into a training and a test set, putting about
// testFrac of each condition's trials in Test. cond[t] in [0, nbins) is the
// condition of trial t. The result depends only on the inputs and seed.
//
// Without blocks (blocks == nil) each condition is shuffled and its first
// n_test trials go to Test, where n_test is testFrac*n_c rounded so that the
// running total over conditions stays within half a trial of testFrac times
// the running trial count, then clamped to [1, n_c-1]: every condition has
// at least one trial on each side and its test count is within one trial of
// testFrac*n_c. A condition with exactly one trial is an error (naming it);
// conditions with none are skipped (Check reports them).
//
// With blocks (one id per trial, e.g. the repeat or recording block), all
// trials with the same block id go to the same side, so slow drift within a
// session cannot make training and test trials look alike. Blocks are
// chosen by a seeded local search that brings each condition's test count,
// and the total, as close to testFrac as whole blocks allow. Fewer than two
// distinct blocks is an error; a condition that cannot appear on both sides
// is not (see Split.Coverage).
func HoldOut(cond, blocks []int, nbins int, testFrac float64, seed uint64) (Split, error) {
	if err := checkFrac(testFrac); err != nil {
		return Split{}, err
	}
	groups, err := groupByCond(cond, nbins)
	if err != nil {
		return Split{}, err
	}
	rng := newRNG(seed)
	if blocks != nil {
		bt, err := newBlockTable(cond, blocks, nbins)
		if err != nil {
			return Split{}, err
		}
		if len(bt.ids) < 2 {
			return Split{}, fmt.Errorf("data: a blocked hold-out split needs at least 2 distinct block ids, found %d", len(bt.ids))
		}
		inTest := bt.holdOut(testFrac, rng)
		var s Split
		for t := range cond {
			if inTest[bt.of[t]] {
				s.Test = append(s.Test, t)
			} else {
				s.Train = append(s.Train, t)
			}
		}
		return s, nil
	}
	for c, g := range groups {
		if len(g) == 1 {
			return Split{}, fmt.Errorf("data: condition %d has only 1 trial (trial %d, 0-based); a hold-out split needs at least 2", c, g[0])
		}
	}
	var s Split
	cum, prev := 0.0, 0
	for _, g := range groups {
		if len(g) == 0 {
			continue
		}
		g = slices.Clone(g)
		rng.Shuffle(len(g), func(i, j int) { g[i], g[j] = g[j], g[i] })
		cum += testFrac * float64(len(g))
		r := int(math.Round(cum))
		nt := r - prev
		prev = r
		nt = max(1, min(nt, len(g)-1))
		s.Test = append(s.Test, g[:nt]...)
		s.Train = append(s.Train, g[nt:]...)
	}
	sort.Ints(s.Test)
	sort.Ints(s.Train)
	return s, nil
}

// holdOut picks the test blocks. The cost is
//
//	sum_c (T_c - f n_c)^2 / n_c + (T - f N)^2 / N + 10 * #{c : n_c >= 2, T_c = 0 or T_c = n_c}
//
// with T_c the condition's test trials and T the total; the last term asks
// for every condition on both sides where the blocks allow it.
func (bt *blockTable) holdOut(f float64, rng *rand.Rand) []bool {
	nb := len(bt.ids)
	total := len(bt.of)
	in := make([]bool, nb)
	tc := make([]int, len(bt.nCond))
	tt := 0
	cost := func() float64 {
		var s float64
		for c, n := range bt.nCond {
			if n == 0 {
				continue
			}
			d := float64(tc[c]) - f*float64(n)
			s += d * d / float64(n)
			if n >= 2 && (tc[c] == 0 || tc[c] == n) {
				s += 10
			}
		}
		d := float64(tt) - f*float64(total)
		return s + d*d/float64(total)
	}
	flip := func(b int) {
		sign := 1
		if in[b] {
			sign = -1
		}
		in[b] = !in[b]
		for c, k := range bt.counts[b] {
			tc[c] += sign * k
		}
		tt += sign * bt.size[b]
	}
	order := rng.Perm(nb)
	ntest := 0
	for _, b := range order {
		if float64(tt+bt.size[b]/2) > f*float64(total) && ntest > 0 || ntest == nb-1 {
			break
		}
		flip(b)
		ntest++
	}
	best := cost()
	const eps = 1e-12
	for pass := 0; pass < 100; pass++ {
		improved := false
		for _, b := range rng.Perm(nb) {
			// Toggle b, keeping at least one block on each side.
			if (in[b] && ntest > 1) || (!in[b] && ntest < nb-1) {
				flip(b)
				if c := cost(); c < best-eps {
					best = c
					improved = true
					if in[b] {
						ntest++
					} else {
						ntest--
					}
					continue
				}
				flip(b)
			}
			if nb > 200 {
				continue // swaps cost nb^2 per pass; toggles suffice for many blocks
			}
			for _, o := range order {
				if in[o] == in[b] {
					continue
				}
				flip(b)
				flip(o)
				if c := cost(); c < best-eps {
					best = c
					improved = true
					break
				}
				flip(o)
				flip(b)
			}
		}
		if !improved {
			break
		}
	}
	return in
}

// KFold returns k splits whose Test sets partition all trials, stratified
// by condition: without blocks each condition's shuffled trials are dealt to
// the folds in turn (starting where the previous condition stopped, so the
// folds' sizes differ by at most one), and every condition has floor or ceil
// of n_c/k trials in each fold. A condition with fewer than k trials (but at
// least one) is an error naming it.
//
// With blocks, whole blocks are assigned to folds (largest first, each to the
// fold whose per-condition and total counts it brings closest to 1/k of the
// data, then improved by moving and swapping blocks); at least k distinct
// blocks are needed. Errors: k < 2, condition ids outside [0, nbins).
func KFold(cond, blocks []int, nbins, k int, seed uint64) ([]Split, error) {
	if k < 2 {
		return nil, fmt.Errorf("data: k-fold cross-validation needs k >= 2, got %d", k)
	}
	groups, err := groupByCond(cond, nbins)
	if err != nil {
		return nil, err
	}
	if k > len(cond) {
		return nil, fmt.Errorf("data: %d folds for only %d trials", k, len(cond))
	}
	rng := newRNG(seed)
	fold := make([]int, len(cond)) // fold[t]: the fold whose test set holds trial t
	if blocks != nil {
		bt, err := newBlockTable(cond, blocks, nbins)
		if err != nil {
			return nil, err
		}
		if len(bt.ids) < k {
			return nil, fmt.Errorf("data: %d-fold blocked cross-validation needs at least %d distinct block ids, found %d", k, k, len(bt.ids))
		}
		bf := bt.kfold(k, rng)
		for t := range cond {
			fold[t] = bf[bt.of[t]]
		}
	} else {
		for c, g := range groups {
			if len(g) > 0 && len(g) < k {
				return nil, fmt.Errorf("data: condition %d has %d trial(s); %d-fold cross-validation needs at least %d per condition (use fewer folds or wider bins)", c, len(g), k, k)
			}
		}
		next := 0
		for _, g := range groups {
			g = slices.Clone(g)
			rng.Shuffle(len(g), func(i, j int) { g[i], g[j] = g[j], g[i] })
			for _, t := range g {
				fold[t] = next
				next = (next + 1) % k
			}
		}
	}
	splits := make([]Split, k)
	for t, j := range fold {
		for i := range splits {
			if i == j {
				splits[i].Test = append(splits[i].Test, t)
			} else {
				splits[i].Train = append(splits[i].Train, t)
			}
		}
	}
	return splits, nil
}

// kfold assigns blocks to k folds; see KFold. Cost per fold j:
//
//	sum_c (F_jc - n_c/k)^2 / n_c + (S_j - N/k)^2 / N
func (bt *blockTable) kfold(k int, rng *rand.Rand) []int {
	nb := len(bt.ids)
	nc := len(bt.nCond)
	total := float64(len(bt.of))
	fc := make([][]int, k)
	for j := range fc {
		fc[j] = make([]int, nc)
	}
	fs := make([]int, k)
	nblk := make([]int, k)
	foldCost := func(j int) float64 {
		var s float64
		for c, n := range bt.nCond {
			if n == 0 {
				continue
			}
			d := float64(fc[j][c]) - float64(n)/float64(k)
			s += d * d / float64(n)
		}
		d := float64(fs[j]) - total/float64(k)
		return s + d*d/total
	}
	add := func(b, j, sign int) {
		for c, x := range bt.counts[b] {
			fc[j][c] += sign * x
		}
		fs[j] += sign * bt.size[b]
		nblk[j] += sign
	}
	assign := make([]int, nb)
	order := rng.Perm(nb)
	sort.SliceStable(order, func(a, b int) bool { return bt.size[order[a]] > bt.size[order[b]] })
	empty := k
	for i, b := range order {
		mustFill := nb-i == empty
		bestJ, bestD := -1, math.Inf(1)
		for j := 0; j < k; j++ {
			if mustFill && nblk[j] > 0 {
				continue
			}
			before := foldCost(j)
			add(b, j, 1)
			d := foldCost(j) - before
			add(b, j, -1)
			if d < bestD {
				bestJ, bestD = j, d
			}
		}
		if nblk[bestJ] == 0 {
			empty--
		}
		add(b, bestJ, 1)
		assign[b] = bestJ
	}
	const eps = 1e-12
	for pass := 0; pass < 50 && nb <= 2000; pass++ {
		improved := false
		for _, b := range rng.Perm(nb) {
			a := assign[b]
			// Move b to another fold, keeping every fold non-empty.
			if nblk[a] > 1 {
				for j := 0; j < k; j++ {
					if j == a {
						continue
					}
					before := foldCost(a) + foldCost(j)
					add(b, a, -1)
					add(b, j, 1)
					if foldCost(a)+foldCost(j) < before-eps {
						assign[b] = j
						a = j
						improved = true
						break
					}
					add(b, j, -1)
					add(b, a, 1)
				}
			}
			if nb > 300 {
				continue
			}
			// Swap b with a block of another fold.
			for o := 0; o < nb; o++ {
				j := assign[o]
				if j == a {
					continue
				}
				before := foldCost(a) + foldCost(j)
				add(b, a, -1)
				add(o, j, -1)
				add(b, j, 1)
				add(o, a, 1)
				if foldCost(a)+foldCost(j) < before-eps {
					assign[b], assign[o] = j, a
					improved = true
					break
				}
				add(o, a, -1)
				add(b, j, -1)
				add(o, j, 1)
				add(b, a, 1)
			}
		}
		if !improved {
			break
		}
	}
	return assign
}

// Coverage lists the conditions that have trials but none in Train
// (noTrain) or none in Test (noTest). Blocked splits can leave a condition
// on one side only; callers should warn, since per-condition test metrics
// skip such conditions. It panics if a condition id is outside [0, nbins).
func (s Split) Coverage(cond []int, nbins int) (noTrain, noTest []int) {
	inTrain := make([]bool, nbins)
	inTest := make([]bool, nbins)
	for _, t := range s.Train {
		inTrain[cond[t]] = true
	}
	for _, t := range s.Test {
		inTest[cond[t]] = true
	}
	has := make([]bool, nbins)
	for _, c := range cond {
		has[c] = true
	}
	for c := 0; c < nbins; c++ {
		if !has[c] {
			continue
		}
		if !inTrain[c] {
			noTrain = append(noTrain, c)
		}
		if !inTest[c] {
			noTest = append(noTest, c)
		}
	}
	return noTrain, noTest
}
