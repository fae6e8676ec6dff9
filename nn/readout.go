package nn

import "fmt"

// Readout is the linear map from the flattened features to every neuron:
//
//	z[r][n] = b[n] + sum_{f<F} w[n][f] * h[r][f]
//
// Shapes: h [R][F], w [N][F], b [N], z [R][N]. Its methods are the plain
// reference loops; Net runs the same arithmetic through a blocked, parallel
// kernel (see Work) that is tested against them.
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

// dot24 returns the eight dot products of the rows a0, a1 with the rows
// x0..x3 (all of length len(a0)), s[2*j+k] = a_k . x_j... laid out as
// s[0..3] = a0.x0..a0.x3 and s[4..7] = a1.x0..a1.x3. Each sum runs in index
// order, so it equals dot bit for bit.
func dot24(s *[8]float64, a0, a1, x0, x1, x2, x3 []float64) {
	n := len(a0)
	a1, x0, x1, x2, x3 = a1[:n], x0[:n], x1[:n], x2[:n], x3[:n]
	var s0, s1, s2, s3, s4, s5, s6, s7 float64
	for i, u := range a0 {
		v := a1[i]
		h0, h1, h2, h3 := x0[i], x1[i], x2[i], x3[i]
		s0 += u * h0
		s1 += u * h1
		s2 += u * h2
		s3 += u * h3
		s4 += v * h0
		s5 += v * h1
		s6 += v * h2
		s7 += v * h3
	}
	*s = [8]float64{s0, s1, s2, s3, s4, s5, s6, s7}
}

// axpy24 computes, for each i,
//
//	y0[i] += c[0]*x0[i] + c[1]*x1[i] + c[2]*x2[i] + c[3]*x3[i]
//	y1[i] += c[4]*x0[i] + c[5]*x1[i] + c[6]*x2[i] + c[7]*x3[i]
//
// with the four products added to y in the order written.
func axpy24(y0, y1 []float64, c *[8]float64, x0, x1, x2, x3 []float64) {
	n := len(y0)
	y1, x0, x1, x2, x3 = y1[:n], x0[:n], x1[:n], x2[:n], x3[:n]
	c0, c1, c2, c3, c4, c5, c6, c7 := c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7]
	for i := range y0 {
		h0, h1, h2, h3 := x0[i], x1[i], x2[i], x3[i]
		y0[i] += c0*h0 + c1*h1 + c2*h2 + c3*h3
		y1[i] += c4*h0 + c5*h1 + c6*h2 + c7*h3
	}
}

// axpy4 computes y[i] += c0*x0[i] + c1*x1[i] + c2*x2[i] + c3*x3[i]: the
// one-output tail of axpy24, with the same order of operations.
func axpy4(y []float64, c0, c1, c2, c3 float64, x0, x1, x2, x3 []float64) {
	n := len(y)
	x0, x1, x2, x3 = x0[:n], x1[:n], x2[:n], x3[:n]
	for i := range y {
		y[i] += c0*x0[i] + c1*x1[i] + c2*x2[i] + c3*x3[i]
	}
}
