package nn

import (
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
)

// Shape describes a Net.
type Shape struct {
	In      int        // input channels of the first conv layer (1 for a one-hot stimulus)
	Length  int        // positions along the stimulus axis, L
	Convs   []ConvSpec // >= 1 layers; each is followed by a ReLU
	Neurons int        // readout size N
	Output  Activation
}

// Net is the population encoder
//
//	x [R][In][L] -> (Conv1D -> ReLU) per ConvSpec -> flatten -> Readout -> Output
//
// The flatten is channel-major: feature c*M+i of a row is channel c,
// position i of the last conv layer's output (length M), as torch's
// x.flatten(1) orders an (R, C, M) tensor.
//
// All parameters live in Params, their gradients in Grads with the same
// layout: for each conv layer its weights [Out][In][K] then its bias [Out];
// then the readout weights [Neurons][Features], then the readout bias
// [Neurons]. ConvW, ConvB, ReadW, ReadB and the ...Grad methods return views
// into these slices.
type Net struct {
	Shape
	Params []float64
	Grads  []float64

	convs        []Conv1D
	wOff, bOff   []int
	rwOff, rbOff int
	feat         int
}

// NewNet returns a Net of the given shape with all parameters zero. It
// panics with an "nn: " message on a bad shape: In, Length or Neurons < 1, no
// conv layer, a layer with Out, K or Stride < 1 or an unknown border, a
// Valid layer whose kernel is longer than its input, or an unknown Output.
// The Convs slice is copied.
func NewNet(s Shape) *Net {
	if s.In < 1 {
		panic(fmt.Sprintf("nn: input channels %d < 1", s.In))
	}
	if s.Length < 1 {
		panic(fmt.Sprintf("nn: input length %d < 1", s.Length))
	}
	if len(s.Convs) == 0 {
		panic("nn: a Net needs at least one conv layer")
	}
	if s.Neurons < 1 {
		panic(fmt.Sprintf("nn: neuron count %d < 1", s.Neurons))
	}
	s.Output.check()
	s.Convs = append([]ConvSpec(nil), s.Convs...)
	n := &Net{Shape: s}
	in, length, off := s.In, s.Length, 0
	for i, cs := range s.Convs {
		c := Conv1D{In: in, Out: cs.Out, K: cs.K, Stride: cs.Stride, Length: length, Border: cs.Border}
		func() {
			defer func() {
				if e := recover(); e != nil {
					panic(fmt.Sprintf("%v (conv layer %d)", e, i))
				}
			}()
			c.Check()
		}()
		n.convs = append(n.convs, c)
		n.wOff = append(n.wOff, off)
		off += c.WeightLen()
		n.bOff = append(n.bOff, off)
		off += c.Out
		in, length = c.Out, c.OutLen()
	}
	n.feat = in * length
	n.rwOff = off
	off += s.Neurons * n.feat
	n.rbOff = off
	off += s.Neurons
	n.Params = make([]float64, off)
	n.Grads = make([]float64, off)
	return n
}

// Init sets every parameter to a uniform draw from [-1/sqrt(fan_in),
// 1/sqrt(fan_in)), with fan_in = In*K for a conv layer (weights and bias)
// and Features for the readout: the default initialisation of torch's
// Conv1d and Linear [from memory, not checked against torch]. Draws are
// taken in the order of Params: InitConvs first, then the readout.
func (n *Net) Init(rng *rand.Rand) {
	n.InitConvs(rng)
	bound := 1 / math.Sqrt(float64(n.feat))
	uniform(rng, n.ReadW(), bound)
	uniform(rng, n.ReadB(), bound)
}

// InitConvs draws the conv weights and biases as Init does, in the same
// order and from the same stream, and leaves the readout untouched: a
// solver that computes the readout itself starts from the same filters as
// one that calls Init with an equally seeded generator, without drawing
// (and touching the memory of) the Neurons x Features readout.
func (n *Net) InitConvs(rng *rand.Rand) {
	for l, c := range n.convs {
		bound := 1 / math.Sqrt(float64(c.In*c.K))
		uniform(rng, n.ConvW(l), bound)
		uniform(rng, n.ConvB(l), bound)
	}
}

func uniform(rng *rand.Rand, dst []float64, bound float64) {
	for i := range dst {
		dst[i] = bound * (2*rng.Float64() - 1)
	}
}

// ZeroGrad sets every gradient to zero (allocating Grads again after
// ReleaseGrads).
func (n *Net) ZeroGrad() {
	if len(n.Grads) != len(n.Params) {
		n.Grads = make([]float64, len(n.Params))
		return
	}
	clear(n.Grads)
}

// ReleaseGrads drops the gradient buffer (as large as Params) of a net
// that will only predict from now on; ZeroGrad allocates it again. Until
// then Grads is nil, and Backward, BackwardFeatures and the ...Grad views
// panic.
func (n *Net) ReleaseGrads() { n.Grads = nil }

// checkGrads panics after ReleaseGrads.
func (n *Net) checkGrads() {
	if len(n.Grads) != len(n.Params) {
		panic("nn: the gradients were released (ReleaseGrads): call ZeroGrad first")
	}
}

