package export

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"strconv"
	"strings"
)

// DefaultNeurons is the neuron selection of the tuning figures when none
// is given: the three neurons with the highest test_r2 and the one with the
// lowest.
const DefaultNeurons = "best 3,worst 1"

// SelectNeurons turns a selection into neuron indices (0-based), in the
// order given and without repeats. sel is a comma-separated list of items:
//
//	17         neuron 17 (0-based)
//	best K     the K neurons with the highest score (K defaults to 1)
//	worst K    the K neurons with the lowest score
//	random K   K neurons drawn at random with the given seed
//
// Rankings use score (one value per neuron, e.g. test_r2); neurons whose
// score is NaN are never chosen by best, worst or random. Errors name the
// item.
func SelectNeurons(sel string, score []float64, seed uint64) ([]int, error) {
	n := len(score)
	var ranked []int // finite scores, highest first; ties by index
	for j, v := range score {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			ranked = append(ranked, j)
		}
	}
	sort.SliceStable(ranked, func(a, b int) bool { return score[ranked[a]] > score[ranked[b]] })
	var out []int
	seen := map[int]bool{}
	add := func(j int) {
		if !seen[j] {
			seen[j] = true
			out = append(out, j)
		}
	}
	for _, item := range strings.Split(sel, ",") {
		f := strings.Fields(item)
		if len(f) == 0 {
			continue
		}
		if len(f) == 1 {
			if j, err := strconv.Atoi(f[0]); err == nil {
				if j < 0 || j >= n {
					return nil, fmt.Errorf("neuron %d out of range (%d neurons, numbered from 0)", j, n)
				}
				add(j)
				continue
			}
		}
		k := 1
		if len(f) == 2 {
			var err error
			if k, err = strconv.Atoi(f[1]); err != nil || k < 1 {
				return nil, fmt.Errorf("neuron selection %q: the count must be a positive whole number", strings.TrimSpace(item))
			}
		}
		if len(f) > 2 {
			return nil, fmt.Errorf("neuron selection %q: want an index, \"best K\", \"worst K\" or \"random K\"", strings.TrimSpace(item))
		}
		k = min(k, len(ranked))
		switch f[0] {
		case "best":
			for _, j := range ranked[:k] {
				add(j)
			}
		case "worst":
			for i := len(ranked) - 1; i >= len(ranked)-k; i-- {
				add(ranked[i])
			}
		case "random":
			pool := slices.Clone(ranked)
			slices.Sort(pool)
			rng := rand.New(rand.NewPCG(seed, 0x5e1ec7))
			rng.Shuffle(len(pool), func(a, b int) { pool[a], pool[b] = pool[b], pool[a] })
			for _, j := range pool[:k] {
				add(j)
			}
		default:
			return nil, fmt.Errorf("neuron selection %q: want an index, \"best K\", \"worst K\" or \"random K\"", strings.TrimSpace(item))
		}
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("neuron selection %q chose no neuron", sel)
	}
	return out, nil
}
