package projection

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"

	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/nn"
)

// TestMulIntoMatchesDgemm: mulInto gives gonum's Dgemm bit for bit, on
// shapes with and without whole 4 x 8 tiles, with row strides wider than
// the rows, with zeros among the operands (Dgemm skips a zero of x) and
// values of many magnitudes; it writes nothing outside dst's m x n.
func TestMulIntoMatchesDgemm(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 9))
	val := func() float64 {
		if rng.IntN(10) == 0 {
			return 0
		}
		return rng.NormFloat64() * math.Pow(10, float64(rng.IntN(13)-6))
	}
	t.Logf("amd64 kernel in use: %v", hasTile4x8)
	if hasTile4x8 {
		// The fallback too (it is gonum itself, so this checks the test).
		defer func(v bool) { setTile4x8(v) }(hasTile4x8)
		t.Run("Dgemm", func(t *testing.T) { setTile4x8(false); testMulInto(t, val) })
		setTile4x8(true)
	}
	testMulInto(t, val)
}

func testMulInto(t *testing.T, val func() float64) {
	for _, s := range []struct{ m, k, n, pad int }{
		{1, 1, 1, 0}, {4, 60, 8, 0}, {7, 5, 13, 0}, {9, 60, 480, 0}, {5, 0, 20, 0}, {12, 31, 17, 0},
		{3, 60, 480, 0}, {64, 60, 96, 0}, {60, 60, 100, 7}, {8, 3, 24, 1},
	} {
		t.Run(fmt.Sprintf("%dx%dx%d+%d", s.m, s.k, s.n, s.pad), func(t *testing.T) {
			ldx, lda, ldd := s.k+s.pad, s.n+2*s.pad, s.n+3*s.pad
			x := make([]float64, s.m*ldx)
			a := make([]float64, max(s.k, 1)*lda)
			for i := range x {
				x[i] = val()
			}
			for i := range a {
				a[i] = val()
			}
			want := make([]float64, s.m*ldd)
			got := make([]float64, s.m*ldd)
			for i := range got {
				got[i] = math.NaN() // the m x n must be written, the padding not
				want[i] = math.NaN()
			}
			if s.k > 0 {
				blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, blas64.General{Rows: s.m, Cols: s.k, Stride: ldx, Data: x},
					blas64.General{Rows: s.k, Cols: s.n, Stride: lda, Data: a}, 0, blas64.General{Rows: s.m, Cols: s.n, Stride: ldd, Data: want})
			} else {
				for i := 0; i < s.m; i++ {
					clear(want[i*ldd : i*ldd+s.n])
				}
			}
			mulInto(got, ldd, x, ldx, a, lda, s.m, s.k, s.n)
			for i := range want {
				if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
					t.Fatalf("element (%d, %d): got %v want %v (gonum Dgemm)", i/ldd, i%ldd, got[i], want[i])
				}
			}
		})
	}
}

// TestSq8MatchesLoop: sq8 gives the sums of squares of perNeuronSURE's
// loop (q := c*v; s += q*q from 0 in ascending j) bit for bit.
func TestSq8MatchesLoop(t *testing.T) {
	if !hasTile4x8 {
		t.Skip("no amd64 kernel here")
	}
	rng := rand.New(rand.NewPCG(4, 2))
	for _, k := range []int{0, 1, 7, 60} {
		const ldz = 21
		z := make([]float64, max(k, 1)*ldz)
		c := make([]float64, max(k, 1))
		for i := range z {
			z[i] = rng.NormFloat64() * math.Pow(10, float64(rng.IntN(9)-4))
		}
		for i := range c {
			c[i] = rng.Float64()
		}
		var got [8]float64
		sq8(&got[0], &z[3], ldz, &c[0], k)
		for i := range got {
			var want float64
			for j := 0; j < k; j++ {
				q := c[j] * z[j*ldz+3+i]
				want += q * q
			}
			if math.Float64bits(got[i]) != math.Float64bits(want) {
				t.Errorf("k %d, neuron %d: got %v want %v (the Go loop)", k, i, got[i], want)
			}
		}
	}
}

