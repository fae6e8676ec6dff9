package tuning

import (
	"math"
	"math/rand/v2"
)

// Curve is a parametric tuning curve fitted by weighted least squares from
// the best of several starting points (see NewVonMises, NewVonMisesTwoPeak,
// NewGaussianBump): the objective is evaluated at every starting point and
// gonum's BFGS runs from the one with the lowest value. Screening costs one
// evaluation per point, where each run of the optimiser costs a few dozen
// evaluations, so many points can be screened for the price of one run.
// BFGS runs in the calling goroutine, step for step as optimize.Minimize
// runs it (see minimizer), without Minimize's goroutines.
//
// The two linear parameters (baseline b and amplitudes A) are eliminated in
// closed form for each value of the two nonlinear ones (variable projection,
// Golub & Pereyra 1973), and the nonlinear ones are optimised with BFGS from
// gonum.org/v1/gonum/optimize using the analytic gradient. The amplitude A
// is not constrained in sign: A < 0 describes a dip at mu.
//
// Failure policy: Fit returns an error only for invalid data (see the package
// doc). When the data are flat (all non-empty condition means equal, or a
// single non-empty condition) or the optimiser fails from every start, Fit
// stores the constant curve b = weighted mean (amplitudes 0, width parameters
// NaN), returns nil, and records the reason in Note.
type Curve struct {
	name string
	f    *curveFit
	// Note is empty after a regular fit, otherwise the reason for a
	// constant fallback or the error of the last failed Fit.
	Note string
}

// NewVonMises returns a single-peak von Mises tuning curve for a periodic axis
// (eval/methods.md §7):
//
//	f(x) = b + A exp(kappa (cos(2 pi (x - mu) / P) - 1)),
//
// with P = period (360 gives the direction form, 180 the orientation form).
// Params: [b, A, kappa, mu], mu in [0, P) axis units, kappa in
// [exp(-5), exp(6.5)] (about 0.0067 to 665). starts is the number of starting
// points screened (at least 1): the first is mu at the largest condition
// mean with kappa 2, the rest draw mu uniformly and log kappa uniformly in
// [log 0.5, log 20] from rng. It panics unless period > 0.
func NewVonMises(centers []float64, period float64, starts int, rng *rand.Rand) Model {
	checkCenters("NewVonMises", centers, period)
	if !(period > 0) {
		panic("tuning: NewVonMises: needs a periodic axis (period > 0)")
	}
	return &Curve{name: "vonmises", f: newCurveFit(kindVonMises, centers, period, starts, rng)}
}

// NewVonMisesTwoPeak returns a von Mises curve with two peaks half a period
// apart, a shared width and separate amplitudes:
//
//	f(x) = b + A1 exp(kappa (cos(2 pi (x - mu)/P) - 1)) + A2 exp(kappa (cos(2 pi (x - mu)/P - pi) - 1)).
//
// On a direction axis (P = 360) the peaks are 180 degrees apart, the usual
// model of a direction-selective cell's preferred and null responses. On an
// orientation axis (P = 180) they are 90 degrees apart, which describes a
// cell responding to two orthogonal orientations; use NewVonMises there for
// ordinary orientation tuning. Params: [b, A1, A2, kappa, mu] with A1 >= A2
// (the larger peak is at mu, in [0, P)). Starts as for NewVonMises.
func NewVonMisesTwoPeak(centers []float64, period float64, starts int, rng *rand.Rand) Model {
	checkCenters("NewVonMisesTwoPeak", centers, period)
	if !(period > 0) {
		panic("tuning: NewVonMisesTwoPeak: needs a periodic axis (period > 0)")
	}
	return &Curve{name: "vonmises2", f: newCurveFit(kindVonMisesTwo, centers, period, starts, rng)}
}

