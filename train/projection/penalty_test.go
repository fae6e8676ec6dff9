package projection

import (
	"math"
	"slices"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"

	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/nn"
)

// synthCase is a small recording of synth.Population's scenario (40 cells, 400
// trials, 30 bins) with 3 channels and stride 2 (F 45 > Bt 30, the
// full-size situation) and random filters.
func synthCase(t *testing.T, border nn.Border, l2 float64) (*testCase, *nn.Net) {
	t.Helper()
	rec, _, _ := synth.Population(synth.Config{Neurons: 40, Trials: 400, Bins: 30, TwoPeakFrac: 0.25, UntunedFrac: 0.1, GainSD: 0.15, NoiseSD: 0.5, Seed: 11})
	c := newCase(t, rec, 30, false, caseOptions{penalty: l2, convs: []nn.ConvSpec{{Out: 3, K: 5, Stride: 2, Border: border}}})
	return c, c.net(3, 4)
}

// TestRidgePath checks the eigen-basis penalty path against the projector's
// own B x B formulas (which TestProjectedGradient checks against the adam
// path): for several grid values, the path's validation loss must equal
// projector.eval's at that penalty, the C_p residual term must equal the
// projector's training loss minus the within-condition part, and the
// readout with one penalty for all neurons must equal projector.readout's
// weights, bias and curves.
func TestRidgePath(t *testing.T) {
	c, net := synthCase(t, nn.Circular, 1)
	pj, err := newProjector(&c.pr, net)
	if err != nil {
		t.Fatal(err)
	}
	rp := newRidgePath(pj, []float64{1e-4, 1e-2, 0.3, 10})
	if err := rp.decompose(pj, net); err != nil {
		t.Fatal(err)
	}
	val := make([]float64, len(rp.mu))
	rp.valLoss(val, pj)
	cp := make([]float64, len(rp.mu))
	rp.sure(cp, nil, pj)
	sigma2 := pj.within / (pj.W - float64(pj.Bt))
	for g, mu := range rp.mu {
		pj.mu = mu
		if err := pj.eval(net, false, false); err != nil {
			t.Fatal(err)
		}
		// Tolerance: the two evaluate the same sums through a Cholesky
		// solve and an eigendecomposition (condition number of K <~ 1e5).
		if math.Abs(val[g]-pj.val) > 1e-9*pj.val {
			t.Errorf("tau %g: path validation loss %.15g, projector %.15g", rp.tau[g], val[g], pj.val)
		}
		// df by its definition: 1 + tr(G (G + mu I)^-1) from the projector's K.
		res := pj.loss*pj.W*float64(pj.N) - pj.within
		var df float64
		for _, s := range rp.s {
			df += s / (s + mu)
		}
		want := res + 2*sigma2*(df+1)
		if math.Abs(cp[g]-want) > 1e-8*math.Abs(want) {
			t.Errorf("tau %g: C_p %.15g, from the projector's loss %.15g", rp.tau[g], cp[g], want)
		}
		pj.features(net)
		if err := pj.readout(net); err != nil {
			t.Fatal(err)
		}
		wantW, wantC, wantCurves := slices.Clone(net.ReadW()), slices.Clone(net.ReadB()), pj.curves()
		pick := make([]int, pj.N)
		for n := range pick {
			pick[n] = g
		}
		got, weights := rp.readout(pj, net.ReadB(), pick)
		clear(net.ReadW())
		weights.Weights(net.ReadW(), 0, pj.N)
		// Any range of neurons gives the same weights as the whole.
		part := make([]float64, 7*pj.F)
		weights.Weights(part, 3, 10)
		if !slices.Equal(part, net.ReadW()[3*pj.F:10*pj.F]) {
			t.Errorf("tau %g: the weights of neurons [3, 10) differ from those of all neurons", rp.tau[g])
		}
		for _, c := range []struct {
			name      string
			got, want []float64
		}{{"weights", net.ReadW(), wantW}, {"bias", net.ReadB(), wantC}, {"curves", got, wantCurves}} {
			var d, m float64
			for i := range c.want {
				d = math.Max(d, math.Abs(c.got[i]-c.want[i]))
				m = math.Max(m, math.Abs(c.want[i]))
			}
			if d > 1e-8*math.Max(m, 1) {
				t.Errorf("tau %g: %s differ by %g (largest %g)", rp.tau[g], c.name, d, m)
			}
		}
	}
}

