//go:build !amd64

package projection

// mulTiles does nothing without the amd64 kernel: mulWeights falls back
// on gonum's Dgemm.
func mulTiles(dst, z, a []float64, nb, Bt, F int) (rows, cols int) { return 0, 0 }

const hasTile4x8 = false
