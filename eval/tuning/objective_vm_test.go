package tuning

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestObjectiveVonMisesMatches compares the fused von Mises objective with
// basis, solveLinear and objective as they were before it (kept below as
// the reference): the same value and gradient bit for bit, on random data,
// weights and points, clipped ones and flat data included.
func TestObjectiveVonMisesMatches(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	for _, kind := range []kind{kindVonMises, kindVonMisesTwo} {
		for _, B := range []int{3, 8, 12, 60} {
			centers := grid(B, 360/float64(B), 180/float64(B))
			f := newCurveFit(kind, centers, 360, 1, rng)
			for trial := 0; trial < 400; trial++ {
				n := B - rng.IntN(min(B, 3))
				tot := 0.0
				for i := 0; i < n; i++ {
					f.cx[i], f.sx[i] = f.cosC[i], f.sinC[i]
					f.w[i] = float64(1 + rng.IntN(9))
					tot += f.w[i]
					f.y[i] = rng.NormFloat64()
					if trial%9 == 4 {
						f.y[i] = 0.5 // flat
					}
				}
				for i := 0; i < n; i++ {
					f.w[i] /= tot
				}
				p := []float64{-7 + 15*rng.Float64(), 2 * math.Pi * (2*rng.Float64() - 0.5)}
				var gotG, wantG [2]float64
				got := f.objectiveVonMises(gotG[:], p, n)
				want := f.objectiveReference(wantG[:], p, n)
				if math.Float64bits(got) != math.Float64bits(want) || math.Float64bits(gotG[0]) != math.Float64bits(wantG[0]) || math.Float64bits(gotG[1]) != math.Float64bits(wantG[1]) {
					t.Fatalf("kind %d, %d of %d bins, p %v: %v %v, want %v %v", kind, n, B, p, got, gotG, want, wantG)
				}
				if got2 := f.objectiveVonMises(nil, p, n); math.Float64bits(got2) != math.Float64bits(want) {
					t.Fatalf("without the gradient: %v, want %v", got2, want)
				}
			}
		}
	}
}

// basisReference is basis before objectiveVonMises (the reference), with
// the second peak of the two-peak kind from secondPeak as basis has it
// now (TestSecondPeak checks secondPeak against the exponential).
func (f *curveFit) basisReference(p []float64, n int) (p0, p1 float64, clip0, clip1 bool) {
	switch f.kind {
	case kindVonMises, kindVonMisesTwo:
		u := p[0]
		if u < logKappaMin {
			u, clip0 = logKappaMin, true
		} else if u > logKappaMax {
			u, clip0 = logKappaMax, true
		}
		kap := math.Exp(u)
		e2 := math.Exp(-2 * kap)
		cm, sm := math.Cos(p[1]), math.Sin(p[1])
		for i := 0; i < n; i++ {
			c := f.cx[i]*cm + f.sx[i]*sm // cos(phi - m)
			s := f.sx[i]*cm - f.cx[i]*sm // sin(phi - m)
			g := math.Exp(kap * (c - 1))
			f.g[i] = g
			f.dg0[i] = g * kap * (c - 1)
			f.dg1[i] = g * kap * s
			if f.kind == kindVonMisesTwo {
				g2 := secondPeak(g, e2, kap, c)
				f.g[n+i] = g2
				f.dg0[n+i] = g2 * kap * (-c - 1)
				f.dg1[n+i] = -g2 * kap * s
			}
		}
		return u, p[1], clip0, false
	default: // Gaussian: p = (mu, log sigma)
		mu, ls := p[0], p[1]
		if mu < f.muLo {
			mu, clip0 = f.muLo, true
		} else if mu > f.muHi {
			mu, clip0 = f.muHi, true
		}
		if ls < f.lsLo {
			ls, clip1 = f.lsLo, true
		} else if ls > f.lsHi {
			ls, clip1 = f.lsHi, true
		}
		inv := math.Exp(-2 * ls) // 1/s^2
		for i := 0; i < n; i++ {
			d := f.x[i] - mu
			g := math.Exp(-0.5 * d * d * inv)
			f.g[i] = g
			f.dg0[i] = g * d * inv
			f.dg1[i] = g * d * d * inv
		}
		return mu, ls, clip0, clip1
	}
}

