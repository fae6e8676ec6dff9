package acuity

import (
	"math"
	"math/rand/v2"
	"testing"
)

// satPop simulates B conditions on a line (stimulus b*ds) with linear tuning,
// independent private noise of variance v_i and differential correlations:
// r = mu0 + fp s + sqrt(v) z + sqrt(eps) fp xi. Every neuron has
// fp_i^2 / v_i = a, so any subset of N neurons has I0 = a N and, by
// Sherman-Morrison, I = a N / (1 + eps a N) exactly (the planted truth).
func satPop(rng *rand.Rand, n, B, T int, a, eps, ds float64) (y []float32, cond []int) {
	mu0 := make([]float64, n)
	sd := make([]float64, n)
	fp := make([]float64, n)
	for i := range mu0 {
		mu0[i] = 2 + 8*rng.Float64()
		sd[i] = 0.5 + rng.Float64()
		fp[i] = math.Sqrt(a) * sd[i] * float64(1-2*rng.IntN(2))
	}
	se := math.Sqrt(eps)
	y = make([]float32, 0, B*T*n)
	for b := 0; b < B; b++ {
		s := float64(b) * ds
		for t := 0; t < T; t++ {
			xi := se * rng.NormFloat64()
			for i := 0; i < n; i++ {
				y = append(y, float32(mu0[i]+fp[i]*(s+xi)+sd[i]*rng.NormFloat64()))
			}
			cond = append(cond, b)
		}
	}
	return y, cond
}

func lineAxis(B int, ds float64) Conditions {
	v := make([]float64, B)
	for b := range v {
		v[b] = float64(b) * ds
	}
	return Conditions{Values: v}
}

// TestSaturationRecovery: information against population size follows the
// planted curve a N/(1 + eps a N), and FitSaturation recovers a and eps.
func TestSaturationRecovery(t *testing.T) {
	const (
		n, B, T = 300, 6, 250
		a, eps  = 0.1, 0.1 // planted: asymptote 1/eps = 10
		ds      = 1.0
	)
	sizes := []int{10, 20, 40, 80, 120, 160}
	sets := 1
	if !testing.Short() {
		sets = 8
	}
	var sumEps, sumA float64
	covered := 0
	for k := 0; k < sets; k++ {
		rng := rand.New(rand.NewPCG(uint64(k)+100, 3))
		y, cond := satPop(rng, n, B, T, a, eps, ds)
		c, err := InfoVsSize(y, n, cond, lineAxis(B, ds), sizes, 10, rng)
		if err != nil {
			t.Fatal(err)
		}
		curves := c.Curves(-1)
		if k == 0 {
			mean := make([]float64, len(sizes))
			meanCurve(mean, curves, len(sizes), nil)
			for s, N := range sizes {
				want := a * float64(N) / (1 + eps*a*float64(N)) // planted truth
				// Pairs and repeats share trials: judge against the
				// single-estimate InfoSE over sqrt(pairs) as a rough scale.
				se := InfoSE(want, T, T, N, ds) / math.Sqrt(B-1)
				t.Logf("N=%d: mean info %.4f, truth %.4f (rough s.e. %.4f)", N, mean[s], want, se)
				if d := math.Abs(mean[s] - want); d > 4*se {
					t.Errorf("N=%d: mean info %v, want %v (rough s.e. %v)", N, mean[s], want, se)
				}
			}
		}
		sat, err := FitSaturation(sizes, curves, 200, rng)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("set %d: a %.4f (planted %v), eps %.4f (planted %v), asymptote %.3f [%.3f, %.3f] (planted %v)",
			k, sat.A, a, sat.Eps, eps, sat.Asymptote, sat.Lo, sat.Hi, 1/eps)
		sumEps += sat.Eps
		sumA += sat.A
		if sat.Lo <= 1/eps && 1/eps <= sat.Hi {
			covered++
		}
		// One data set: eps within 25% (the estimate of eps rests on the
		// trial noise along f', shared by all subsets; its spread over sets
		// is logged by the long version).
		if math.Abs(sat.Eps-eps) > 0.25*eps || math.Abs(sat.A-a) > 0.25*a {
			t.Errorf("set %d: a %v eps %v, want %v %v", k, sat.A, sat.Eps, a, eps)
		}
	}
	if sets > 1 {
		mEps, mA := sumEps/float64(sets), sumA/float64(sets)
		t.Logf("over %d sets: mean eps %.4f (planted %v), mean a %.4f (planted %v); subset-bootstrap interval covered 1/eps in %d of %d",
			sets, mEps, eps, mA, a, covered, sets)
		if math.Abs(mEps-eps) > 0.1*eps || math.Abs(mA-a) > 0.1*a {
			t.Errorf("mean eps %v mean a %v, want %v %v", mEps, mA, eps, a)
		}
	}
}

// TestFitSaturationExact: noise-free points on the model curve give back
// its parameters (values computed from the model itself).
func TestFitSaturationExact(t *testing.T) {
	cases := []struct {
		name   string
		a, eps float64
	}{
		{"saturating", 0.5, 0.02},
		{"weak", 0.05, 0.001},
		{"linear", 0.2, 0},
	}
	sizes := []int{5, 10, 20, 50, 100, 200}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			curve := make([]float64, len(sizes))
			for s, N := range sizes {
				curve[s] = c.a * float64(N) / (1 + c.eps*c.a*float64(N))
			}
			sat, err := FitSaturation(sizes, curve, 0, nil)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(sat.A-c.a) > 1e-6*c.a || math.Abs(sat.Eps-c.eps) > 1e-6*math.Max(c.eps, 1e-3) {
				t.Errorf("got a %v eps %v want %v %v", sat.A, sat.Eps, c.a, c.eps)
			}
			if c.eps == 0 && !math.IsInf(sat.Asymptote, 1) {
				t.Errorf("got asymptote %v want +Inf", sat.Asymptote)
			}
		})
	}
}
