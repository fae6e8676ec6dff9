package acuity

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// gaussPop is a Gaussian population with linear tuning mu(s) = mu0 + fp s
// and a stimulus-independent covariance Sigma = Sigma0 + eps fp fp^T
// (differential correlations of variance eps, Moreno-Bote et al. 2014 [mem]).
type gaussPop struct {
	n     int
	mu0   []float64
	fp    []float64
	sigma *mat.SymDense
	chol  mat.TriDense // lower factor of sigma
	sig0  *mat.SymDense
	eps   float64
}

// newGaussPop draws a population: Sigma0 = diag(v) + U U^T / rank (a
// low-rank part that is not aligned with fp), tuning slopes of random sign.
func newGaussPop(rng *rand.Rand, n, rank int, eps float64) *gaussPop {
	g := &gaussPop{n: n, mu0: make([]float64, n), fp: make([]float64, n), eps: eps}
	for i := range g.mu0 {
		g.mu0[i] = 5 + 5*rng.Float64()
		g.fp[i] = (0.3 + 0.4*rng.Float64()) * float64(1-2*rng.IntN(2))
	}
	s0 := mat.NewSymDense(n, nil)
	u := make([]float64, n*rank)
	for i := range u {
		u[i] = rng.NormFloat64()
	}
	for i := 0; i < n; i++ {
		for j := 0; j <= i; j++ {
			v := 0.0
			for k := 0; k < rank; k++ {
				v += u[i*rank+k] * u[j*rank+k]
			}
			if rank > 0 {
				v /= float64(rank)
			}
			if i == j {
				v += 0.5 + rng.Float64()
			}
			s0.SetSym(i, j, v)
		}
	}
	g.sig0 = s0
	g.sigma = mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j <= i; j++ {
			g.sigma.SetSym(i, j, s0.At(i, j)+eps*g.fp[i]*g.fp[j])
		}
	}
	var c mat.Cholesky
	if !c.Factorize(g.sigma) {
		panic("sigma not positive definite")
	}
	c.LTo(&g.chol)
	return g
}

// quad returns v^T S^-1 v.
func quad(s *mat.SymDense, v []float64) float64 {
	var c mat.Cholesky
	if !c.Factorize(s) {
		panic("not positive definite")
	}
	x := mat.NewVecDense(len(v), nil)
	if err := c.SolveVecTo(x, mat.NewVecDense(len(v), v)); err != nil {
		panic(err)
	}
	return mat.Dot(x, mat.NewVecDense(len(v), v))
}

// info returns the true linear Fisher information f'^T Sigma^-1 f'.
func (g *gaussPop) info() float64 { return quad(g.sigma, g.fp) }

// shuffledInfo returns f'^T diag(Sigma)^-1 f'.
func (g *gaussPop) shuffledInfo() float64 {
	s := 0.0
	for i, f := range g.fp {
		s += f * f / g.sigma.At(i, i)
	}
	return s
}

// sample writes count trials at stimulus s into y (rows appended) and cond.
func (g *gaussPop) sample(rng *rand.Rand, y []float32, cond []int, s float64, c, count int) ([]float32, []int) {
	z := make([]float64, g.n)
	for t := 0; t < count; t++ {
		for i := range z {
			z[i] = rng.NormFloat64()
		}
		for i := 0; i < g.n; i++ {
			v := g.mu0[i] + g.fp[i]*s
			for k := 0; k <= i; k++ {
				v += g.chol.At(i, k) * z[k]
			}
			y = append(y, float32(v))
		}
		cond = append(cond, c)
	}
	return y, cond
}

// TestShermanMorrison checks the simulation's own truth: f'^T Sigma^-1 f'
// equals I0/(1 + eps I0), I0 = f'^T Sigma0^-1 f' (Sherman-Morrison [pub,
// textbook identity]).
func TestShermanMorrison(t *testing.T) {
	g := newGaussPop(rand.New(rand.NewPCG(1, 2)), 15, 3, 0.2)
	i0 := quad(g.sig0, g.fp)
	got, want := g.info(), i0/(1+g.eps*i0)
	if math.Abs(got-want) > 1e-10*want {
		t.Fatalf("got %v want %v", got, want)
	}
}

