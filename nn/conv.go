package nn

import "fmt"

// Border is the border mode of a Conv1D.
type Border int

const (
	// Zero is "same" convolution with zero padding: output length
	// ceil(L/S) = floor((L-1)/S)+1. The total padding is K-1, with
	// (K-1)/2 positions on the left and the rest on the right, so for an even
	// K the extra position goes on the RIGHT, as torch's padding='same' does.
	Zero Border = iota
	// Circular is "same" convolution with wrap-around padding, the right
	// border for a periodic stimulus axis (direction, orientation, heading).
	// Padding and output length are those of Zero; the padded values are the
	// input read modulo L (torch's F.pad mode 'circular').
	Circular
	// Valid is convolution without padding: output length floor((L-K)/S)+1.
	Valid
)

// String returns "zero", "circular" or "valid".
func (b Border) String() string {
	switch b {
	case Zero:
		return "zero"
	case Circular:
		return "circular"
	case Valid:
		return "valid"
	}
	return fmt.Sprintf("Border(%d)", int(b))
}

// ConvSpec describes one convolution layer of a Net. Its input channels and
// length follow from the layer before.
type ConvSpec struct {
	Out    int // output channels
	K      int // kernel size >= 1
	Stride int // >= 1
	Border Border
}

// Conv1D is a one-dimensional cross-correlation (what deep-learning
// frameworks call convolution) with bias:
//
//	y[r][o][i] = b[o] + sum_{c<C} sum_{k<K} w[o][c][k] * xpad[r][c][i*S + k]
//
// where xpad is the input padded with P = (K-1)/2 positions on the left and
// K-1-P on the right (Zero: zeros; Circular: x[(j-P) mod L]); Valid uses no
// padding. The output length is M = OutLen(). Shapes:
//
//	x [R][C][L], w [O][C][K], b [O], y [R][O][M]
//
// Source: the conv1d definition of torch (torch.nn.functional.conv1d, float64)
// with explicit F.pad for the borders; checked against torch 1.13 fixtures.
type Conv1D struct {
	In, Out, K, Stride, Length int
	Border                     Border
}

// pad returns the left padding.
func (c Conv1D) pad() int {
	if c.Border == Valid {
		return 0
	}
	return (c.K - 1) / 2
}

// Check panics with an "nn: " message if the layer's fields are not a valid
// shape: In, Out, K, Stride and Length must be >= 1, Border one of the three
// modes, and for Valid K must not exceed Length.
func (c Conv1D) Check() {
	switch {
	case c.In < 1:
		panic(fmt.Sprintf("nn: conv input channels %d < 1", c.In))
	case c.Out < 1:
		panic(fmt.Sprintf("nn: conv output channels %d < 1", c.Out))
	case c.K < 1:
		panic(fmt.Sprintf("nn: conv kernel size %d < 1", c.K))
	case c.Stride < 1:
		panic(fmt.Sprintf("nn: conv stride %d < 1", c.Stride))
	case c.Length < 1:
		panic(fmt.Sprintf("nn: conv input length %d < 1", c.Length))
	case c.Border != Zero && c.Border != Circular && c.Border != Valid:
		panic(fmt.Sprintf("nn: unknown border mode %d", int(c.Border)))
	case c.Border == Valid && c.K > c.Length:
		panic(fmt.Sprintf("nn: kernel size %d longer than valid input length %d", c.K, c.Length))
	}
}

// OutLen returns the output length M: floor((L-1)/S)+1 for Zero and
// Circular, floor((L-K)/S)+1 for Valid. It is floor((L+2P-K)/S)+1 with the
// padding of the border mode (eval/methods.md §0).
func (c Conv1D) OutLen() int {
	if c.Border == Valid {
		return (c.Length-c.K)/c.Stride + 1
	}
	return (c.Length-1)/c.Stride + 1
}

// WeightLen returns the number of weights, O*C*K.
func (c Conv1D) WeightLen() int { return c.Out * c.In * c.K }

func (c Conv1D) checkLens(x, w, b []float64, rows int) {
	c.Check()
	if rows < 0 {
		panic(fmt.Sprintf("nn: negative row count %d", rows))
	}
	if len(x) < rows*c.In*c.Length {
		panic(fmt.Sprintf("nn: conv input has %d values, want %d rows x %d channels x %d", len(x), rows, c.In, c.Length))
	}
	if len(w) != c.WeightLen() {
		panic(fmt.Sprintf("nn: conv weights have %d values, want %d x %d x %d", len(w), c.Out, c.In, c.K))
	}
	if len(b) != c.Out {
		panic(fmt.Sprintf("nn: conv bias has %d values, want %d", len(b), c.Out))
	}
}

// span returns, for kernel tap k, the first output position i0 and the
// count n of output positions whose input position i*S-P+k lies inside
// [0, L), for the Zero and Valid modes, and the input position of i0.
func (c Conv1D) span(k, m int) (i0, n, p0 int) {
	s, l := c.Stride, c.Length
	off := k - c.pad() // input position of output 0
	if off < 0 {
		i0 = (-off + s - 1) / s
	}
	// last i with i*s+off <= l-1
	if l-1-off < 0 {
		return 0, 0, 0
	}
	i1 := (l - 1 - off) / s
	if i1 > m-1 {
		i1 = m - 1
	}
	if i1 < i0 {
		return 0, 0, 0
	}
	return i0, i1 - i0 + 1, i0*s + off
}

