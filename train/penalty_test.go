package train

import (
	"math"
	"slices"
	"testing"
)

// TestRidgePath checks the eigen-basis penalty path against the projector's
// own B x B formulas (which TestProjectedGradient checks against the adam
// path): for several grid values, the path's validation loss must equal
// projector.eval's at that penalty, the C_p residual term must equal the
// projector's training loss minus the within-condition part, and the
// readout with one penalty for all neurons must equal projector.readout's
// weights, bias and curves.
func TestRidgePath(t *testing.T) {
	p, net := projectedCase(t, BorderCircular, 1)
	pj, err := newProjector(p, net)
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
		got := rp.readout(pj, net, pick)
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

// TestAutoReadout checks that the readout autoReadout writes into the net
// reproduces the per-bin predictions it returns (through nn's forward
// pass, the reference for predictions), with one penalty and per neuron,
// and that the recorded penalties lie on the grid's range.
func TestAutoReadout(t *testing.T) {
	for _, per := range []bool{false, true} {
		p, net := projectedCase(t, BorderCircular, 1)
		pj, err := newProjector(p, net)
		if err != nil {
			t.Fatal(err)
		}
		curves, l2, err := pj.autoReadout(p, net, per)
		if err != nil {
			t.Fatal(err)
		}
		want := PredictConditions(net, p.NBins)
		var d, m float64
		for i := range want {
			d = math.Max(d, math.Abs(curves[i]-want[i]))
			m = math.Max(m, math.Abs(want[i]))
		}
		if d > 1e-9*math.Max(m, 1) {
			t.Errorf("per neuron %v: curves differ from the net's forward pass by %g (largest %g)", per, d, m)
		}
		lo, hi := math.Inf(1), 0.0
		for _, v := range l2 {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		if !(lo > 0) || (!per && lo != hi) {
			t.Errorf("per neuron %v: readout_l2 from %g to %g", per, lo, hi)
		}
		t.Logf("per neuron %v: readout_l2 from %.3g to %.3g", per, lo, hi)
	}
}
