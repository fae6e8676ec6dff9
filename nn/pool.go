package nn

import (
	"runtime"
	"sync"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
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
	g   [][]float64 // per partition [maxRows][blockN], dLoss/dz of one block
	gt  [][]float64 // per partition [blockN][maxRows], the same transposed
}

func newPool(maxRows, F, N int) *pool {
	p := &pool{nPart: numParts(N), F: F, N: N}
	p.dhp = make([][]float64, p.nPart)
	p.g = make([][]float64, p.nPart)
	p.gt = make([][]float64, p.nPart)
	for i := range p.dhp {
		p.dhp[i] = make([]float64, maxRows*F)
		p.g[i] = make([]float64, blockN*maxRows)
		p.gt[i] = make([]float64, blockN*maxRows)
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

// forwardPart computes z and y for the neurons [lo, hi) and all rows, one
// cache block of blockN neurons at a time: z[r][blk] = b[blk] + W[blk] h[r]
// (gonum blas64.Gemv, no transpose).
func (p *pool) forwardPart(lo, hi int) {
	F, N, rows := p.F, p.N, p.rows
	for blo := lo; blo < hi; blo += blockN {
		bhi := min(blo+blockN, hi)
		a := blas64.General{Rows: bhi - blo, Cols: F, Stride: F, Data: p.w[blo*F : bhi*F]}
		for r := range rows {
			zr := p.z[r*N+blo : r*N+bhi]
			copy(zr, p.b[blo:bhi])
			blas64.Gemv(blas.NoTrans, 1, a, blas64.Vector{N: F, Inc: 1, Data: p.h[r*F : (r+1)*F]},
				1, blas64.Vector{N: bhi - blo, Inc: 1, Data: zr})
			p.act.Forward(p.y[r*N+blo:r*N+bhi], zr)
		}
	}
}

// backwardPart adds the readout gradients of the neurons [lo, hi) into dw
// and db, and writes their part of the input gradient into dhp[part], one
// cache block of blockN neurons at a time:
//
//	g[r][n]  = dy[r][n] * f'(z[r][n])
//	db[n]   += sum_r g[r][n]
//	dw[n]   += H^T g[:, n]        (blas64.Gemv, transposed H [R][F])
//	dhp[r]  += W[blk]^T g[r, blk] (blas64.Gemv, transposed W block)
func (p *pool) backwardPart(part, lo, hi int) {
	F, N, rows := p.F, p.N, p.rows
	dhp := p.dhp[part][:rows*F]
	clear(dhp)
	hm := blas64.General{Rows: rows, Cols: F, Stride: F, Data: p.h[:rows*F]}
	for blo := lo; blo < hi; blo += blockN {
		bhi := min(blo+blockN, hi)
		nb := bhi - blo
		g := p.g[part][:rows*nb]   // [R][nb]
		gt := p.gt[part][:nb*rows] // [nb][R]
		for r := range rows {
			p.act.Backward(g[r*nb:(r+1)*nb], p.dy[r*N+blo:r*N+bhi], p.z[r*N+blo:r*N+bhi], p.y[r*N+blo:r*N+bhi])
			for j, v := range g[r*nb : (r+1)*nb] {
				gt[j*rows+r] = v
			}
		}
		for j := range nb {
			n := blo + j
			var s float64
			for _, v := range gt[j*rows : (j+1)*rows] {
				s += v
			}
			p.db[n] += s
			blas64.Gemv(blas.Trans, 1, hm, blas64.Vector{N: rows, Inc: 1, Data: gt[j*rows : (j+1)*rows]},
				1, blas64.Vector{N: F, Inc: 1, Data: p.dw[n*F : (n+1)*F]})
		}
		wb := blas64.General{Rows: nb, Cols: F, Stride: F, Data: p.w[blo*F : bhi*F]}
		for r := range rows {
			blas64.Gemv(blas.Trans, 1, wb, blas64.Vector{N: nb, Inc: 1, Data: g[r*nb : (r+1)*nb]},
				1, blas64.Vector{N: F, Inc: 1, Data: dhp[r*F : (r+1)*F]})
		}
	}
}
