package tuning

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/optimize"
)

// kind selects the curve family of a curveFit.
type kind int

const (
	kindVonMises kind = iota
	kindVonMisesTwo
	kindGauss
)

// Bounds of the transformed nonlinear parameters. Outside them the objective
// is evaluated at the bound (with zero gradient along that parameter).
const (
	logKappaMin = -5  // kappa ~ 0.0067: nearly flat
	logKappaMax = 6.5 // kappa ~ 665: narrower than any 6-degree bin
)

// curveFit fits b + sum_k A_k g_k(x; p) by weighted least squares with the
// linear coefficients (b, A_k) eliminated in closed form for each value of
// the two nonlinear parameters p (variable projection, Golub & Pereyra 1973):
// the optimiser sees only p, and the gradient of the projected loss equals
// the partial gradient of the full loss at the optimal coefficients.
//
// For numerical scale the means are standardised (weighted mean 0, weighted
// variance 1) and the weights normalised to sum 1 before fitting.
type curveFit struct {
	kind    kind
	centers []float64
	period  float64
	cosC    []float64 // cos(phi_b) for all bins (periodic kinds)
	sinC    []float64
	starts  int
	rng     *rand.Rand
	// Per-fit data over the non-empty bins (capacity B).
	x, cx, sx, w, y []float64
	// Scratch for the objective: basis values g (K x nbins) and derivatives.
	g, dg0, dg1 []float64
	// Bounds of the Gaussian parameters, set per fit.
	muLo, muHi, lsLo, lsHi float64
	// Result in original units.
	params []float64
	note   string
	min    minimizer
	// conv and settings are the optimiser's settings, kept to spare an
	// allocation per fit (the converger is reset by every run).
	conv     optimize.FunctionConverge
	settings optimize.Settings
	// gonumRef runs optimize.Minimize instead of the minimizer: the
	// reference the minimizer reproduces (tests only).
	gonumRef bool
}

func newCurveFit(k kind, centers []float64, period float64, starts int, rng *rand.Rand) *curveFit {
	B := len(centers)
	f := &curveFit{kind: k, centers: append([]float64(nil), centers...), period: period,
		starts: max(starts, 1), rng: rng,
		x: make([]float64, B), cx: make([]float64, B), sx: make([]float64, B),
		w: make([]float64, B), y: make([]float64, B),
		g: make([]float64, 2*B), dg0: make([]float64, 2*B), dg1: make([]float64, 2*B),
	}
	if k != kindGauss {
		f.cosC = make([]float64, B)
		f.sinC = make([]float64, B)
		for b, c := range centers {
			phi := 2 * math.Pi * c / period
			f.cosC[b], f.sinC[b] = math.Cos(phi), math.Sin(phi)
		}
	}
	switch k {
	case kindVonMises:
		f.params = make([]float64, 4)
	case kindVonMisesTwo:
		f.params = make([]float64, 5)
	case kindGauss:
		f.params = make([]float64, 4)
	}
	return f
}

// nlin returns the number of non-constant basis functions K.
func (f *curveFit) nlin() int {
	if f.kind == kindVonMisesTwo {
		return 2
	}
	return 1
}

