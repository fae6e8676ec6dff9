package nn

import (
	"runtime"
	"sync"
)

// Readout partitioning. The neurons are split into nPart contiguous
// partitions, a number that depends only on the neuron count, so that the
// result does not depend on the number of cores. Each partition owns the
// readout weights, biases, gradients and outputs of its neurons, and its own
// buffer for the partial input gradient; the partial buffers are summed in
// partition order.
const (
	maxParts    = 8  // partitions at most
	partNeurons = 64 // neurons per partition at least
	blockN      = 64 // neurons per cache block inside a partition
	serialWork  = 1 << 15
)

func numParts(n int) int {
	p := (n + partNeurons - 1) / partNeurons
	return max(1, min(maxParts, p))
}

const (
	jobForward = iota
	jobBackward
)

// pool runs the readout partitions, on worker goroutines started by
// NewWork when more than one core is available. It holds no pointer to the
// Work, so that a Work dropped by its owner can be collected and its
// cleanup can stop the workers.
type pool struct {
	jobs    chan int
	wg      sync.WaitGroup
	workers int
	nPart   int
	kind    int

	// arguments of the current job
	rows, F, N int
	act        Activation
	h, w, b    []float64 // h [R][F], w [N][F], b [N]
	z, y       []float64 // z [R][N] before, y [R][N] after the activation
	dy         []float64 // [R][N] gradient w.r.t. y
	dw, db     []float64

	dhp [][]float64 // per partition [maxRows][F]
	dzt [][]float64 // per partition [blockN][maxRows]
}

func newPool(maxRows, F, N int) *pool {
	p := &pool{nPart: numParts(N), F: F, N: N}
	p.dhp = make([][]float64, p.nPart)
	p.dzt = make([][]float64, p.nPart)
	for i := range p.dhp {
		p.dhp[i] = make([]float64, maxRows*F)
		p.dzt[i] = make([]float64, blockN*maxRows)
	}
	p.workers = min(runtime.GOMAXPROCS(0), p.nPart)
	if p.workers > 1 {
		p.jobs = make(chan int, p.nPart)
		for range p.workers {
			go p.work()
		}
	}
	return p
}

func (p *pool) work() {
	for part := range p.jobs {
		p.runPart(part)
		p.wg.Done()
	}
}

func (p *pool) stop() {
	if p.jobs != nil {
		close(p.jobs)
	}
}

// run executes the current job on every partition and waits.
func (p *pool) run() {
	if p.workers <= 1 || p.rows*p.F*p.N < serialWork {
		for part := range p.nPart {
			p.runPart(part)
		}
		return
	}
	p.wg.Add(p.nPart)
	for part := range p.nPart {
		p.jobs <- part
	}
	p.wg.Wait()
}

func (p *pool) runPart(part int) {
	lo, hi := part*p.N/p.nPart, (part+1)*p.N/p.nPart
	if p.kind == jobForward {
		p.forwardPart(lo, hi)
	} else {
		p.backwardPart(part, lo, hi)
	}
}

// forwardPart computes z and y for the neurons [lo, hi) and all rows.
func (p *pool) forwardPart(lo, hi int) {
	F, N, rows := p.F, p.N, p.rows
	h, w, b, z := p.h, p.w, p.b, p.z
	var s [8]float64
	n := lo
	for ; n+1 < hi; n += 2 {
		w0, w1 := w[n*F:(n+1)*F], w[(n+1)*F:(n+2)*F]
		r := 0
		for ; r+3 < rows; r += 4 {
			dot24(&s, w0, w1, h[r*F:(r+1)*F], h[(r+1)*F:(r+2)*F], h[(r+2)*F:(r+3)*F], h[(r+3)*F:(r+4)*F])
			for j := range 4 {
				z[(r+j)*N+n] = b[n] + s[j]
				z[(r+j)*N+n+1] = b[n+1] + s[4+j]
			}
		}
		for ; r < rows; r++ {
			hr := h[r*F : (r+1)*F]
			z[r*N+n] = b[n] + dot(w0, hr)
			z[r*N+n+1] = b[n+1] + dot(w1, hr)
		}
	}
	if n < hi {
		w0 := w[n*F : (n+1)*F]
		for r := range rows {
			z[r*N+n] = b[n] + dot(w0, h[r*F:(r+1)*F])
		}
	}
	for r := range rows {
		p.act.Forward(p.y[r*N+lo:r*N+hi], z[r*N+lo:r*N+hi])
	}
}

