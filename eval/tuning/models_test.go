package tuning

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestTwoPeakAndGaussianRecovery(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	centers := grid(60, 6, 3)
	counts := make([]int, 60)
	for i := range counts {
		counts[i] = 5 + i%4
	}
	// Noise-free two-peak curve: the fit must return the generating
	// parameters [b, A1, A2, kappa, mu]; 1e-5 relative as in TestVonMisesRecovery.
	want := []float64{1, 3, 1.5, 3, 40}
	means := make([]float64, 60)
	for i, x := range centers {
		c := math.Cos(2 * math.Pi * (x - want[4]) / 360)
		means[i] = want[0] + want[1]*math.Exp(want[3]*(c-1)) + want[2]*math.Exp(want[3]*(-c-1))
	}
	m := NewVonMisesTwoPeak(centers, 360, 4, rng)
	if err := m.Fit(counts, means); err != nil {
		t.Fatal(err)
	}
	for i, w := range want {
		if !near(m.Params()[i], w, 1e-5*math.Max(1, w)) {
			t.Errorf("two-peak param %d = %v, want %v (all %v)", i, m.Params()[i], w, m.Params())
		}
	}
	// Gaussian bump on a 0..59 cm track: [b, A, mu, s].
	pos := grid(60, 1, 0)
	wantG := []float64{0.5, 2, 23.3, 5}
	for i, x := range pos {
		d := (x - wantG[2]) / wantG[3]
		means[i] = wantG[0] + wantG[1]*math.Exp(-0.5*d*d)
	}
	g := NewGaussianBump(pos, 3, rng)
	if err := g.Fit(counts, means); err != nil {
		t.Fatal(err)
	}
	for i, w := range wantG {
		if !near(g.Params()[i], w, 1e-5*math.Max(1, w)) {
			t.Errorf("gaussian param %d = %v, want %v (all %v)", i, g.Params()[i], w, g.Params())
		}
	}
}

func TestDeterministicForSeed(t *testing.T) {
	centers := grid(36, 10, 5)
	counts := make([]int, 36)
	rng := rand.New(rand.NewPCG(1, 1))
	means := make([]float64, 36)
	for i := range counts {
		counts[i] = 4
		means[i] = rng.NormFloat64() + math.Cos(2*math.Pi*centers[i]/360)
	}
	fit := func() []float64 {
		m := NewVonMises(centers, 360, 5, rand.New(rand.NewPCG(9, 9)))
		if err := m.Fit(counts, means); err != nil {
			t.Fatal(err)
		}
		return append([]float64(nil), m.Params()...)
	}
	a, b := fit(), fit()
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("same seed, different params: %v vs %v", a, b)
		}
	}
}

func TestSmoothLinear(t *testing.T) {
	// Periodic axis, equal counts N, ybar = cos(2 pi k b / B): a Fourier mode
	// is an eigenvector of the circulant L^T L with eigenvalue
	// (2 - 2 cos(2 pi k / B))^2, so w = ybar N / (N + lambda (2 - 2cos)^2)
	// [derived here].
	const B, N, k = 24, 6, 3
	lambda := 2.5
	centers := grid(B, 15, 0)
	counts := make([]int, B)
	means := make([]float64, B)
	for b := range means {
		counts[b] = N
		means[b] = math.Cos(2 * math.Pi * k * float64(b) / B)
	}
	m := NewSmoothLinear(centers, 360, lambda)
	if err := m.Fit(counts, means); err != nil {
		t.Fatal(err)
	}
	ev := 2 - 2*math.Cos(2*math.Pi*k/B)
	shrink := N / (N + lambda*ev*ev)
	for b, w := range m.Params() {
		// 1e-12: a 24 x 24 Cholesky solve of a well-conditioned system.
		if !near(w, means[b]*shrink, 1e-12) {
			t.Fatalf("bin %d: w = %v, want %v", b, w, means[b]*shrink)
		}
	}
	// The cached factorisation is reused for a second neuron with the same counts.
	for b := range means {
		means[b] *= 2
	}
	if err := m.Fit(counts, means); err != nil {
		t.Fatal(err)
	}
	if !near(m.Params()[0], 2*shrink, 1e-12) {
		t.Errorf("cached solve: w0 = %v, want %v", m.Params()[0], 2*shrink)
	}
	// Non-periodic axis: a straight line is in the null space of the
	// penalty and passes unchanged, whatever lambda; an empty bin in the
	// middle is filled in on the line.
	lin := NewSmoothLinear(grid(10, 1, 0), 0, 100)
	c := []int{3, 3, 3, 0, 3, 3, 3, 3, 3, 3}
	mm := make([]float64, 10)
	for i := range mm {
		mm[i] = 2 - 0.5*float64(i)
	}
	mm[3] = math.NaN() // ignored: empty bin
	if err := lin.Fit(c, mm); err != nil {
		t.Fatal(err)
	}
	for i, w := range lin.Params() {
		if !near(w, 2-0.5*float64(i), 1e-9) { // 1e-9: lambda 100 raises the condition number
			t.Errorf("line bin %d: %v", i, w)
		}
	}
}

