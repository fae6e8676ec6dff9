package projection

import "golang.org/x/sys/cpu"

// tile4x8 is in kernel_amd64.s.
//
//go:noescape
func tile4x8(dst *float64, ldd int, z *float64, ldz int, a *float64, lda int, k int)

// hasTile4x8 reports whether tile4x8 may run (AVX2 and the operating
// system's support of its registers).
var hasTile4x8 = cpu.X86.HasAVX2

// mulTiles computes the rows [0, nb &^ 3) x columns [0, F &^ 7) of
// mulWeights with tile4x8 and returns how many rows and columns it did
// (0, 0 without AVX2).
func mulTiles(dst, z, a []float64, nb, Bt, F int) (rows, cols int) {
	if !hasTile4x8 || Bt == 0 {
		return 0, 0
	}
	rows, cols = nb&^3, F&^7
	for n := 0; n < rows; n += 4 {
		for f := 0; f < cols; f += 8 {
			tile4x8(&dst[n*F+f], F, &z[n*Bt], Bt, &a[f], F, Bt)
		}
	}
	return rows, cols
}