// basis fills g (K x n) and its derivatives dg0, dg1 with respect to the two
// nonlinear parameters p, and returns the clipped p and whether each was
// clipped.
func (f *curveFit) basis(p []float64, n int) (p0, p1 float64, clip0, clip1 bool) {
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

// secondPeak returns exp(kap (-c - 1)), the second bump of the two-peak
// von Mises basis, from the first, a = exp(kap (c - 1)), and e2 =
// exp(-2 kap): a times the second is e2, so the second is e2 / a
// [derived], a division in place of an exponential (the basis's largest
// cost). Both ways round an exponent of size up to 2 kappa, so they agree
// to a few eps (1 + 2 kappa) relative (eps = 2^-53; TestSecondPeak), about
// 1e-13 at the narrowest curves and 1e-15 at typical ones.
// Where e2 or a is not a normal number (kap above about 345, or a bin
// far from the first peak of a narrow curve) the quotient would lose
// digits, and the exponential is taken.
func secondPeak(a, e2, kap, c float64) float64 {
	const tiny = 0x1p-1000
	if e2 >= tiny && a >= tiny {
		return e2 / a
	}
	return math.Exp(kap * (-c - 1))
}

// solveLinear returns the weighted least-squares coefficients c (length K+1,
// c[0] the constant) for the basis in f.g, with a tiny relative ridge on the
// non-constant columns so that a basis collinear with the constant (kappa -> 0)
// stays solvable.
func (f *curveFit) solveLinear(c []float64, n int) {
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
	solve3(c, &G, &h)
}

// solve3 solves the 3 x 3 normal equations G c = h of solveLinear's two-peak
// case, with its tiny relative ridge on the non-constant columns (G is
// changed), by Cholesky (upper triangle used).
func solve3(c []float64, G *[3][3]float64, h *[3]float64) {
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

// objective returns the projected weighted SSE at p and, if grad != nil, its
// gradient.
func (f *curveFit) objective(grad, p []float64, n int) float64 {
	if f.kind != kindGauss {
		return f.objectiveVonMises(grad, p, n)
	}
	_, _, clip0, clip1 := f.basis(p, n)
	var c [3]float64
	f.solveLinear(c[:], n)
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

// fit runs the multi-start optimisation for one neuron. It returns false with
// a note when the data are flat or every start failed; the caller then stores
// the constant fit.
func (f *curveFit) fit(counts []int, means []float64) (ok bool, n int, ym, ysd float64, best [2]float64) {
	n = 0
	var tot float64
	for b, c := range counts {
		if c == 0 {
			continue
		}
		f.x[n] = f.centers[b]
		if f.cosC != nil {
			f.cx[n], f.sx[n] = f.cosC[b], f.sinC[b]
		}
		f.w[n] = float64(c)
		f.y[n] = means[b]
		tot += float64(c)
		n++
	}
	for i := 0; i < n; i++ {
		f.w[i] /= tot
		ym += f.w[i] * f.y[i]
	}
	for i := 0; i < n; i++ {
		d := f.y[i] - ym
		ysd += f.w[i] * d * d
	}
	ysd = math.Sqrt(ysd)
	if ysd == 0 || n < 2 {
		f.note = "flat data: constant fit"
		return false, n, ym, ysd, best
	}
	amax := 0
	for i := 0; i < n; i++ {
		f.y[i] = (f.y[i] - ym) / ysd
		if f.y[i] > f.y[amax] {
			amax = i
		}
	}
	xlo, xhi := f.x[0], f.x[n-1]
	span := xhi - xlo
	if f.kind == kindGauss {
		spacing := span / float64(n-1)
		f.muLo, f.muHi = xlo-span, xhi+span
		f.lsLo, f.lsHi = math.Log(spacing/10), math.Log(10*span)
	}
	// gonum asks for the value and the gradient at the same point in
	// separate calls; one evaluation computes both and is cached.
	var lastP, lastG [2]float64
	lastF := math.NaN()
	eval := func(p []float64) {
		if lastP[0] == p[0] && lastP[1] == p[1] && !math.IsNaN(lastF) {
			return
		}
		lastF = f.objective(lastG[:], p, n)
		lastP = [2]float64{p[0], p[1]}
	}
	prob := optimize.Problem{
		Func: func(p []float64) float64 { eval(p); return lastF },
		Grad: func(grad, p []float64) { eval(p); copy(grad, lastG[:]) },
	}
	f.conv = optimize.FunctionConverge{Absolute: 1e-13, Relative: 1e-11, Iterations: 10}
	f.settings = optimize.Settings{
		GradientThreshold: 1e-8,
		Converger:         &f.conv,
		MajorIterations:   200,
		FuncEvaluations:   2000,
	}
	// The starting points are screened: the objective is evaluated at each,
	// and BFGS runs from the best one only (an evaluation costs little; a
	// run of the optimiser a few dozen evaluations plus its set-up).
	var cands [][2]float64
	for s := 0; s < f.starts; s++ {
		var start [2]float64
		switch {
		case f.kind == kindGauss && s == 0:
			start = [2]float64{f.x[amax], math.Log(math.Max(span/6, math.Exp(f.lsLo)))}
		case f.kind == kindGauss:
			start = [2]float64{xlo + span*f.rng.Float64(), f.lsLo + 0.7*(f.lsHi-f.lsLo)*f.rng.Float64()}
		case s == 0:
			start = [2]float64{math.Log(2), 2 * math.Pi * f.x[amax] / f.period}
		default:
			start = [2]float64{math.Log(0.5) + math.Log(40)*f.rng.Float64(), 2 * math.Pi * f.rng.Float64()}
		}
		cands = append(cands, start)
	}
	bestStart, bestStartF := -1, math.Inf(1)
	for i, c := range cands {
		if v := prob.Func(c[:]); v < bestStartF {
			bestStart, bestStartF = i, v
		}
	}
	bestF := math.Inf(1)
	if bestStart >= 0 {
		start := cands[bestStart]
		// BFGS as optimize.Minimize runs it, in this goroutine (see
		// minimizer). A stopped-early result is still a candidate.
		var F float64
		var X []float64
		if f.gonumRef {
			F = math.NaN()
			if res, _ := optimize.Minimize(prob, start[:], &f.settings, &f.min.bfgs); res != nil {
				F, X = res.F, res.X
			}
		} else {
			F, X = f.min.run(prob, start[:], &f.settings)
		}
		if !math.IsNaN(F) {
			bestF = F
			copy(best[:], X)
		}
	}
	if math.IsInf(bestF, 1) {
		f.note = "optimiser failed from every start: constant fit"
		return false, n, ym, ysd, best
	}
	return true, n, ym, ysd, best
}
