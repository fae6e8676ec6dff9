package acuity

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// Saturation is the fit of the information-limiting model
//
//	I(N) = a N / (1 + Eps a N)
//
// to information against population size: I0(N) = a N is the information
// the population would have without differential correlations, linear in N
// (the usual choice [practice]; Moreno-Bote et al. 2014, Nat Neurosci
// 17:1410 [mem]), and Eps the variance of the differential correlations
// Eps f' f'^T that cap it. Asymptote = 1/Eps is the information of an
// infinite population (+Inf when Eps = 0, no saturation detected): an
// EXTRAPOLATION that holds only as far as the model does (CautionExtrapolation).
type Saturation struct {
	A, Eps    float64
	Asymptote float64
	// Lo and Hi bound the central 95% of the bootstrap distribution of the
	// asymptote (percentile interval over Boot resamples of the repeats; Hi
	// may be +Inf). It covers which neurons were sampled, not the trial noise
	// common to all subsets, so it is too narrow when that noise dominates.
	Lo, Hi float64
	Boot   int
	// RMS is the root mean square residual of the fit to the mean curve.
	RMS float64
}

// FitSaturation fits I(N) = a N/(1 + eps a N) by least squares to the mean
// over repeats of curves (repeats x len(sizes), row-major, e.g.
// SizeCurve.Curves), with eps >= 0 and a > 0, and bootstraps the repeats nboot
// times (nboot = 0: no interval, Lo = Hi = NaN) with rng.
//
// The fit works in the parametrisation I = N/(p + eps N), p = 1/a, which
// turns into the straight line 1/I = p/N + eps; that line (fitted to the
// points with positive mean information, weights I^4 so that each point
// counts as on the original scale) starts a damped Gauss-Newton
// (Levenberg-Marquardt) fit on the original scale.
//
// Errors: fewer than two sizes, no repeat, a non-finite value, or fewer than
// two sizes with positive mean information. Panics if len(curves) is not a
// multiple of len(sizes).
func FitSaturation(sizes []int, curves []float64, nboot int, rng *rand.Rand) (Saturation, error) {
	S := len(sizes)
	if S < 2 {
		return Saturation{}, fmt.Errorf("acuity: saturation fit needs at least 2 sizes, got %d", S)
	}
	if len(curves)%S != 0 {
		panic("acuity: FitSaturation: len(curves) is not a multiple of len(sizes)")
	}
	R := len(curves) / S
	if R == 0 {
		return Saturation{}, fmt.Errorf("acuity: saturation fit has no repeats")
	}
	for i, v := range curves {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return Saturation{}, fmt.Errorf("acuity: saturation fit: information of repeat %d, size %d is %v", i/S, sizes[i%S], v)
		}
	}
	N := make([]float64, S)
	for s, k := range sizes {
		N[s] = float64(k)
	}
	mean := make([]float64, S)
	meanCurve(mean, curves, S, nil)
	p, eps, rms, err := fitSat(N, mean)
	if err != nil {
		return Saturation{}, err
	}
	out := Saturation{A: 1 / p, Eps: eps, Asymptote: asym(eps), RMS: rms, Lo: math.NaN(), Hi: math.NaN()}
	if nboot <= 0 {
		return out, nil
	}
	idx := make([]int, R)
	as := make([]float64, 0, nboot)
	for b := 0; b < nboot; b++ {
		for i := range idx {
			idx[i] = rng.IntN(R)
		}
		meanCurve(mean, curves, S, idx)
		_, e, _, err := fitSat(N, mean)
		if err != nil {
			// A resample without two positive means: no saturation can be
			// read from it; it counts as an infinite asymptote.
			as = append(as, math.Inf(1))
			continue
		}
		as = append(as, asym(e))
	}
	slices.Sort(as)
	out.Lo, out.Hi, out.Boot = quantile(as, 0.025), quantile(as, 0.975), nboot
	return out, nil
}

