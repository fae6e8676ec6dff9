package tuning

import "math"

// Descriptors summarise one tuning curve.
//
// For a non-periodic axis (period 0) only Preferred and Peak are defined (both
// the centre of the largest response) and the others are NaN.
//
// For a period-360 axis (direction, heading), with theta_k the bin angles:
//
//	Preferred  = arg(sum_k r_k exp(i theta_k)) in [0, 360), the vector-average direction
//	OneMinusCV = |sum_k r_k exp(i 2 theta_k)| / sum_k r_k, orientation form (Ringach et al. 2002)
//	DirVector  = |sum_k r_k exp(i theta_k)| / sum_k r_k, direction form
//	OSI        = (R_pref - R_orth) / (R_pref + R_orth), R_orth the mean of the bins nearest pref +- 90
//	DSI        = (R_pref - R_null) / (R_pref + R_null), R_null the bin nearest pref + 180
//
// For any other period P (180 for orientation), the angle is phi_k = 2 pi x_k / P:
//
//	Preferred  = P/(2 pi) arg(sum_k r_k exp(i phi_k)) in [0, P) (for P = 180 the
//	             orientation form with the halved angle)
//	OneMinusCV = |sum_k r_k exp(i phi_k)| / sum_k r_k (for P = 180 the orientation form)
//	OSI        = (R_pref - R_orth) / (R_pref + R_orth), R_orth the bin nearest pref + P/2
//	DirVector, DSI = NaN
//
// R_pref is the largest response (at Peak). Responses are used as given, not
// rectified: the vector forms assume non-negative responses and are NaN when
// sum_k r_k <= 0; the peak indices are NaN when their denominator is 0.
//
// Untuned curves get no preferred stimulus. A curve is flat when
// max_k r_k - min_k r_k <= FlatTol * max_k |r_k| (all zero included): its
// Preferred and Peak are NaN (the argmax of a flat curve is the first bin, and
// the vector sum is rounding noise: a constant curve used to come out
// "preferring" an arbitrary angle such as 34.9 deg). On a periodic axis
// Preferred is also NaN when the vector sum is zero to the same relative
// precision, |sum_k r_k exp(i phi_k)| <= FlatTol * sum_k |r_k|, as for a
// curve with two equal peaks half a period apart on a direction axis (Peak is
// then still the larger bin). The other descriptors of a flat curve are
// computed as usual (OSI, DSI, 1 - CV and the direction vector are 0 for a
// constant positive curve on evenly spaced conditions, NaN for an all-zero
// curve).
type Descriptors struct {
	Preferred  float64 // vector-average preferred stimulus (axis units); argmax for a non-periodic axis
	Peak       float64 // centre of the bin with the largest response
	OneMinusCV float64 // 1 - circular variance, orientation form
	DirVector  float64 // direction vector length (period 360 only)
	OSI, DSI   float64 // peak forms from the nearest bins
}

// FlatTol is the relative spread below which Describe treats a curve as flat:
// 1e-6, above the rounding of curves computed in float32 (relative 6e-8 per
// operation) and far below any tuning a recording can resolve.
const FlatTol = 1e-6

// Describe returns the descriptors of the tuning curve r at the condition
// values centers (axis units, ascending) of an axis with the given period (0:
// non-periodic). centers should be the stimulus values of the conditions:
// the bin centres when the axis is centred on the stimulus values
// (data.Axis.CenterOn), otherwise the mean stimulus value of each bin
// (data.ConditionValues); bin centres half a bin away from every stimulus
// value shift every preferred stimulus by half a bin. It panics if len(r) !=
// len(centers) or r is empty. NaN entries of r make the affected descriptors
// NaN.
func Describe(r, centers []float64, period float64) Descriptors {
	return NewDescriber(centers, period).Describe(r)
}