// backwardPart adds the readout gradients of the neurons [lo, hi) into dw
// and db, and writes their part of the input gradient into dhp[part].
func (p *pool) backwardPart(part, lo, hi int) {
	F, N, rows := p.F, p.N, p.rows
	h, w := p.h, p.w
	dhp := p.dhp[part][:rows*F]
	clear(dhp)
	var c [8]float64
	for blo := lo; blo < hi; blo += blockN {
		bhi := min(blo+blockN, hi)
		nb := bhi - blo
		// g[j][r] = dLoss/dz[r][blo+j], transposed so that a neuron's
		// gradients over rows are contiguous.
		g := p.dzt[part][:nb*rows]
		for r := range rows {
			dy := p.dy[r*N+blo : r*N+bhi]
			switch p.act {
			case Identity:
				for j, v := range dy {
					g[j*rows+r] = v
				}
			case Softplus:
				zr := p.z[r*N+blo : r*N+bhi]
				for j, v := range dy {
					g[j*rows+r] = v * sigmoid(zr[j])
				}
			case Exp:
				yr := p.y[r*N+blo : r*N+bhi]
				for j, v := range dy {
					g[j*rows+r] = v * yr[j]
				}
			}
		}
		for j := range nb {
			var s float64
			for _, v := range g[j*rows : (j+1)*rows] {
				s += v
			}
			p.db[blo+j] += s
		}
		// dw[n] += sum_r g[n][r] h[r], rows in groups of four.
		j := 0
		for ; j+1 < nb; j += 2 {
			n := blo + j
			dw0, dw1 := p.dw[n*F:(n+1)*F], p.dw[(n+1)*F:(n+2)*F]
			g0, g1 := g[j*rows:(j+1)*rows], g[(j+1)*rows:(j+2)*rows]
			r := 0
			for ; r+3 < rows; r += 4 {
				c = [8]float64{g0[r], g0[r+1], g0[r+2], g0[r+3], g1[r], g1[r+1], g1[r+2], g1[r+3]}
				axpy24(dw0, dw1, &c, h[r*F:(r+1)*F], h[(r+1)*F:(r+2)*F], h[(r+2)*F:(r+3)*F], h[(r+3)*F:(r+4)*F])
			}
			for ; r < rows; r++ {
				axpy(dw0, g0[r], h[r*F:(r+1)*F])
				axpy(dw1, g1[r], h[r*F:(r+1)*F])
			}
		}
		if j < nb {
			n := blo + j
			dw0 := p.dw[n*F : (n+1)*F]
			g0 := g[j*rows : (j+1)*rows]
			r := 0
			for ; r+3 < rows; r += 4 {
				axpy4(dw0, g0[r], g0[r+1], g0[r+2], g0[r+3], h[r*F:(r+1)*F], h[(r+1)*F:(r+2)*F], h[(r+2)*F:(r+3)*F], h[(r+3)*F:(r+4)*F])
			}
			for ; r < rows; r++ {
				axpy(dw0, g0[r], h[r*F:(r+1)*F])
			}
		}
		// dhp[r] += sum_n g[n][r] w[n], neurons in groups of four.
		r := 0
		for ; r+1 < rows; r += 2 {
			d0, d1 := dhp[r*F:(r+1)*F], dhp[(r+1)*F:(r+2)*F]
			j := 0
			for ; j+3 < nb; j += 4 {
				n := blo + j
				c = [8]float64{g[j*rows+r], g[(j+1)*rows+r], g[(j+2)*rows+r], g[(j+3)*rows+r],
					g[j*rows+r+1], g[(j+1)*rows+r+1], g[(j+2)*rows+r+1], g[(j+3)*rows+r+1]}
				axpy24(d0, d1, &c, w[n*F:(n+1)*F], w[(n+1)*F:(n+2)*F], w[(n+2)*F:(n+3)*F], w[(n+3)*F:(n+4)*F])
			}
			for ; j < nb; j++ {
				n := blo + j
				axpy(d0, g[j*rows+r], w[n*F:(n+1)*F])
				axpy(d1, g[j*rows+r+1], w[n*F:(n+1)*F])
			}
		}
		if r < rows {
			d0 := dhp[r*F : (r+1)*F]
			j := 0
			for ; j+3 < nb; j += 4 {
				n := blo + j
				axpy4(d0, g[j*rows+r], g[(j+1)*rows+r], g[(j+2)*rows+r], g[(j+3)*rows+r],
					w[n*F:(n+1)*F], w[(n+1)*F:(n+2)*F], w[(n+2)*F:(n+3)*F], w[(n+3)*F:(n+4)*F])
			}
			for ; j < nb; j++ {
				n := blo + j
				axpy(d0, g[j*rows+r], w[n*F:(n+1)*F])
			}
		}
	}
}