// Features returns the readout input size F = C_last * M_last.
func (n *Net) Features() int { return n.feat }

// Conv returns conv layer i as a standalone Conv1D.
func (n *Net) Conv(layer int) Conv1D { return n.convs[n.layer(layer)] }

// OutLen returns the output length of conv layer i.
func (n *Net) OutLen(layer int) int { return n.convs[n.layer(layer)].OutLen() }

func (n *Net) layer(i int) int {
	if i < 0 || i >= len(n.convs) {
		panic(fmt.Sprintf("nn: conv layer %d out of range [0, %d)", i, len(n.convs)))
	}
	return i
}

// ConvW returns the weights [Out][In][K] of conv layer i (a view into Params).
func (n *Net) ConvW(i int) []float64 {
	i = n.layer(i)
	return n.Params[n.wOff[i]:n.bOff[i]:n.bOff[i]]
}

// ConvB returns the bias [Out] of conv layer i (a view into Params).
func (n *Net) ConvB(i int) []float64 {
	i = n.layer(i)
	o := n.bOff[i]
	return n.Params[o : o+n.convs[i].Out : o+n.convs[i].Out]
}

// ReadW returns the readout weights [Neurons][Features] (a view into Params).
func (n *Net) ReadW() []float64 { return n.Params[n.rwOff:n.rbOff:n.rbOff] }

// ReadB returns the readout bias [Neurons] (a view into Params).
func (n *Net) ReadB() []float64 { return n.Params[n.rbOff:] }

// ConvWGrad returns the gradient view matching ConvW(i).
func (n *Net) ConvWGrad(i int) []float64 {
	i = n.layer(i)
	n.checkGrads()
	return n.Grads[n.wOff[i]:n.bOff[i]:n.bOff[i]]
}

// ConvBGrad returns the gradient view matching ConvB(i).
func (n *Net) ConvBGrad(i int) []float64 {
	i = n.layer(i)
	o := n.bOff[i]
	n.checkGrads()
	return n.Grads[o : o+n.convs[i].Out : o+n.convs[i].Out]
}

// ReadWGrad returns the gradient view matching ReadW.
func (n *Net) ReadWGrad() []float64 {
	n.checkGrads()
	return n.Grads[n.rwOff:n.rbOff:n.rbOff]
}

// ReadBGrad returns the gradient view matching ReadB.
func (n *Net) ReadBGrad() []float64 {
	n.checkGrads()
	return n.Grads[n.rbOff:]
}

// Work holds the activations of up to MaxRows rows of one Net, saved by a
// forward pass for the backward pass, and the scratch space of the readout
// kernel. It is reused between calls, so that a training step allocates
// nothing. A Work belongs to the Net that made it and is not safe for
// concurrent use. When more than one core is available (GOMAXPROCS > 1) it
// owns worker goroutines for the readout; they stop once the Work is
// garbage collected.
type Work struct {
	MaxRows int

	net  *Net
	x    []float64   // [MaxRows][In][L], copy of the input
	h    [][]float64 // per layer [MaxRows][O][M], post-ReLU
	dh   [][]float64 // per layer, gradient w.r.t. h, then w.r.t. the pre-ReLU
	z, y []float64   // [MaxRows][N] readout output before and after Output (one buffer for Identity)
	dH   []float64   // [MaxRows][F] readout input gradient
	rows int         // rows of the last forward pass, -1 if none
	full bool        // the last forward pass ran the readout
	pool *pool
}

// NewWork returns a Work for batches of up to maxRows rows. It panics if
// maxRows < 1.
func (n *Net) NewWork(maxRows int) *Work {
	if maxRows < 1 {
		panic(fmt.Sprintf("nn: NewWork with maxRows %d < 1", maxRows))
	}
	w := &Work{MaxRows: maxRows, net: n, rows: -1}
	w.x = make([]float64, maxRows*n.In*n.Length)
	for _, c := range n.convs {
		w.h = append(w.h, make([]float64, maxRows*c.Out*c.OutLen()))
		w.dh = append(w.dh, make([]float64, maxRows*c.Out*c.OutLen()))
	}
	w.z = make([]float64, maxRows*n.Neurons)
	w.y = w.z // the identity output needs no second buffer
	if n.Output != Identity {
		w.y = make([]float64, maxRows*n.Neurons)
	}
	w.dH = make([]float64, maxRows*n.feat)
	w.pool = newPool(maxRows, n.feat, n.Neurons)
	if w.pool.jobs != nil {
		runtime.AddCleanup(w, (*pool).stop, w.pool)
	}
	return w
}

func (n *Net) checkWork(w *Work, rows int) {
	if w == nil || w.net != n {
		panic("nn: Work was not made by this Net")
	}
	if rows < 1 || rows > w.MaxRows {
		panic(fmt.Sprintf("nn: %d rows outside [1, %d] of the Work", rows, w.MaxRows))
	}
}

