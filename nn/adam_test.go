package nn

import "testing"

// eval/methods.md §9 E7 [computed]: Adam with defaults from theta0 = 1.
// Tolerance 1e-12 absolute: the values are exact to ~1e-16 in float64.
func TestAdamMethodsE7(t *testing.T) {
	run := func(wd float64, decoupled bool, grads ...float64) float64 {
		a := NewAdam(1)
		a.WeightDecay, a.Decoupled = wd, decoupled
		p := []float64{1}
		for _, g := range grads {
			a.Step(p, []float64{g})
		}
		return p[0]
	}
	for _, tc := range []struct {
		name string
		got  float64
		want float64
	}{
		{"g=[2]", run(0, false, 2), 0.999000000005},
		{"g=[2,1]", run(0, false, 2, 1), 0.9980678203720851},
		{"L2 0.01, g=0", run(0.01, false, 0), 0.999000000999999},
		{"decoupled 0.01, g=0", run(0.01, true, 0), 0.99999},
	} {
		if !closeTo(tc.got, tc.want, 0, 1e-12) {
			t.Errorf("%s: got %.17g, want %.17g", tc.name, tc.got, tc.want)
		}
	}
}

type adamFixture struct {
	Name                  string
	Decoupled             bool
	LR, Beta1, Beta2, Eps float64
	WeightDecay           float64 `json:"weight_decay"`
	A, C, Theta0          []float64
	Grads, Params         [][]float64
}

// torch 1.13 float64 torch.optim.Adam (weight_decay = L2) and
// torch.optim.AdamW, 10 steps on 0.5*sum(a*(theta-c)^2)
// (testdata/nn/gen_nn.py -> adam.json). Tolerance 1e-13 relative + 1e-15
// absolute: the update is the same formula; only the rounding of the
// division by sqrt(1-beta2^t) differs (a multiply here), a few ulps per step.
func TestAdamTorch(t *testing.T) {
	var cases []adamFixture
	loadFixture(t, "adam.json", &cases)
	if len(cases) != 4 {
		t.Fatalf("%d adam cases, want 4", len(cases))
	}
	for _, tc := range cases {
		t.Run(tc.Name, func(t *testing.T) {
			a := NewAdam(len(tc.Theta0))
			a.LR, a.Beta1, a.Beta2, a.Eps = tc.LR, tc.Beta1, tc.Beta2, tc.Eps
			a.WeightDecay, a.Decoupled = tc.WeightDecay, tc.Decoupled
			p := append([]float64(nil), tc.Theta0...)
			g := make([]float64, len(p))
			for s := range tc.Params {
				for i := range p {
					g[i] = tc.A[i] * (p[i] - tc.C[i])
				}
				checkClose(t, "grad", g, tc.Grads[s], 1e-12, 1e-14)
				saved := append([]float64(nil), g...)
				a.Step(p, g)
				checkClose(t, "grads unchanged", g, saved, 0, 0)
				checkClose(t, "params", p, tc.Params[s], 1e-13, 1e-15)
			}
			if a.T != len(tc.Params) {
				t.Errorf("T = %d, want %d", a.T, len(tc.Params))
			}
		})
	}
}

func TestAdamPanics(t *testing.T) {
	a := NewAdam(3)
	wantPanic(t, "short grads", func() { a.Step(make([]float64, 3), make([]float64, 2)) })
	wantPanic(t, "wrong state", func() { a.Step(make([]float64, 4), make([]float64, 4)) })
}