// Describer describes many tuning curves at the same conditions: Describe
// with the cosines and sines of the conditions' angles computed once (the
// same values, so the same descriptors bit for bit). It is safe for
// concurrent use.
type Describer struct {
	centers                []float64
	period                 float64
	cos1, sin1, cos2, sin2 []float64 // of phi_k = 2 pi centers[k] / period and of 2 phi_k
}

// NewDescriber returns the Describer of the conditions at centers (axis
// units, ascending) on an axis with the given period (0: non-periodic); see
// Describe.
func NewDescriber(centers []float64, period float64) *Describer {
	d := &Describer{centers: centers, period: period}
	if period > 0 {
		n := len(centers)
		d.cos1, d.sin1, d.cos2, d.sin2 = make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
		for k, c := range centers {
			phi := 2 * math.Pi * c / period
			d.cos1[k], d.sin1[k] = math.Cos(phi), math.Sin(phi)
			d.cos2[k], d.sin2[k] = math.Cos(2*phi), math.Sin(2*phi)
		}
	}
	return d
}

// Describe returns the descriptors of the tuning curve r (see the function
// Describe). It panics if len(r) differs from the number of conditions or r
// is empty.
func (ds *Describer) Describe(r []float64) Descriptors {
	centers, period := ds.centers, ds.period
	if len(r) != len(centers) || len(r) == 0 {
		panic("tuning: Describe: r and centers must have the same, non-zero length")
	}
	nan := math.NaN()
	kmax := 0
	for k, v := range r {
		if v > r[kmax] || math.IsNaN(r[kmax]) {
			kmax = k
		}
	}
	d := Descriptors{Peak: centers[kmax], Preferred: centers[kmax],
		OneMinusCV: nan, DirVector: nan, OSI: nan, DSI: nan}
	lo, hi, big := math.Inf(1), math.Inf(-1), 0.0
	for _, v := range r {
		lo, hi, big = math.Min(lo, v), math.Max(hi, v), math.Max(big, math.Abs(v))
	}
	flat := hi-lo <= FlatTol*big // false when r holds a NaN
	if flat {
		d.Peak, d.Preferred = nan, nan
	}
	if !(period > 0) {
		return d
	}
	var sum, abs, c1, s1, c2, s2 float64
	for k, v := range r {
		sum += v
		abs += math.Abs(v)
		c1 += v * ds.cos1[k]
		s1 += v * ds.sin1[k]
		c2 += v * ds.cos2[k]
		s2 += v * ds.sin2[k]
	}
	d.Preferred = math.Mod(math.Atan2(s1, c1)*period/(2*math.Pi)+period, period)
	if flat || !(math.Hypot(c1, s1) > FlatTol*abs) {
		d.Preferred = nan
	}
	if sum > 0 {
		if period == 360 {
			d.OneMinusCV = math.Hypot(c2, s2) / sum
			d.DirVector = math.Hypot(c1, s1) / sum
		} else {
			d.OneMinusCV = math.Hypot(c1, s1) / sum
		}
	} else {
		d.Preferred = nan
	}
	rp := r[kmax]
	peak := centers[kmax]
	idx := func(x float64) float64 { return r[nearestCircular(centers, x, period)] }
	ratio := func(a, b float64) float64 {
		if a+b == 0 {
			return nan
		}
		return (a - b) / (a + b)
	}
	if period == 360 {
		orth := (idx(peak+90) + idx(peak-90)) / 2
		d.OSI = ratio(rp, orth)
		d.DSI = ratio(rp, idx(peak+180))
	} else {
		d.OSI = ratio(rp, idx(peak+period/2))
	}
	return d
}

// nearestCircular returns the index of the centre nearest x, measuring
// distance around the circle when period > 0. Linear scan: centres need not
// be evenly spaced.
func nearestCircular(centers []float64, x, period float64) int {
	best, bd := 0, math.Inf(1)
	for k, c := range centers {
		dd := math.Abs(x - c)
		if period > 0 {
			dd = math.Mod(dd, period)
			dd = math.Min(dd, period-dd)
		}
		if dd < bd {
			best, bd = k, dd
		}
	}
	return best
}
