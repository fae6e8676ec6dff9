package projection

import (
	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// mulWeights writes dst = z a: dst (nb x F), z (nb x Bt), a (Bt x F), all
// row-major, with the arithmetic of gonum's Dgemm, bit for bit: every
// element is sum_j z[n][j] a[j][f] taken over j in ascending order from
// +0, each product rounded before it is added (never fused). On amd64 with
// AVX2 a kernel in registers (kernel_amd64.s, tiles of 4 neurons x 8
// features, about 5 times Dgemm's speed) does the whole tiles and Go the
// rest; elsewhere it is Dgemm itself. It runs on the calling goroutine.
// It panics if a slice is too short.
func mulWeights(dst, z, a []float64, nb, Bt, F int) {
	if nb == 0 || F == 0 {
		return
	}
	if Bt == 0 {
		clear(dst[:nb*F])
		return
	}
	_, _, _ = dst[nb*F-1], z[nb*Bt-1], a[Bt*F-1]
	if !hasTile4x8 {
		blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(z[:nb*Bt], nb, Bt), gen(a[:Bt*F], Bt, F), 0, gen(dst[:nb*F], nb, F))
		return
	}
	rows, cols := mulTiles(dst, z, a, nb, Bt, F)
	// The columns right of the tiles, then the rows below them.
	for n := 0; n < nb; n++ {
		f0 := cols
		if n >= rows {
			f0 = 0
		}
		zn := z[n*Bt : n*Bt+Bt : n*Bt+Bt]
		d := dst[n*F : n*F+F : n*F+F]
		for f := f0; f < F; f++ {
			var c float64
			for j, x := range zn {
				c += float64(x * a[j*F+f])
			}
			d[f] = c
		}
	}
}