// TestBiasCorrectionSimulation: over repeated simulated data sets, the mean
// bias-corrected estimate matches the truth f'^T Sigma^-1 f', the naive
// estimate is biased by the derived factor E[I_naive] = nu/(nu-N-1) (I + N k)
// (doc.go), the spread matches InfoSE, and the shuffled estimate matches
// f'^T diag(Sigma)^-1 f'. Equal and unequal trial counts.
func TestBiasCorrectionSimulation(t *testing.T) {
	sets := 300
	if !testing.Short() {
		sets = 3000
	}
	cases := []struct {
		name   string
		n      int
		ta, tb int
		ds     float64
		eps    float64
	}{
		{"equal_T50_N20", 20, 50, 50, 1, 0.05},
		{"unequal_T30_70_N25", 25, 30, 70, 1, 0.05},
		{"near_limit_T40_N60", 60, 40, 40, 2, 0.02},
	}
	for ci, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(ci)+10, 7))
			g := newGaussPop(rng, c.n, 4, c.eps)
			truth, truthSh := g.info(), g.shuffledInfo()
			ax := Conditions{Values: []float64{0, c.ds}}
			var sumBC, sumBC2, sumNaive, sumSh float64
			for k := 0; k < sets; k++ {
				y, cond := g.sample(rng, nil, nil, 0, 0, c.ta)
				y, cond = g.sample(rng, y, cond, c.ds, 1, c.tb)
				res, err := LinearInfo(y, c.n, cond, ax, nil)
				if err != nil {
					t.Fatal(err)
				}
				p := res[0]
				sumBC += p.Info
				sumBC2 += p.Info * p.Info
				sumNaive += p.Naive
				sumSh += p.Shuffled
			}
			fs := float64(sets)
			mBC := sumBC / fs
			sdBC := math.Sqrt(sumBC2/fs - mBC*mBC)
			semBC := sdBC / math.Sqrt(fs)
			nu := float64(c.ta + c.tb - 2)
			N := float64(c.n)
			k := (1/float64(c.ta) + 1/float64(c.tb)) / (c.ds * c.ds)
			wantNaive := nu / (nu - N - 1) * (truth + N*k) // derived, doc.go
			seTruth := InfoSE(truth, c.ta, c.tb, c.n, c.ds)
			t.Logf("truth %.4f: mean corrected / truth %.4f (s.e.m. %.4f); mean naive / truth %.4f, derived %.4f; sd %.4f vs InfoSE %.4f; shuffled %.4f / truth %.4f",
				truth, mBC/truth, semBC/truth, sumNaive/fs/truth, wantNaive/truth, sdBC, seTruth, sumSh/fs, truthSh)
			// Unbiased (derived): within 4 s.e.m. of the simulation mean and a few percent.
			if d := math.Abs(mBC - truth); d > 4*semBC || d > 0.05*truth {
				t.Errorf("mean corrected %v, want truth %v (s.e.m. %v)", mBC, truth, semBC)
			}
			// Naive bias factor (derived): its s.e.m. scales with the corrected one by nu/(nu-N-1).
			if d := math.Abs(sumNaive/fs - wantNaive); d > 4*semBC*nu/(nu-N-1) {
				t.Errorf("mean naive %v, want derived %v", sumNaive/fs, wantNaive)
			}
			// Spread (derived variance): the sd of a sample of sets has relative s.e. about 1/sqrt(2 sets) plus non-normality.
			if r := sdBC / seTruth; math.Abs(r-1) > 6/math.Sqrt(2*fs)+0.03 {
				t.Errorf("sd of corrected %v, InfoSE at truth %v (ratio %v)", sdBC, seTruth, r)
			}
			// Shuffled estimate: unbiased (derived) for the diagonal truth; its
			// sd is unknown in closed form, use 6 s.e.m. of the corrected one as a scale.
			if d := math.Abs(sumSh/fs - truthSh); d > 0.05*truthSh {
				t.Errorf("mean shuffled %v, want %v", sumSh/fs, truthSh)
			}
		})
	}
}