// solveLinearReference is solveLinear before objectiveVonMises.
func (f *curveFit) solveLinearReference(c []float64, n int) {
	w, y := f.w[:n], f.y[:n]
	if f.nlin() == 1 {
		g := f.g[:n]
		var s0, s1, s11, h0, h1 float64
		for i, wi := range w {
			wg := wi * g[i]
			s0 += wi
			s1 += wg
			s11 += wg * g[i]
			h0 += wi * y[i]
			h1 += wg * y[i]
		}
		s11 += 1e-12 * (s11 + 1e-300)
		det := s0*s11 - s1*s1
		if !(det > 0) {
			c[0], c[1] = h0/s0, 0
			return
		}
		c[0] = (s11*h0 - s1*h1) / det
		c[1] = (s0*h1 - s1*h0) / det
		return
	}
	g1, g2 := f.g[:n], f.g[n:2*n]
	var G [3][3]float64
	var h [3]float64
	for i, wi := range w {
		a, b := g1[i], g2[i]
		G[0][0] += wi
		G[0][1] += wi * a
		G[0][2] += wi * b
		G[1][1] += wi * a * a
		G[1][2] += wi * a * b
		G[2][2] += wi * b * b
		h[0] += wi * y[i]
		h[1] += wi * a * y[i]
		h[2] += wi * b * y[i]
	}
	G[1][1] += 1e-12 * (G[1][1] + 1e-300)
	G[2][2] += 1e-12 * (G[2][2] + 1e-300)
	// Cholesky of the 3 x 3 symmetric positive definite G (upper triangle used).
	var L [3][3]float64
	for a := 0; a < 3; a++ {
		for b := 0; b <= a; b++ {
			s := G[b][a]
			for k := 0; k < b; k++ {
				s -= L[a][k] * L[b][k]
			}
			if a == b {
				if s <= 0 {
					s = 1e-300
				}
				L[a][a] = math.Sqrt(s)
			} else {
				L[a][b] = s / L[b][b]
			}
		}
	}
	var z [3]float64
	for a := 0; a < 3; a++ {
		s := h[a]
		for k := 0; k < a; k++ {
			s -= L[a][k] * z[k]
		}
		z[a] = s / L[a][a]
	}
	for a := 2; a >= 0; a-- {
		s := z[a]
		for k := a + 1; k < 3; k++ {
			s -= L[k][a] * c[k]
		}
		c[a] = s / L[a][a]
	}
}

// objectiveReference is objective before objectiveVonMises.
func (f *curveFit) objectiveReference(grad, p []float64, n int) float64 {
	_, _, clip0, clip1 := f.basisReference(p, n)
	var c [3]float64
	f.solveLinearReference(c[:], n)
	K := f.nlin()
	var sse, g0, g1 float64
	for i := 0; i < n; i++ {
		fit := c[0]
		d0, d1 := 0.0, 0.0
		for k := 1; k <= K; k++ {
			j := (k-1)*n + i
			fit += c[k] * f.g[j]
			d0 += c[k] * f.dg0[j]
			d1 += c[k] * f.dg1[j]
		}
		e := fit - f.y[i]
		we := f.w[i] * e
		sse += we * e
		g0 += we * d0
		g1 += we * d1
	}
	if grad != nil {
		grad[0], grad[1] = 2*g0, 2*g1
		if clip0 {
			grad[0] = 0
		}
		if clip1 {
			grad[1] = 0
		}
	}
	return sse
}

// TestSecondPeak: secondPeak against the exponential it replaces
// (math.Exp, Go's standard library). Both round their exponent, whose
// size is up to 2 kappa, so they can differ by that rounding carried
// through the exponential: the relative difference is measured in units
// of eps (1 + 2 kappa), eps = 2^-53, and must stay below 4, over kappa
// from e^-5 to e^6.5 (the fitted range) and every cosine, including the
// narrow curves where it falls back to the exponential. (A relative
// difference of 1e-12 in a basis value is far below what moves a fit.)
func TestSecondPeak(t *testing.T) {
	rng := rand.New(rand.NewPCG(43, 44))
	const eps = 0x1p-53
	worst := 0.0
	for range 200000 {
		kap := math.Exp(logKappaMin + (logKappaMax-logKappaMin)*rng.Float64())
		c := 2*rng.Float64() - 1
		if rng.IntN(10) == 0 {
			c = []float64{-1, 1, 0}[rng.IntN(3)]
		}
		a := math.Exp(kap * (c - 1))
		got := secondPeak(a, math.Exp(-2*kap), kap, c)
		want := math.Exp(kap * (-c - 1))
		if want < 0x1p-1000 {
			if math.Abs(got-want) > 0x1p-1000 {
				t.Fatalf("kappa %v, c %v: %v, want %v", kap, c, got, want)
			}
			continue
		}
		if d := math.Abs(got-want) / want / (eps * (1 + 2*kap)); d > worst {
			worst = d
		}
	}
	t.Logf("largest relative difference: %.2f eps (1 + 2 kappa)", worst)
	if worst > 4 {
		t.Errorf("secondPeak differs from the exponential by %.2f eps (1 + 2 kappa), want <= 4", worst)
	}
}