// TestReadoutBlocksFixed: the readout of ReadoutBlocks at a fixed penalty
// (eigendecomposition) equals Readout's (Cholesky solve) to rounding, and
// with dead filters (zero features) it is the readout of the condition
// means alone, as the Cholesky solve of K = mu I gives, not an error.
func TestReadoutBlocksFixed(t *testing.T) {
	for _, dead := range []bool{false, true} {
		c, net := synthCase(t, nn.Circular, 0.7)
		if dead {
			clear(net.ConvW(0))
			for i := range net.ConvB(0) {
				net.ConvB(0)[i] = -1 // ReLU(-1) = 0: every feature is zero
			}
		}
		s, err := NewMSE(c.pr, net)
		if err != nil {
			t.Fatal(err)
		}
		curves, l2, bias, weights, err := s.ReadoutBlocks(false, false)
		if err != nil {
			t.Fatalf("dead %v: %v", dead, err)
		}
		if l2 != nil {
			t.Errorf("dead %v: per-neuron penalties %v for a fixed penalty, want nil", dead, l2[:2])
		}
		w := make([]float64, c.N*net.Features())
		weights.Weights(w, 0, c.N)
		s2, err := NewMSE(c.pr, net)
		if err != nil {
			t.Fatal(err)
		}
		wantCurves, err := s2.Readout()
		if err != nil {
			t.Fatal(err)
		}
		for _, cmp := range []struct {
			name      string
			got, want []float64
		}{{"curves", curves, wantCurves}, {"bias", bias, net.ReadB()}, {"weights", w, net.ReadW()}} {
			for i, v := range cmp.want {
				if math.Abs(cmp.got[i]-v) > 1e-9*math.Max(1, math.Abs(v)) {
					t.Fatalf("dead %v: %s[%d] = %v, Readout gives %v", dead, cmp.name, i, cmp.got[i], v)
				}
			}
		}
	}
}

