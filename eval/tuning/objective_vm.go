package tuning

import "math"

// objectiveVonMises is objective for the von Mises kinds, with the basis
// and the sums of the linear solve in one loop over the conditions and no
// test of the kind inside it. Every sum receives the same terms in the same
// order, computed by the same expressions, as in basis, solveLinear and
// objective, so the value and the gradient are the same bit for bit
// (TestObjectiveVonMisesMatches checks them against those three).
func (f *curveFit) objectiveVonMises(grad, p []float64, n int) float64 {
	u := p[0]
	clip0 := false
	if u < logKappaMin {
		u, clip0 = logKappaMin, true
	} else if u > logKappaMax {
		u, clip0 = logKappaMax, true
	}
	kap := math.Exp(u)
	cm, sm := math.Cos(p[1]), math.Sin(p[1])
	cx, sx, w, y := f.cx[:n], f.sx[:n], f.w[:n], f.y[:n]
	var c [3]float64
	var sse, g0, g1 float64
	if f.kind == kindVonMises {
		g, dg0, dg1 := f.g[:n], f.dg0[:n], f.dg1[:n]
		var s0, s1, s11, h0, h1 float64
		for i := range cx {
			ci := cx[i]*cm + sx[i]*sm // cos(phi - m)
			si := sx[i]*cm - cx[i]*sm // sin(phi - m)
			gi := math.Exp(kap * (ci - 1))
			g[i] = gi
			dg0[i] = gi * kap * (ci - 1)
			dg1[i] = gi * kap * si
			wi := w[i]
			wg := wi * gi
			s0 += wi
			s1 += wg
			s11 += wg * gi
			h0 += wi * y[i]
			h1 += wg * y[i]
		}
		s11 += 1e-12 * (s11 + 1e-300)
		det := s0*s11 - s1*s1
		if !(det > 0) {
			c[0], c[1] = h0/s0, 0
		} else {
			c[0] = (s11*h0 - s1*h1) / det
			c[1] = (s0*h1 - s1*h0) / det
		}
		for i := range g {
			fit := c[0]
			d0, d1 := 0.0, 0.0
			fit += c[1] * g[i]
			d0 += c[1] * dg0[i]
			d1 += c[1] * dg1[i]
			e := fit - y[i]
			we := w[i] * e
			sse += we * e
			g0 += we * d0
			g1 += we * d1
		}
	} else {
		ga, da0, da1 := f.g[:n], f.dg0[:n], f.dg1[:n]
		gb, db0, db1 := f.g[n:2*n], f.dg0[n:2*n], f.dg1[n:2*n]
		e2 := math.Exp(-2 * kap)
		var G [3][3]float64
		var h [3]float64
		for i := range cx {
			ci := cx[i]*cm + sx[i]*sm
			si := sx[i]*cm - cx[i]*sm
			a := math.Exp(kap * (ci - 1))
			ga[i] = a
			da0[i] = a * kap * (ci - 1)
			da1[i] = a * kap * si
			b := secondPeak(a, e2, kap, ci)
			gb[i] = b
			db0[i] = b * kap * (-ci - 1)
			db1[i] = -b * kap * si
			wi := w[i]
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
		solve3(c[:], &G, &h)
		for i := range ga {
			fit := c[0]
			d0, d1 := 0.0, 0.0
			fit += c[1] * ga[i]
			d0 += c[1] * da0[i]
			d1 += c[1] * da1[i]
			fit += c[2] * gb[i]
			d0 += c[2] * db0[i]
			d1 += c[2] * db1[i]
			e := fit - y[i]
			we := w[i] * e
			sse += we * e
			g0 += we * d0
			g1 += we * d1
		}
	}
	if grad != nil {
		grad[0], grad[1] = 2*g0, 2*g1
		if clip0 {
			grad[0] = 0
		}
	}
	return sse
}
