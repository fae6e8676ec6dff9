package tuning

import (
	"math"
	"math/rand/v2"
	"testing"
)

func near(got, want, tol float64) bool {
	if math.IsNaN(want) {
		return math.IsNaN(got)
	}
	return math.Abs(got-want) <= tol
}

func grid(n int, step, offset float64) []float64 {
	c := make([]float64, n)
	for i := range c {
		c[i] = offset + step*float64(i)
	}
	return c
}

func TestDescribeE5(t *testing.T) {
	// eval/methods.md §9 E5 [computed]: directions 0..315 by 45, r = [8,3,2,3,4,3,2,3].
	r := []float64{8, 3, 2, 3, 4, 3, 2, 3}
	d := Describe(r, grid(8, 45, 0), 360)
	// 1e-12: sums of eight small integers times cos/sin of multiples of 45 deg.
	cases := []struct {
		name      string
		got, want float64
	}{
		{"1-CV orientation", d.OneMinusCV, 2.0 / 7},
		{"direction vector", d.DirVector, 1.0 / 7},
		{"OSI", d.OSI, 0.6},
		{"DSI", d.DSI, 1.0 / 3},
		{"Peak", d.Peak, 0},
	}
	for _, c := range cases {
		if !near(c.got, c.want, 1e-12) {
			t.Errorf("E5 %s = %.15g, want %.15g", c.name, c.got, c.want)
		}
	}
	// Preferred direction: the vector sum points at 0 deg (symmetric curve);
	// accept either side of the wrap.
	if p := d.Preferred; !(p < 1e-9 || p > 360-1e-9) {
		t.Errorf("E5 Preferred = %v, want 0", p)
	}
}

func TestDescribeOrientation(t *testing.T) {
	// Period-180 axis: the same E5 curve sampled at orientations 0..157.5 by
	// 22.5; r is symmetric about 0 with a second lobe at 90, so 1 - CV uses
	// exp(i 2 pi x / 180): sum r cos(2 pi x/180) = 8-4 + (3+3-3-3)cos45... [computed by hand]
	r := []float64{8, 3, 2, 3, 4, 3, 2, 3}
	d := Describe(r, grid(8, 22.5, 0), 180)
	// Harmonic at phi = 2 pi x/180 in steps of 45 deg is the direction vector of E5: 1/7.
	if !near(d.OneMinusCV, 1.0/7, 1e-12) || !near(d.OSI, (8.0-4)/(8+4), 1e-12) || !math.IsNaN(d.DSI) || !math.IsNaN(d.DirVector) {
		t.Errorf("orientation descriptors = %+v", d)
	}
	// Non-periodic axis: only Preferred and Peak.
	d = Describe([]float64{1, 5, 2}, []float64{10, 20, 30}, 0)
	if d.Preferred != 20 || d.Peak != 20 || !math.IsNaN(d.OSI) || !math.IsNaN(d.OneMinusCV) {
		t.Errorf("non-periodic descriptors = %+v", d)
	}
	// Preferred on a 180 axis: a peak at 150 deg. Vector average of a curve
	// symmetric about 150 must return 150 [symmetry].
	c := grid(12, 15, 0)
	rr := make([]float64, 12)
	for i, x := range c {
		rr[i] = 1 + math.Exp(2*(math.Cos(2*math.Pi*(x-150)/180)-1))
	}
	if d := Describe(rr, c, 180); !near(d.Preferred, 150, 1e-9) {
		t.Errorf("Preferred on 180 axis = %v, want 150", d.Preferred)
	}
}

func TestVonMisesE6(t *testing.T) {
	// eval/methods.md §9 E6 [computed]: b=0, A=1, kappa=1: R(mu + half period) = e^-2.
	m := NewVonMises(grid(60, 6, 0), 360, 1, rand.New(rand.NewPCG(1, 2))).(*Curve)
	copy(m.Params(), []float64{0, 1, 1, 30})
	dst := make([]float64, 2)
	m.Predict(dst, []float64{210, 30})
	if !near(dst[0], 0.1353352832, 1e-10) || !near(dst[0], math.Exp(-2), 1e-15) || dst[1] != 1 {
		t.Errorf("E6: got %v, want e^-2 = 0.1353352832 and 1 at the peak", dst)
	}
}

// synthetic returns counts and noisy means of a von Mises curve.
func synthetic(rng *rand.Rand, centers []float64, period float64, p [4]float64, nTrials int, sd float64) ([]int, []float64) {
	counts := make([]int, len(centers))
	means := make([]float64, len(centers))
	for b, x := range centers {
		counts[b] = nTrials
		f := p[0] + p[1]*math.Exp(p[2]*(math.Cos(2*math.Pi*(x-p[3])/period)-1))
		means[b] = f + sd*rng.NormFloat64()/math.Sqrt(float64(nTrials))
	}
	return counts, means
}

func TestVonMisesRecovery(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	centers := grid(60, 6, 3)
	for _, tc := range []struct {
		name   string
		period float64
		p      [4]float64
	}{
		{"direction", 360, [4]float64{1, 4, 2.5, 123}},
		{"orientation", 180, [4]float64{0.5, 2, 1.2, 170}},
		{"narrow", 360, [4]float64{0, 3, 30, 300}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			c := centers
			if tc.period == 180 {
				c = grid(60, 3, 1.5)
			}
			// Noise-free data: the fit must return the generating parameters.
			counts, means := synthetic(rng, c, tc.period, tc.p, 10, 0)
			m := NewVonMises(c, tc.period, 4, rng)
			if err := m.Fit(counts, means); err != nil {
				t.Fatal(err)
			}
			got := m.Params()
			// 1e-5 relative: BFGS stops at gradient 1e-9 on standardised data.
			for i, w := range tc.p {
				if !near(got[i], w, 1e-5*math.Max(1, math.Abs(w))) {
					t.Errorf("param %d = %v, want %v (all %v)", i, got[i], w, got)
				}
			}
		})
	}
}

func TestFlatAndBadData(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	centers := grid(8, 45, 0)
	counts := []int{3, 3, 3, 3, 0, 3, 3, 3}
	flat := []float64{2, 2, 2, 2, math.NaN(), 2, 2, 2} // NaN in an empty bin is ignored
	models := []Model{
		NewVonMises(centers, 360, 3, rng), NewVonMisesTwoPeak(centers, 360, 3, rng),
		NewGaussianBump(centers, 3, rng), NewSmoothLinear(centers, 360, 1), NewCondMeanAt(centers, 360), NewCondMean(8),
	}
	dst := make([]float64, 8)
	for _, m := range models {
		if err := m.Fit(counts, flat); err != nil {
			t.Errorf("%s: flat data: %v", m.Name(), err)
			continue
		}
		m.Predict(dst, centers)
		for _, v := range dst {
			if !near(v, 2, 1e-9) {
				t.Errorf("%s: flat prediction %v, want 2", m.Name(), dst)
				break
			}
		}
		bad := []float64{1, math.NaN(), 2, 2, 2, 2, 2, 2}
		if err := m.Fit(counts, bad); err == nil {
			t.Errorf("%s: NaN mean accepted", m.Name())
		}
		if err := m.Fit(make([]int, 8), flat); err == nil {
			t.Errorf("%s: no data accepted", m.Name())
		}
		if err := m.Fit([]int{1, -1, 1, 1, 1, 1, 1, 1}, flat); err == nil {
			t.Errorf("%s: negative count accepted", m.Name())
		}
	}
}
