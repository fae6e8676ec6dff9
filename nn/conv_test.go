package nn

import (
	"encoding/json"
	"fmt"
	"os"
	"testing"
)

// eval/methods.md §0 [practice]: L = 60, K = 9, "same" padding -> 60 outputs;
// stride 10 -> 6. Exact integers.
func TestConvOutLenMethods0(t *testing.T) {
	for _, tc := range []struct {
		c    Conv1D
		want int
	}{
		{Conv1D{In: 1, Out: 8, K: 9, Stride: 1, Length: 60, Border: Zero}, 60},
		{Conv1D{In: 1, Out: 8, K: 9, Stride: 1, Length: 60, Border: Circular}, 60},
		{Conv1D{In: 1, Out: 8, K: 9, Stride: 10, Length: 60, Border: Zero}, 6},
		{Conv1D{In: 1, Out: 8, K: 9, Stride: 10, Length: 60, Border: Circular}, 6},
		// floor((L-K)/S)+1, the formula of eval/methods.md §0 with P = 0 [pub].
		{Conv1D{In: 1, Out: 8, K: 9, Stride: 1, Length: 60, Border: Valid}, 52},
		{Conv1D{In: 1, Out: 8, K: 9, Stride: 10, Length: 60, Border: Valid}, 6},
	} {
		if got := tc.c.OutLen(); got != tc.want {
			t.Errorf("%+v: OutLen %d, want %d", tc.c, got, tc.want)
		}
	}
}

// Finite differences (central, gonum diff/fd) of loss = sum(y*dy) with
// respect to x, w and b, for every border mode, odd and even K, strides 1-3
// and 1 or 3 input channels. Tolerance 1e-7 relative + 1e-8 absolute: the
// loss is bilinear, so the central difference has no truncation error and
// only rounding error of order 1e-16*|loss|/step ~ 1e-10.
func TestConvGradFD(t *testing.T) {
	rng := newRand(1)
	for _, border := range []Border{Zero, Circular, Valid} {
		for _, k := range []int{1, 3, 4, 5, 8} {
			for _, s := range []int{1, 2, 3} {
				for _, in := range []int{1, 3} {
					c := Conv1D{In: in, Out: 2, K: k, Stride: s, Length: 9, Border: border}
					name := fmt.Sprintf("%v K%d S%d In%d", border, k, s, in)
					rows := 2
					x := randn(rng, rows*in*c.Length)
					w := randn(rng, c.WeightLen())
					b := randn(rng, c.Out)
					m := c.OutLen()
					dy := randn(rng, rows*c.Out*m)
					y := make([]float64, rows*c.Out*m)
					loss := func(x, w, b []float64) float64 {
						c.Forward(y, x, w, b, rows)
						return dot(y, dy)
					}
					dx := make([]float64, len(x))
					dw := make([]float64, len(w))
					db := make([]float64, len(b))
					c.Backward(dx, dw, db, dy, x, w, rows)
					checkClose(t, name+" dx", dx, numGrad(func(v []float64) float64 { return loss(v, w, b) }, x), 1e-7, 1e-8)
					checkClose(t, name+" dw", dw, numGrad(func(v []float64) float64 { return loss(x, v, b) }, w), 1e-7, 1e-8)
					checkClose(t, name+" db", db, numGrad(func(v []float64) float64 { return loss(x, w, v) }, b), 1e-7, 1e-8)
					// Backward adds; dx nil is allowed.
					dw2 := append([]float64(nil), dw...)
					c.Backward(nil, dw2, db, dy, x, w, rows)
					for i := range dw {
						if !closeTo(dw2[i], 2*dw[i], 1e-15, 0) {
							t.Fatalf("%s: second Backward does not add: %v vs 2*%v", name, dw2[i], dw[i])
						}
					}
				}
			}
		}
	}
}

type convFixture struct {
	Name                       string
	Rows, In, Out, Length, K   int
	Stride                     int
	Border                     string
	Outlen                     int
	X, W, B, Y, Dy, Dx, Dw, Db []float64
}