func TestNearestBin(t *testing.T) {
	centers := grid(60, 6, 3) // 3, 9, ..., 357
	cases := []struct {
		x      float64
		period float64
		want   int
	}{
		{359, 360, 59}, {0.5, 360, 0}, {-1, 360, 59}, {361, 360, 0}, {6, 360, 0}, // tie at 6: lower bin
		{-100, 0, 0}, {1000, 0, 59}, {180, 0, 29}, {183.1, 360, 30},
	}
	for _, c := range cases {
		if got := nearestBin(centers, c.x, c.period); got != c.want {
			t.Errorf("nearestBin(%v, period %v) = %d, want %d", c.x, c.period, got, c.want)
		}
	}
	m := NewCondMean(4)
	if err := m.Fit([]int{1, 2, 0, 1}, []float64{5, 6, 0, 8}); err != nil {
		t.Fatal(err)
	}
	dst := make([]float64, 4)
	m.Predict(dst, []float64{0, 1.4, 2, 9})
	// Bin 2 is empty: grand mean (5 + 12 + 8)/4 = 6.25 [computed by hand]; 9 clamps to bin 3.
	if dst[0] != 5 || dst[1] != 6 || dst[2] != 6.25 || dst[3] != 8 {
		t.Errorf("CondMean.Predict = %v", dst)
	}
}

// TestNoPanicOnOddData fits every model to awkward but valid data (few
// non-empty bins, large offsets, tiny spread, spikes) and requires finite
// predictions and no panic.
func TestNoPanicOnOddData(t *testing.T) {
	rng := rand.New(rand.NewPCG(51, 52))
	centers := grid(12, 30, 15)
	models := []Model{
		NewVonMises(centers, 360, 3, rng), NewVonMisesTwoPeak(centers, 360, 3, rng),
		NewGaussianBump(centers, 3, rng), NewSmoothLinear(centers, 360, 3), NewSmoothLinear(centers, 0, 3),
		NewCondMeanAt(centers, 360),
	}
	dst := make([]float64, len(centers))
	for trial := 0; trial < 200; trial++ {
		counts := make([]int, 12)
		means := make([]float64, 12)
		present := 1 + rng.IntN(12)
		for k := 0; k < present; k++ {
			counts[rng.IntN(12)] = 1 + rng.IntN(5)
		}
		off := []float64{0, 1e6, -3e3}[trial%3]
		scale := []float64{1, 1e-9, 1e4}[trial%3]
		for b := range means {
			means[b] = off + scale*rng.NormFloat64()
			if trial%7 == 0 && b == 4 {
				means[b] += 50 * scale // a spike
			}
		}
		for _, m := range models {
			if err := m.Fit(counts, means); err != nil {
				t.Fatalf("%s: %v", m.Name(), err)
			}
			m.Predict(dst, centers)
			for _, v := range dst {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("%s trial %d: prediction %v (params %v)", m.Name(), trial, dst, m.Params())
				}
			}
		}
	}
}