// wrap returns p modulo L in [0, L).
func wrap(p, l int) int {
	p %= l
	if p < 0 {
		p += l
	}
	return p
}

// Forward computes y = conv(x, w) + b for rows rows, overwriting
// y[:rows*O*M]. Shapes as in the type comment. It panics if a slice is too
// short or the layer is not a valid shape.
func (c Conv1D) Forward(y, x, w, b []float64, rows int) {
	c.checkLens(x, w, b, rows)
	m := c.OutLen()
	if len(y) < rows*c.Out*m {
		panic(fmt.Sprintf("nn: conv output has %d values, want %d rows x %d channels x %d", len(y), rows, c.Out, m))
	}
	L, K, S, C := c.Length, c.K, c.Stride, c.In
	for r := 0; r < rows; r++ {
		xr := x[r*C*L : (r+1)*C*L]
		for o := 0; o < c.Out; o++ {
			yo := y[(r*c.Out+o)*m : (r*c.Out+o+1)*m]
			for i := range yo {
				yo[i] = b[o]
			}
			for ch := 0; ch < C; ch++ {
				xc := xr[ch*L : (ch+1)*L]
				wk := w[(o*C+ch)*K : (o*C+ch+1)*K]
				for k, wv := range wk {
					if c.Border == Circular {
						p := wrap(k-c.pad(), L)
						for i := range yo {
							yo[i] += wv * xc[p]
							p += S
							for p >= L {
								p -= L
							}
						}
						continue
					}
					i0, n, p := c.span(k, m)
					for i := i0; i < i0+n; i++ {
						yo[i] += wv * xc[p]
						p += S
					}
				}
			}
		}
	}
}

// Backward back-propagates dy [R][O][M] through the layer. It ADDS
//
//	dw[o][c][k] += sum_r sum_i dy[r][o][i] * xpad[r][c][i*S+k]
//	db[o]       += sum_r sum_i dy[r][o][i]
//	dx[r][c][j] += sum over (o, k, i) that read x[r][c][j] of w[o][c][k] * dy[r][o][i]
//
// dx may be nil (the first layer of a network needs no input gradient). x
// and w must be those of the forward pass. It panics on short slices.
func (c Conv1D) Backward(dx, dw, db, dy, x, w []float64, rows int) {
	c.checkLens(x, w, db, rows)
	m := c.OutLen()
	if len(dw) != c.WeightLen() {
		panic(fmt.Sprintf("nn: conv weight gradient has %d values, want %d", len(dw), c.WeightLen()))
	}
	if len(dy) < rows*c.Out*m {
		panic(fmt.Sprintf("nn: conv output gradient has %d values, want %d rows x %d channels x %d", len(dy), rows, c.Out, m))
	}
	if dx != nil && len(dx) < rows*c.In*c.Length {
		panic(fmt.Sprintf("nn: conv input gradient has %d values, want %d", len(dx), rows*c.In*c.Length))
	}
	L, K, S, C := c.Length, c.K, c.Stride, c.In
	for r := 0; r < rows; r++ {
		xr := x[r*C*L : (r+1)*C*L]
		for o := 0; o < c.Out; o++ {
			dyo := dy[(r*c.Out+o)*m : (r*c.Out+o+1)*m]
			var sb float64
			for _, v := range dyo {
				sb += v
			}
			db[o] += sb
			for ch := 0; ch < C; ch++ {
				xc := xr[ch*L : (ch+1)*L]
				var dxc []float64
				if dx != nil {
					dxc = dx[(r*C+ch)*L : (r*C+ch+1)*L]
				}
				wk := w[(o*C+ch)*K : (o*C+ch+1)*K]
				dwk := dw[(o*C+ch)*K : (o*C+ch+1)*K]
				for k, wv := range wk {
					var sw float64
					if c.Border == Circular {
						p := wrap(k-c.pad(), L)
						for _, g := range dyo {
							sw += g * xc[p]
							if dxc != nil {
								dxc[p] += wv * g
							}
							p += S
							for p >= L {
								p -= L
							}
						}
						dwk[k] += sw
						continue
					}
					i0, n, p0 := c.span(k, m)
					p := p0
					for _, g := range dyo[i0 : i0+n] {
						sw += g * xc[p]
						p += S
					}
					dwk[k] += sw
					if dxc != nil {
						p = p0
						for _, g := range dyo[i0 : i0+n] {
							dxc[p] += wv * g
							p += S
						}
					}
				}
			}
		}
	}
}

// MarshalText implements encoding.TextMarshaler: the String form.
func (b Border) MarshalText() ([]byte, error) {
	if b != Zero && b != Circular && b != Valid {
		return nil, fmt.Errorf("nn: unknown border %d", int(b))
	}
	return []byte(b.String()), nil
}

// UnmarshalText implements encoding.TextUnmarshaler: "zero", "circular"
// or "valid".
func (b *Border) UnmarshalText(s []byte) error {
	switch string(s) {
	case "zero":
		*b = Zero
	case "circular":
		*b = Circular
	case "valid":
		*b = Valid
	default:
		return fmt.Errorf("%q: want zero, circular or valid", s)
	}
	return nil
}
