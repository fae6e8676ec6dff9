package condstats

import "math/rand/v2"

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