// TestPerNeuronSUREKernel: the per-neuron penalty choice is the same with
// and without the amd64 kernel, over several blocks of neurons and a
// remainder that is not a whole tile.
func TestPerNeuronSUREKernel(t *testing.T) {
	if !hasTile4x8 {
		t.Skip("no amd64 kernel here")
	}
	N := neuronBlock + 1013
	pj, rp, _ := randomReadout(N)
	rp.mu = []float64{0.01, 0.1, 1, 10, 100}
	pj.W = 500
	rng := rand.New(rand.NewPCG(8, 1))
	within := make([]float64, N)
	for n := range within {
		within[n] = 1e4 * rng.Float64() * rng.Float64()
	}
	got := rp.perNeuronSURE(pj, within)
	setTile4x8(false)
	want := rp.perNeuronSURE(pj, within)
	setTile4x8(true)
	seen := map[int]bool{}
	for n := range want {
		seen[want[n]] = true
		if got[n] != want[n] {
			t.Fatalf("neuron %d: grid value %d with the kernel, %d without", n, got[n], want[n])
		}
	}
	if len(seen) < 2 {
		t.Errorf("every neuron picked the same grid value; the case tests nothing")
	}
}

// TestValR2MatchesFormer: the median validation R^2 of the projector is,
// bit for bit, that of the former arithmetic (G = T Yc by gonum's Dgemm,
// block by block, then the residual sums), with one block of neurons and
// with several on all cores.
func TestValR2MatchesFormer(t *testing.T) {
	for _, N := range []int{300, neuronBlock + 700} {
		t.Run(fmt.Sprint(N), func(t *testing.T) {
			c, _ := popCase(t, synth.DiscreteConfig{Neurons: N, Trials: 600, Bins: 20, GainSD: 0.2, NoiseSD: 0.7, UntunedFrac: 0.1, Seed: 5},
				caseOptions{penalty: 1, convs: []nn.ConvSpec{{Out: 3, K: 5, Stride: 1, Border: nn.Circular}}})
			net := c.net(2, 3)
			pj, err := newProjector(&c.pr, net)
			if err != nil {
				t.Fatal(err)
			}
			if pj.Bv == 0 {
				t.Fatal("the case has no validation rows")
			}
			if err := pj.eval(net, false, false); err != nil {
				t.Fatal(err)
			}
			got := pj.valR2()
			// The former arithmetic (pj.t is set by valR2).
			Bv, Bt := pj.Bv, pj.Bt
			ss := slices.Clone(pj.withN)
			g := make([]float64, Bv*N)
			blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(pj.t, Bv, Bt), gen(pj.yc, Bt, N), 0, gen(g, Bv, N))
			for r := 0; r < Bv; r++ {
				w := pj.nv[r]
				for n := 0; n < N; n++ {
					e := pj.dv[r*N+n] - g[r*N+n]
					ss[n] += w * e * e
				}
			}
			var r2 []float64
			for n, v := range ss {
				if pj.valTot[n] > 0 {
					r2 = append(r2, 1-v/pj.valTot[n])
				}
			}
			if want := median(r2); math.Float64bits(got) != math.Float64bits(want) {
				t.Errorf("median validation R^2 %v, want %v (former arithmetic)", got, want)
			}
		})
	}
}

// TestMulSymIntoMatchesDgemm: mulSymInto gives x x^T as gonum's Dgemm
// computes it, bit for bit (the upper triangle computed, the lower one
// copied), for sizes with and without whole tiles and with row padding,
// on the AVX2 kernel and on the fallback.
func TestMulSymIntoMatchesDgemm(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 10))
	test := func(t *testing.T) {
		for _, s := range []struct{ m, k, pad int }{{1, 1, 0}, {4, 9, 0}, {8, 60, 0}, {13, 7, 2}, {60, 300, 0}, {60, 97, 5}, {61, 40, 1}, {3, 0, 0}, {60, 50, 4}, {57, 20, 7}} {
			// With pad >= the distance to a multiple of 8, the tiles run
			// over the padding columns (n rounded up).
			n := s.m
			if r := (s.m + 7) &^ 7; r-s.m <= s.pad {
				n = r
			}
			ldx, ldt, ldd := s.k+s.pad, s.m+2*s.pad, s.m+3*s.pad
			x := make([]float64, s.m*ldx)
			for i := range x {
				x[i] = rng.NormFloat64() * math.Pow(10, float64(rng.IntN(9)-4))
			}
			xt := make([]float64, max(s.k, 1)*ldt)
			for i := 0; i < s.m; i++ {
				for j := 0; j < s.k; j++ {
					xt[j*ldt+i] = x[i*ldx+j]
				}
			}
			want := make([]float64, s.m*ldd)
			got := make([]float64, s.m*ldd)
			for i := range got {
				got[i], want[i] = math.NaN(), math.NaN()
			}
			if s.k > 0 {
				blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, blas64.General{Rows: s.m, Cols: s.k, Stride: ldx, Data: x},
					blas64.General{Rows: s.k, Cols: s.m, Stride: ldt, Data: xt}, 0, blas64.General{Rows: s.m, Cols: s.m, Stride: ldd, Data: want})
			} else {
				for i := 0; i < s.m; i++ {
					clear(want[i*ldd : i*ldd+s.m])
				}
			}
			mulSymInto(got, ldd, x, ldx, xt, ldt, s.m, s.k, n)
			for i := range want {
				if i%ldd >= s.m {
					continue // padding: junk where the tiles ran over it
				}
				if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
					t.Fatalf("%d x %d (+%d): element (%d, %d): got %v want %v (gonum Dgemm)", s.m, s.k, s.pad, i/ldd, i%ldd, got[i], want[i])
				}
			}
		}
	}
	if hasTile4x8 {
		defer func(v bool) { setTile4x8(v) }(hasTile4x8)
		t.Run("Dgemm", func(t *testing.T) { setTile4x8(false); test(t) })
		setTile4x8(true)
	}
	test(t)
}