// ForwardFeatures runs the conv stack (each layer followed by ReLU) on x
// [rows][In][Length] and returns the last ReLU output [rows][Features], a
// view into w valid until the next call on w. x is copied into w. It panics
// if x is too short, rows is outside [1, w.MaxRows] or w belongs to another
// Net.
func (n *Net) ForwardFeatures(w *Work, x []float64, rows int) []float64 {
	n.checkWork(w, rows)
	if len(x) < rows*n.In*n.Length {
		panic(fmt.Sprintf("nn: input has %d values, want %d rows x %d channels x %d", len(x), rows, n.In, n.Length))
	}
	in := w.x[:rows*n.In*n.Length]
	copy(in, x)
	for l, c := range n.convs {
		h := w.h[l][:rows*c.Out*c.OutLen()]
		c.Forward(h, in, n.ConvW(l), n.ConvB(l), rows)
		ReLU(h, h)
		in = h
	}
	w.rows, w.full = rows, false
	return in
}

// Forward runs the whole network on x [rows][In][Length] and returns the
// predictions [rows][Neurons], a view into w valid until the next call on
// w. Panics as ForwardFeatures.
func (n *Net) Forward(w *Work, x []float64, rows int) []float64 {
	h := n.ForwardFeatures(w, x, rows)
	if n.Output != Identity && &w.y[0] == &w.z[0] {
		// Output was changed from Identity after NewWork.
		w.y = make([]float64, len(w.z))
	}
	p := w.pool
	p.kind, p.rows, p.act = jobForward, rows, n.Output
	p.h, p.w, p.b = h, n.ReadW(), n.ReadB()
	p.z, p.y = w.z[:rows*n.Neurons], w.y[:rows*n.Neurons]
	p.run()
	p.release()
	w.full = true
	return w.y[:rows*n.Neurons]
}

// release drops the job's references to the caller's slices.
func (p *pool) release() {
	p.h, p.w, p.b, p.z, p.y, p.dy, p.dw, p.db = nil, nil, nil, nil, nil, nil, nil, nil
}

// Backward back-propagates dpred = dLoss/dpred [rows][Neurons] through the
// whole network and ADDS the gradients of all parameters into n.Grads. It
// uses the activations saved in w by the preceding Forward, which must have
// had the same rows and the same parameters. dpred must not be the slice
// Forward returned (the saved predictions are needed here; compute the loss
// gradient into a buffer of your own). It panics if there was no such
// Forward, dpred is too short or dpred is the predictions slice.
func (n *Net) Backward(w *Work, dpred []float64, rows int) {
	n.checkWork(w, rows)
	n.checkGrads()
	if !w.full || w.rows != rows {
		panic(fmt.Sprintf("nn: Backward of %d rows needs a Forward of the same rows on this Work", rows))
	}
	if len(dpred) < rows*n.Neurons {
		panic(fmt.Sprintf("nn: dpred has %d values, want %d rows x %d neurons", len(dpred), rows, n.Neurons))
	}
	if &dpred[0] == &w.y[0] {
		panic("nn: dpred shares memory with the predictions returned by Forward")
	}
	F := n.feat
	p := w.pool
	p.kind, p.rows, p.act = jobBackward, rows, n.Output
	p.h, p.w = w.h[len(w.h)-1][:rows*F], n.ReadW()
	p.z, p.y, p.dy = w.z[:rows*n.Neurons], w.y[:rows*n.Neurons], dpred[:rows*n.Neurons]
	p.dw, p.db = n.ReadWGrad(), n.ReadBGrad()
	p.run()
	p.release()
	dH := w.dH[:rows*F]
	copy(dH, p.dhp[0][:rows*F])
	for _, d := range p.dhp[1:] {
		d = d[:rows*F]
		for i := range dH {
			dH[i] += d[i]
		}
	}
	n.BackwardFeatures(w, dH, rows)
}

// BackwardFeatures back-propagates dH [rows][Features], the gradient with
// respect to the last ReLU output, through the conv stack only, ADDING into
// the conv parts of n.Grads. It needs a preceding Forward or ForwardFeatures
// of the same rows on w; dH is not modified.
func (n *Net) BackwardFeatures(w *Work, dH []float64, rows int) {
	n.checkWork(w, rows)
	n.checkGrads()
	if w.rows != rows {
		panic(fmt.Sprintf("nn: BackwardFeatures of %d rows needs a forward pass of the same rows on this Work", rows))
	}
	if len(dH) < rows*n.feat {
		panic(fmt.Sprintf("nn: dH has %d values, want %d rows x %d features", len(dH), rows, n.feat))
	}
	last := len(n.convs) - 1
	g := w.dh[last][:rows*n.feat]
	ReLUBackward(g, dH[:rows*n.feat], w.h[last])
	for l := last; l >= 0; l-- {
		c := n.convs[l]
		var dx, x []float64
		if l > 0 {
			pc := n.convs[l-1]
			dx = w.dh[l-1][:rows*pc.Out*pc.OutLen()]
			clear(dx)
			x = w.h[l-1][:len(dx)]
		} else {
			x = w.x[:rows*n.In*n.Length]
		}
		c.Backward(dx, n.ConvWGrad(l), n.ConvBGrad(l), g, x, n.ConvW(l), rows)
		if l > 0 {
			ReLUBackward(dx, dx, x)
			g = dx
		}
	}
}
