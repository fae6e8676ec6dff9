package projection

import (
	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// mulInto writes dst = x a for x (m x k, row stride ldx), a (k x n, row
// stride lda) and dst (m x n, row stride ldd), with the arithmetic of
// gonum's Dgemm, bit for bit: every element is sum_j x[i][j] a[j][c]
// taken over j in ascending order from +0, each product rounded before it
// is added (never fused). On amd64 with AVX2 a kernel in registers
// (kernel_amd64.s, tiles of 4 rows x 8 columns; about 5 times Dgemm's
// speed) does the whole tiles and Go the rest; elsewhere it is Dgemm
// itself. It runs on the calling goroutine. It panics if a slice is too
// short for its shape.
func mulInto(dst []float64, ldd int, x []float64, ldx int, a []float64, lda int, m, k, n int) {
	if m == 0 || n == 0 {
		return
	}
	_ = dst[(m-1)*ldd+n-1]
	if k == 0 {
		for i := 0; i < m; i++ {
			clear(dst[i*ldd : i*ldd+n])
		}
		return
	}
	_, _ = x[(m-1)*ldx+k-1], a[(k-1)*lda+n-1]
	if !hasTile4x8 {
		blas64.Gemm(blas.NoTrans, blas.NoTrans, 1,
			blas64.General{Rows: m, Cols: k, Stride: ldx, Data: x[:(m-1)*ldx+k]},
			blas64.General{Rows: k, Cols: n, Stride: lda, Data: a[:(k-1)*lda+n]}, 0,
			blas64.General{Rows: m, Cols: n, Stride: ldd, Data: dst[:(m-1)*ldd+n]})
		return
	}
	rows, cols := m&^3, n&^7
	for i := 0; i < rows; i += 4 {
		for c := 0; c < cols; c += 8 {
			tile4x8(&dst[i*ldd+c], ldd, &x[i*ldx], ldx, &a[c], lda, k)
		}
	}
	// The columns right of the tiles, then the rows below them.
	for i := 0; i < m; i++ {
		c0 := cols
		if i >= rows {
			c0 = 0
		}
		xi := x[i*ldx : i*ldx+k : i*ldx+k]
		d := dst[i*ldd : i*ldd+n : i*ldd+n]
		for c := c0; c < n; c++ {
			var s float64
			for j, v := range xi {
				s += float64(v * a[j*lda+c])
			}
			d[c] = s
		}
	}
}

// mulSymInto writes dst = x x^T (m x m, row stride ldd) for x (m x k, row
// stride ldx), given xt = x^T in the first m of n >= m columns of a k x n
// matrix (row stride ldt >= n; the columns past m zero or anything), as
// mulInto(dst, ldd, x, ldx, xt, ldt, m, k, m) writes it, bit for bit:
// every element is the same sum in the same order, and element (i, c)
// equals element (c, i) because each product x[i][j] x[c][j] is the same
// number either way round. With the AVX2 kernel only the tiles that reach
// the diagonal or lie right of it are computed (56 of 105 at m = 60), over
// n columns (so that with n a multiple of 8 no column is left to the
// scalar loop; dst then needs ldd >= n, and its columns past m are
// overwritten with junk), and the rest is copied across the diagonal;
// elsewhere it is mulInto.
func mulSymInto(dst []float64, ldd int, x []float64, ldx int, xt []float64, ldt int, m, k, n int) {
	if !hasTile4x8 || m == 0 || k == 0 {
		mulInto(dst, ldd, x, ldx, xt, ldt, m, k, m)
		return
	}
	if n < m || ldt < n || (n&^7 > m && ldd < n&^7) {
		panic("projection: mulSymInto: bad padding")
	}
	_, _, _ = dst[(m-1)*ldd+m-1], x[(m-1)*ldx+k-1], xt[(k-1)*ldt+n-1]
	rows, cols := m&^3, n&^7
	for i := 0; i < rows; i += 4 {
		for c := i &^ 7; c < cols; c += 8 {
			tile4x8(&dst[i*ldd+c], ldd, &x[i*ldx], ldx, &xt[c], ldt, k)
		}
	}
	// The columns right of the tiles, then the rows below them: only on
	// and right of the diagonal.
	for i := 0; i < m; i++ {
		c0 := max(cols, i)
		if i >= rows {
			c0 = i
		}
		xi := x[i*ldx : i*ldx+k : i*ldx+k]
		d := dst[i*ldd : i*ldd+m : i*ldd+m]
		for c := c0; c < m; c++ {
			var s float64
			for j, v := range xi {
				s += float64(v * xt[j*ldt+c])
			}
			d[c] = s
		}
	}
	for i := 1; i < m; i++ {
		for c := 0; c < i; c++ {
			dst[i*ldd+c] = dst[c*ldd+i]
		}
	}
}