// Torch references: torch 1.13 float64 F.conv1d after explicit F.pad,
// gradients by autograd (testdata/nn/gen_nn.py -> conv.json). Tolerance
// 1e-12 relative + 1e-13 absolute: float64 sums of at most 27 products of
// O(1) values in a different order differ by a few ulps.
func TestConvTorch(t *testing.T) {
	var cases []convFixture
	v := loadFixture(t, "conv.json", &cases)
	t.Logf("fixtures from torch %s, python %s", v.Torch, v.Python)
	if len(cases) < 10 {
		t.Fatalf("only %d conv cases", len(cases))
	}
	for _, tc := range cases {
		t.Run(tc.Name, func(t *testing.T) {
			c := Conv1D{In: tc.In, Out: tc.Out, K: tc.K, Stride: tc.Stride, Length: tc.Length, Border: borderOf(t, tc.Border)}
			if c.OutLen() != tc.Outlen {
				t.Fatalf("OutLen %d, torch %d", c.OutLen(), tc.Outlen)
			}
			y := make([]float64, len(tc.Y))
			c.Forward(y, tc.X, tc.W, tc.B, tc.Rows)
			checkClose(t, "y", y, tc.Y, 1e-12, 1e-13)
			dx := make([]float64, len(tc.X))
			dw := make([]float64, len(tc.W))
			db := make([]float64, len(tc.B))
			c.Backward(dx, dw, db, tc.Dy, tc.X, tc.W, tc.Rows)
			checkClose(t, "dx", dx, tc.Dx, 1e-12, 1e-13)
			checkClose(t, "dw", dw, tc.Dw, 1e-12, 1e-13)
			checkClose(t, "db", db, tc.Db, 1e-12, 1e-13)
		})
	}
}

// A one-hot input with an identity kernel picks out the weights: with
// circular borders, a one-hot at position 0 and K = 3 gives y[L-1] = w[0],
// y[0] = w[1], y[1] = w[2] (wrap-around) [derived from the definition].
func TestConvCircularWraps(t *testing.T) {
	c := Conv1D{In: 1, Out: 1, K: 3, Stride: 1, Length: 5, Border: Circular}
	x := []float64{1, 0, 0, 0, 0}
	y := make([]float64, 5)
	c.Forward(y, x, []float64{10, 20, 30}, []float64{0}, 1)
	want := []float64{20, 10, 0, 0, 30}
	checkClose(t, "y", y, want, 0, 0)
	c.Border = Zero
	c.Forward(y, x, []float64{10, 20, 30}, []float64{0}, 1)
	want = []float64{20, 10, 0, 0, 0}
	checkClose(t, "y zero", y, want, 0, 0)
	// Even K pads the extra position on the right: K = 2, left pad 0, so
	// y[i] = w0*x[i] + w1*x[i+1] [torch padding='same' convention, checked by
	// TestConvEvenKernelMatchesTorchSame].
	c = Conv1D{In: 1, Out: 1, K: 2, Stride: 1, Length: 5, Border: Zero}
	c.Forward(y, x, []float64{10, 20}, []float64{0}, 1)
	want = []float64{10, 0, 0, 0, 0}
	checkClose(t, "y even", y, want, 0, 0)
}

// torch 1.13 itself: F.conv1d(x, w, padding='same') equals conv1d after our
// explicit pad of (K-1)/2 left and the rest right, for K = 2, 3, 8, 9
// (testdata/nn/gen_nn.py, same_padding_matches in conv.json; exact to 1e-12).
// This pins the even-K convention (extra position on the RIGHT) to torch.
func TestConvEvenKernelMatchesTorchSame(t *testing.T) {
	b, err := os.ReadFile("../testdata/nn/conv.json")
	if err != nil {
		t.Fatal(err)
	}
	var f struct {
		SamePaddingMatches map[string]bool `json:"same_padding_matches"`
	}
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"K2", "K3", "K8", "K9"} {
		if !f.SamePaddingMatches[k] {
			t.Errorf("%s: torch padding='same' differs from the explicit pad (or is missing)", k)
		}
	}
}

func TestConvPanics(t *testing.T) {
	ok := Conv1D{In: 1, Out: 2, K: 3, Stride: 1, Length: 10, Border: Zero}
	x := make([]float64, 10)
	w := make([]float64, 6)
	b := make([]float64, 2)
	y := make([]float64, 20)
	wantPanic(t, "stride 0", func() { c := ok; c.Stride = 0; c.Forward(y, x, w, b, 1) })
	wantPanic(t, "K 0", func() { c := ok; c.K = 0; c.Check() })
	wantPanic(t, "valid K > L", func() { c := ok; c.Border = Valid; c.K = 11; c.Check() })
	wantPanic(t, "bad border", func() { c := ok; c.Border = 7; c.Check() })
	wantPanic(t, "short x", func() { ok.Forward(y, x[:9], w, b, 1) })
	wantPanic(t, "short y", func() { ok.Forward(y[:19], x, w, b, 1) })
	wantPanic(t, "wrong w", func() { ok.Forward(y, x, w[:5], b, 1) })
	wantPanic(t, "short dx", func() { ok.Backward(x[:3], w, b, y, x, w, 1) })
}