// NewGaussianBump returns a Gaussian tuning curve for a non-periodic axis
// (track position, log tone frequency):
//
//	f(x) = b + A exp(-(x - mu)^2 / (2 s^2)).
//
// Params: [b, A, mu, s]. mu is kept within one axis span of the outermost
// non-empty centres and s within [spacing/10, 10 span], spacing = span/(n-1)
// over the n non-empty conditions. The first start is mu at the largest mean
// with s = span/6; the others draw mu uniformly over the span and log s
// uniformly over the lower 70% of its log range.
func NewGaussianBump(centers []float64, starts int, rng *rand.Rand) Model {
	checkCenters("NewGaussianBump", centers, 0)
	return &Curve{name: "gaussian", f: newCurveFit(kindGauss, centers, 0, starts, rng)}
}

// Name returns "vonmises", "vonmises2" or "gaussian".
func (m *Curve) Name() string { return m.name }

// Params returns the fitted parameters (order given by the constructor).
func (m *Curve) Params() []float64 { return m.f.params }

// Fit fits one neuron; see the type documentation for the failure policy.
func (m *Curve) Fit(counts []int, means []float64) error {
	f := m.f
	f.note = ""
	m.Note = ""
	grand, _, err := checkData(m.name, len(f.centers), counts, means)
	nan := math.NaN()
	if err != nil {
		for i := range f.params {
			f.params[i] = nan
		}
		m.Note = err.Error()
		return err
	}
	ok, n, ym, ysd, p := f.fit(counts, means)
	if !ok {
		m.constant(grand)
		m.Note = f.note
		return nil
	}
	// Recover the linear coefficients at the optimum in standardised units.
	u0, u1, _, _ := f.basis(p[:], n)
	var c [3]float64
	f.solveLinear(c[:], n)
	b := ym + ysd*c[0]
	switch f.kind {
	case kindVonMises:
		mu := wrap(u1*f.period/(2*math.Pi), f.period)
		copy(f.params, []float64{b, ysd * c[1], math.Exp(u0), mu})
	case kindVonMisesTwo:
		a1, a2 := ysd*c[1], ysd*c[2]
		mu := u1 * f.period / (2 * math.Pi)
		if a2 > a1 {
			a1, a2 = a2, a1
			mu += f.period / 2
		}
		copy(f.params, []float64{b, a1, a2, math.Exp(u0), wrap(mu, f.period)})
	case kindGauss:
		copy(f.params, []float64{b, ysd * c[1], u0, math.Exp(u1)})
	}
	return nil
}

// constant stores the flat curve at level b.
func (m *Curve) constant(b float64) {
	p := m.f.params
	for i := range p {
		p[i] = 0
	}
	p[0] = b
	switch m.f.kind {
	case kindVonMises:
		p[2], p[3] = math.NaN(), math.NaN()
	case kindVonMisesTwo:
		p[3], p[4] = math.NaN(), math.NaN()
	case kindGauss:
		p[2], p[3] = math.NaN(), math.NaN()
	}
}

func wrap(x, period float64) float64 {
	x = math.Mod(x, period)
	if x < 0 {
		x += period
	}
	return x
}

// Predict writes the fitted curve at x (axis units) into dst.
func (m *Curve) Predict(dst, x []float64) {
	if len(dst) != len(x) {
		panic("tuning: Curve.Predict: len(dst) != len(x)")
	}
	p := m.f.params
	if p[1] == 0 && (len(p) < 5 || p[2] == 0) { // constant (also a fallback)
		for i := range dst {
			dst[i] = p[0]
		}
		return
	}
	switch m.f.kind {
	case kindVonMises:
		b, a, kap, mu := p[0], p[1], p[2], p[3]
		for i, v := range x {
			dst[i] = b + a*math.Exp(kap*(math.Cos(2*math.Pi*(v-mu)/m.f.period)-1))
		}
	case kindVonMisesTwo:
		b, a1, a2, kap, mu := p[0], p[1], p[2], p[3], p[4]
		for i, v := range x {
			c := math.Cos(2 * math.Pi * (v - mu) / m.f.period)
			dst[i] = b + a1*math.Exp(kap*(c-1)) + a2*math.Exp(kap*(-c-1))
		}
	case kindGauss:
		b, a, mu, s := p[0], p[1], p[2], p[3]
		for i, v := range x {
			d := (v - mu) / s
			dst[i] = b + a*math.Exp(-0.5*d*d)
		}
	}
}