func asym(eps float64) float64 {
	if eps <= 0 {
		return math.Inf(1)
	}
	return 1 / eps
}

// quantile returns the q quantile of sorted x, linear interpolation between
// order statistics (position q (n-1)); an Inf neighbour gives Inf.
func quantile(x []float64, q float64) float64 {
	pos := q * float64(len(x)-1)
	i := int(math.Floor(pos))
	f := pos - float64(i)
	if i+1 >= len(x) || f == 0 {
		return x[i]
	}
	if math.IsInf(x[i+1], 1) {
		return math.Inf(1)
	}
	return x[i] + f*(x[i+1]-x[i])
}

// meanCurve writes the mean over the rows idx (all rows when nil) of curves.
func meanCurve(dst, curves []float64, S int, idx []int) {
	for s := range dst {
		dst[s] = 0
	}
	R := len(curves) / S
	cnt := R
	if idx != nil {
		cnt = len(idx)
	}
	for i := 0; i < cnt; i++ {
		r := i
		if idx != nil {
			r = idx[i]
		}
		for s, v := range curves[r*S : r*S+S] {
			dst[s] += v
		}
	}
	for s := range dst {
		dst[s] /= float64(cnt)
	}
}

// fitSat fits y = N/(p + e N), p > 0, e >= 0 by least squares.
func fitSat(N, y []float64) (p, e, rms float64, err error) {
	// Start: weighted line 1/y = p/N + e through the positive points.
	var sw, sx, sy, sxx, sxy float64
	pos := 0
	for i, v := range y {
		if v <= 0 {
			continue
		}
		pos++
		w := v * v * v * v
		x, u := 1/N[i], 1/v
		sw += w
		sx += w * x
		sy += w * u
		sxx += w * x * x
		sxy += w * x * u
	}
	if pos < 2 {
		return 0, 0, 0, fmt.Errorf("acuity: saturation fit needs positive mean information at 2 sizes or more, got %d", pos)
	}
	det := sw*sxx - sx*sx
	if det > 0 {
		p = (sw*sxy - sx*sy) / det
		e = (sy - p*sx) / sw
	}
	if !(p > 0) {
		// Fall back to the slope through the origin of the largest point.
		last := len(y) - 1
		for y[last] <= 0 {
			last--
		}
		p, e = N[last]/y[last], 0
	}
	if e < 0 {
		e = 0
	}
	sse := func(p, e float64) float64 {
		s := 0.0
		for i, n := range N {
			r := y[i] - n/(p+e*n)
			s += r * r
		}
		return s
	}
	cur := sse(p, e)
	lambda := 1e-3
	for it := 0; it < 200; it++ {
		// Normal equations of the linearised problem in (p, e).
		var a11, a12, a22, g1, g2 float64
		for i, n := range N {
			den := p + e*n
			f := n / den
			jp := -n / (den * den)
			je := -n * n / (den * den)
			r := y[i] - f
			a11 += jp * jp
			a12 += jp * je
			a22 += je * je
			g1 += jp * r
			g2 += je * r
		}
		improved := false
		for try := 0; try < 30; try++ {
			b11, b22 := a11*(1+lambda), a22*(1+lambda)
			dt := b11*b22 - a12*a12
			if dt == 0 {
				lambda *= 10
				continue
			}
			dp := (g1*b22 - g2*a12) / dt
			de := (b11*g2 - a12*g1) / dt
			np, ne := p+dp, math.Max(e+de, 0)
			if !(np > 0) {
				np = p / 2
			}
			if c := sse(np, ne); c < cur {
				rel := (cur - c) / math.Max(cur, 1e-300)
				p, e, cur = np, ne, c
				lambda = math.Max(lambda/10, 1e-12)
				improved = rel > 1e-14
				break
			}
			lambda *= 10
		}
		if !improved {
			break
		}
	}
	return p, e, math.Sqrt(cur / float64(len(N))), nil
}