// TestReadoutWeightsMatchFormer: z, the curves and the weights function
// give, bit for bit, the values of the former arithmetic (gonum's Dgemm;
// for the weights AU zs as one F x nb product, then transposed into dst),
// with several penalties across neurons and on blocks that do not start at
// a block boundary. The run folder's
// readout_weight.npy must not change with the speed of its computation.
func TestReadoutWeightsMatchFormer(t *testing.T) {
	c, net := synthCase(t, nn.Circular, 1)
	pj, err := newProjector(&c.pr, net)
	if err != nil {
		t.Fatal(err)
	}
	rp := newRidgePath(pj, []float64{1e-4, 1e-2, 0.3, 10})
	if err := rp.decompose(pj, net); err != nil {
		t.Fatal(err)
	}
	Bt, F, N := pj.Bt, pj.F, pj.N
	pick := make([]int, N)
	for n := range pick {
		pick[n] = (3 * n) % len(rp.mu)
	}
	if pj.consume {
		t.Fatal("the test case must keep yc (not a fit from PartStats)")
	}
	// z by the former arithmetic: U^T (D^1/2 Yc) by Dgemm.
	sy := make([]float64, Bt*N)
	for r := 0; r < Bt; r++ {
		for n := 0; n < N; n++ {
			sy[r*N+n] = pj.sq[r] * pj.yc[r*N+n]
		}
	}
	zWant := make([]float64, Bt*N)
	blas64.Gemm(blas.Trans, blas.NoTrans, 1, gen(rp.u, Bt, Bt), gen(sy, Bt, N), 0, gen(zWant, Bt, N))
	z := rp.zeta(pj)
	for i := range zWant {
		if math.Float64bits(z[i]) != math.Float64bits(zWant[i]) {
			t.Fatalf("z[%d]: got %v want %v (former arithmetic)", i, z[i], zWant[i])
		}
	}
	curves, weights := rp.readout(pj, make([]float64, N), pick)
	// The former arithmetic, as it was written in ridgePath.readout.
	au := make([]float64, F*Bt)
	blas64.Gemm(blas.Trans, blas.NoTrans, 1, gen(pj.a, Bt, F), gen(rp.u, Bt, Bt), 0, gen(au, F, Bt))
	want := make([]float64, N*F)
	zb := make([]float64, Bt*N)
	for j := 0; j < Bt; j++ {
		for n := 0; n < N; n++ {
			zb[j*N+n] = z[j*N+n] / (rp.s[j] + rp.mu[pick[n]])
		}
	}
	wt := make([]float64, F*N)
	blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(au, F, Bt), gen(zb, Bt, N), 0, gen(wt, F, N))
	// The curves: ((H - 1 hbar^T) AU) zs + ybar.
	B := pj.B
	hc := make([]float64, B*F)
	for b := 0; b < B; b++ {
		for f, x := range pj.h[b*F : (b+1)*F] {
			hc[b*F+f] = x - pj.hbar[f]
		}
	}
	g := make([]float64, B*Bt)
	blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(hc, B, F), gen(au, F, Bt), 0, gen(g, B, Bt))
	cWant := make([]float64, B*N)
	blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, gen(g, B, Bt), gen(zb, Bt, N), 0, gen(cWant, B, N))
	for b := 0; b < B; b++ {
		for n := 0; n < N; n++ {
			cWant[b*N+n] += pj.ymean[n]
		}
	}
	for i := range cWant {
		if math.Float64bits(curves[i]) != math.Float64bits(cWant[i]) {
			t.Fatalf("curve value (%d, %d): got %v want %v (former arithmetic)", i/N, i%N, curves[i], cWant[i])
		}
	}
	for f := 0; f < F; f++ {
		for n := 0; n < N; n++ {
			want[n*F+f] = wt[f*N+n]
		}
	}
	// The coefficients are zs transposed, bit for bit, and the basis AU
	// transposed.
	if weights.Rank != Bt || weights.Features != F {
		t.Fatalf("readout of rank %d and %d features, want %d and %d", weights.Rank, weights.Features, Bt, F)
	}
	coef := make([]float64, N*Bt)
	weights.Coef(coef, 0, N)
	for n := 0; n < N; n++ {
		for j := 0; j < Bt; j++ {
			if math.Float64bits(coef[n*Bt+j]) != math.Float64bits(zb[j*N+n]) {
				t.Fatalf("coefficient %d of neuron %d: got %v want %v", j, n, coef[n*Bt+j], zb[j*N+n])
			}
		}
	}
	for f := 0; f < F; f++ {
		for j := 0; j < Bt; j++ {
			if weights.Basis[j*F+f] != au[f*Bt+j] {
				t.Fatalf("basis (%d, %d): got %v want %v", j, f, weights.Basis[j*F+f], au[f*Bt+j])
			}
		}
	}
	// Expand of all the coefficients at once (as a run folder is loaded).
	all := make([]float64, N*F)
	Expand(all, coef, weights.Basis, N, Bt, F)
	for _, r := range []struct {
		name   string
		n0, n1 int
		expand bool
	}{{"all", 0, N, false}, {"inner", 3, N - 2, false}, {"one", N / 2, N/2 + 1, false}, {"none", 5, 5, false}, {"expand", 0, N, true}} {
		got := make([]float64, (r.n1-r.n0)*F)
		if r.expand {
			copy(got, all)
		} else {
			weights.Weights(got, r.n0, r.n1)
		}
		for i, g := range got {
			if w := want[r.n0*F+i]; math.Float64bits(g) != math.Float64bits(w) {
				t.Errorf("%s: weight %d of neuron %d: got %v want %v (former arithmetic)", r.name, i%F, r.n0+i/F, g, w)
				break
			}
		}
	}
}
