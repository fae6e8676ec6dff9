package nn

import "fmt"

// Readout is the linear map from the flattened features to every neuron:
//
//	z[r][n] = b[n] + sum_{f<F} w[n][f] * h[r][f]
//
// Shapes: h [R][F], w [N][F], b [N], z [R][N]. Its methods are the plain
// reference loops; Net runs the same arithmetic through a cache-blocked,
// partitioned kernel on gonum's blas64.Gemv (see Work), tested against them.
type Readout struct {
	Features, Neurons int
}

func (l Readout) check(h, w, b []float64, rows int) {
	if l.Features < 1 || l.Neurons < 1 {
		panic(fmt.Sprintf("nn: readout shape %d features x %d neurons", l.Features, l.Neurons))
	}
	if rows < 0 {
		panic(fmt.Sprintf("nn: negative row count %d", rows))
	}
	if len(h) < rows*l.Features {
		panic(fmt.Sprintf("nn: readout input has %d values, want %d rows x %d", len(h), rows, l.Features))
	}
	if len(w) != l.Neurons*l.Features {
		panic(fmt.Sprintf("nn: readout weights have %d values, want %d x %d", len(w), l.Neurons, l.Features))
	}
	if len(b) != l.Neurons {
		panic(fmt.Sprintf("nn: readout bias has %d values, want %d", len(b), l.Neurons))
	}
}

// Forward computes z = h w^T + b, overwriting z[:R*N]. It panics on short
// slices.
func (l Readout) Forward(z, h, w, b []float64, rows int) {
	l.check(h, w, b, rows)
	F, N := l.Features, l.Neurons
	if len(z) < rows*N {
		panic(fmt.Sprintf("nn: readout output has %d values, want %d rows x %d", len(z), rows, N))
	}
	for r := 0; r < rows; r++ {
		hr := h[r*F : (r+1)*F]
		for n := 0; n < N; n++ {
			z[r*N+n] = b[n] + dot(w[n*F:(n+1)*F], hr)
		}
	}
}

// Backward back-propagates dz [R][N]. It ADDS
//
//	dw[n][f] += sum_r dz[r][n] h[r][f],  db[n] += sum_r dz[r][n],
//	dh[r][f] += sum_n dz[r][n] w[n][f].
//
// dh may be nil. It panics on short slices.
func (l Readout) Backward(dh, dw, db, dz, h, w []float64, rows int) {
	l.check(h, w, db, rows)
	F, N := l.Features, l.Neurons
	if len(dw) != N*F || len(dz) < rows*N || (dh != nil && len(dh) < rows*F) {
		panic(fmt.Sprintf("nn: readout backward lengths dw %d, dz %d, dh %d", len(dw), len(dz), len(dh)))
	}
	for r := 0; r < rows; r++ {
		hr := h[r*F : (r+1)*F]
		for n := 0; n < N; n++ {
			g := dz[r*N+n]
			db[n] += g
			axpy(dw[n*F:(n+1)*F], g, hr)
			if dh != nil {
				axpy(dh[r*F:(r+1)*F], g, w[n*F:(n+1)*F])
			}
		}
	}
}

// dot returns sum_i x[i]*y[i], summed in index order.
func dot(x, y []float64) float64 {
	y = y[:len(x)]
	var s float64
	for i, v := range x {
		s += v * y[i]
	}
	return s
}

// axpy computes y += a*x.
func axpy(y []float64, a float64, x []float64) {
	x = x[:len(y)]
	for i := range y {
		y[i] += a * x[i]
	}
}
