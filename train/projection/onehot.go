package projection

import "github.com/strialab/stria/nn"

// oneHotConv is the first conv layer (followed by its ReLU) evaluated on
// the B one-hot inputs, one per bin, by placing the kernel instead of
// convolving: with a one-hot input x_b, output i of channel o is
// bias_o + sum of w_o[k] over the taps k that read position b, so a forward
// pass costs O(Out m K) additions on top of filling the B x F output,
// against O(B Out m K) multiply-adds for a general convolution. It serves
// the projected solver of a one-layer encoder, whose every step evaluates
// the features of all bins.
type oneHotConv struct {
	c    nn.Conv1D
	m, F int
	// pos[i*K+k] is the input position read by tap k of output i, or -1
	// where that tap reads padding.
	pos []int
	h   []float64 // B x F, post-ReLU features
}

func newOneHotConv(net *nn.Net) *oneHotConv {
	c := net.Conv(0)
	m := c.OutLen()
	o := &oneHotConv{c: c, m: m, F: c.Out * m, pos: make([]int, m*c.K), h: make([]float64, c.Length*c.Out*m)}
	pad := 0
	if c.Border != nn.Valid {
		pad = (c.K - 1) / 2 // nn's same padding: the extra pad of an even K on the right
	}
	L := c.Length
	for i := 0; i < m; i++ {
		for k := 0; k < c.K; k++ {
			p := i*c.Stride + k - pad
			switch {
			case c.Border == nn.Circular:
				p = ((p % L) + L) % L
			case p < 0 || p >= L:
				p = -1
			}
			o.pos[i*c.K+k] = p
		}
	}
	return o
}

// usable reports whether the one-hot path applies to net: one conv layer
// over one input channel.
func usableOneHot(net *nn.Net) bool { return len(net.Convs) == 1 && net.In == 1 }

// forward returns the features of the B one-hot rows (B x F, after the
// ReLU), as net.ForwardFeatures on the identity matrix.
func (o *oneHotConv) forward(net *nn.Net) []float64 {
	c, m, F := o.c, o.m, o.F
	w, bias := net.ConvW(0), net.ConvB(0)
	B := c.Length
	for b := 0; b < B; b++ {
		row := o.h[b*F : (b+1)*F]
		for ch := 0; ch < c.Out; ch++ {
			v := bias[ch]
			seg := row[ch*m : (ch+1)*m]
			for i := range seg {
				seg[i] = v
			}
		}
	}
	for ch := 0; ch < c.Out; ch++ {
		wk := w[ch*c.K : (ch+1)*c.K]
		for i := 0; i < m; i++ {
			for k, p := range o.pos[i*c.K : (i+1)*c.K] {
				if p >= 0 {
					o.h[p*F+ch*m+i] += wk[k]
				}
			}
		}
	}
	for i, v := range o.h {
		if v < 0 {
			o.h[i] = 0
		}
	}
	return o.h
}

// backward adds the gradients of the conv weights and biases for dH, the
// gradient with respect to the features of the last forward; as
// net.BackwardFeatures on the identity matrix.
func (o *oneHotConv) backward(net *nn.Net, dH []float64) {
	c, m, F := o.c, o.m, o.F
	dw, db := net.ConvWGrad(0), net.ConvBGrad(0)
	B := c.Length
	for ch := 0; ch < c.Out; ch++ {
		var sb float64
		for b := 0; b < B; b++ {
			base := b*F + ch*m
			for i := 0; i < m; i++ {
				if o.h[base+i] > 0 {
					sb += dH[base+i]
				}
			}
		}
		db[ch] += sb
		dwk := dw[ch*c.K : (ch+1)*c.K]
		for i := 0; i < m; i++ {
			for k, p := range o.pos[i*c.K : (i+1)*c.K] {
				if p >= 0 {
					j := p*F + ch*m + i
					if o.h[j] > 0 {
						dwk[k] += dH[j]
					}
				}
			}
		}
	}
}