// TestBlockSumsMatchDgemm: the sums of each block of neurons are gonum's
// Dgemm of the block's columns (S = Yc Yc^T, Cvt = Dv Yc^T), bit for bit,
// and the squared and within sums the plain loops in neuron order, for
// bin counts with and without whole tiles and a last block short of
// SumBlock neurons.
func TestBlockSumsMatchDgemm(t *testing.T) {
	if hasTile4x8 {
		defer func(v bool) { setTile4x8(v) }(hasTile4x8)
		t.Run("Dgemm", func(t *testing.T) { setTile4x8(false); testBlockSums(t) })
		setTile4x8(true)
	}
	testBlockSums(t)
}

func testBlockSums(t *testing.T) {
	rng := rand.New(rand.NewPCG(6, 2))
	fill := func(n int) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = rng.NormFloat64() * math.Pow(10, float64(rng.IntN(7)-3))
		}
		return v
	}
	for _, sz := range []struct{ Bt, Bv, N int }{{60, 60, SumBlock + 1000}, {13, 6, 2*SumBlock + 17}, {8, 0, 300}} {
		pj := &projector{B: max(sz.Bt, sz.Bv), Bt: sz.Bt, Bv: sz.Bv, N: sz.N, yc: fill(sz.Bt * sz.N), withinN: fill(sz.N)}
		if sz.Bv > 0 {
			pj.dv, pj.withN = fill(sz.Bv*sz.N), fill(sz.N)
		}
		blocks := pj.blockSums()
		if want := (sz.N + SumBlock - 1) / SumBlock; len(blocks) != want {
			t.Fatalf("%d blocks, want %d", len(blocks), want)
		}
		for k, b := range blocks {
			n0, n1 := k*SumBlock, min((k+1)*SumBlock, sz.N)
			// The products as the former code wrote them: Dgemm of the
			// block and its transpose, both not transposed (Dgemm's
			// transposed path sums in another order).
			nb := n1 - n0
			yc := blas64.General{Rows: sz.Bt, Cols: nb, Stride: sz.N, Data: pj.yc[n0:]}
			ytd := make([]float64, nb*sz.Bt)
			for r := 0; r < sz.Bt; r++ {
				for j := 0; j < nb; j++ {
					ytd[j*sz.Bt+r] = pj.yc[r*sz.N+n0+j]
				}
			}
			yt := blas64.General{Rows: nb, Cols: sz.Bt, Stride: sz.Bt, Data: ytd}
			S := blas64.General{Rows: sz.Bt, Cols: sz.Bt, Stride: sz.Bt, Data: make([]float64, sz.Bt*sz.Bt)}
			blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, yc, yt, 0, S)
			same := func(name string, got, want []float64) {
				t.Helper()
				for i := range want {
					if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
						t.Fatalf("%d x %d bins, %d neurons, block %d: %s[%d] = %v, want %v (Dgemm / the loop)", sz.Bt, sz.Bv, sz.N, k, name, i, got[i], want[i])
					}
				}
			}
			same("S", b.S, S.Data)
			var w float64
			for _, v := range pj.withinN[n0:n1] {
				w += v
			}
			same("Within", []float64{b.Within}, []float64{w})
			if sz.Bv == 0 {
				continue
			}
			dv := blas64.General{Rows: sz.Bv, Cols: n1 - n0, Stride: sz.N, Data: pj.dv[n0:]}
			C := blas64.General{Rows: sz.Bv, Cols: sz.Bt, Stride: sz.Bt, Data: make([]float64, sz.Bv*sz.Bt)}
			blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, dv, yt, 0, C)
			same("Cvt", b.Cvt, C.Data)
			yyv := make([]float64, sz.Bv)
			for r := range yyv {
				for _, v := range pj.dv[r*sz.N+n0 : r*sz.N+n1] {
					yyv[r] += v * v
				}
			}
			same("Yyv", b.Yyv, yyv)
		}
	}
}
