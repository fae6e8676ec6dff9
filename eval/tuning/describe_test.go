package tuning

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestDescribeFlat: a flat curve has no preferred stimulus and no peak
// (Describe's rule, FlatTol); the vector forms and peak indices of a constant
// positive curve on evenly spaced conditions are 0 [derived: sum_k exp(i
// phi_k) = 0 over a full period], of an all-zero curve NaN (0/0).
func TestDescribeFlat(t *testing.T) {
	ori := grid(12, 15, 7.5) // centres 7.5, 22.5, ..., 172.5
	dir := grid(8, 45, 0)
	jitter := make([]float64, 12) // a constant curve computed in float32
	for k := range jitter {
		jitter[k] = float64(float32(3.7)) * (1 + 1e-7*float64(k%3-1))
	}
	cases := []struct {
		name            string
		r, x            []float64
		period          float64
		wantPref, zeros bool // Preferred finite; OSI etc. are 0
	}{
		{"constant 5, orientation", fill(12, 5), ori, 180, false, true},
		{"constant 5, direction", fill(8, 5), dir, 360, false, true},
		{"all zero", fill(12, 0), ori, 180, false, false},
		{"constant to float32 precision", jitter, ori, 180, false, true},
		{"constant, bounded axis", fill(5, 2), grid(5, 10, 0), 0, false, false},
		{"tuned", []float64{1, 2, 5, 2, 1, 1, 1, 1}, dir, 360, true, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := Describe(c.r, c.x, c.period)
			if finite := !math.IsNaN(d.Preferred); finite != c.wantPref {
				t.Errorf("Preferred = %v, want finite: %v", d.Preferred, c.wantPref)
			}
			if !c.wantPref && !math.IsNaN(d.Peak) {
				t.Errorf("Peak = %v, want NaN for a flat curve", d.Peak)
			}
			if c.zeros {
				// 1e-6: the float32 jitter is 1e-7 relative.
				for name, v := range map[string]float64{"OSI": d.OSI, "1-CV": d.OneMinusCV} {
					if math.Abs(v) > 1e-6 {
						t.Errorf("%s = %v, want 0", name, v)
					}
				}
			}
		})
	}
	// Two equal peaks half a period apart on a direction axis: no preferred
	// direction (the vector sum is 0 [derived: r(x) = r(x + 180)]), the
	// larger bin is still the peak, and the orientation form sees the tuning.
	r := []float64{6, 2, 1, 2, 6, 2, 1, 2}
	d := Describe(r, dir, 360)
	if !math.IsNaN(d.Preferred) || d.Peak != 0 || !(d.OneMinusCV > 0.3) {
		t.Errorf("two equal peaks: Preferred %v (want NaN), Peak %v (want 0), 1-CV %v (want > 0.3)", d.Preferred, d.Peak, d.OneMinusCV)
	}
}

func fill(n int, v float64) []float64 {
	r := make([]float64, n)
	for i := range r {
		r[i] = v
	}
	return r
}

// TestDescriberMatchesDescribe: a Describer gives the descriptors the
// trigonometry of each call gave before it (describeReference, the former
// loop), bit for bit, on random curves, a flat one and one with a NaN, on
// direction, orientation and non-periodic axes.
func TestDescriberMatchesDescribe(t *testing.T) {
	rng := rand.New(rand.NewPCG(51, 52))
	for _, ax := range []struct {
		centers []float64
		period  float64
	}{{grid(60, 6, 3), 360}, {grid(8, 22.5, 0), 180}, {grid(12, 30, 15), 360}, {grid(10, 1, 0.5), 0}} {
		ds := NewDescriber(ax.centers, ax.period)
		for k := 0; k < 300; k++ {
			r := make([]float64, len(ax.centers))
			for i := range r {
				r[i] = rng.NormFloat64() + 0.5
			}
			switch k {
			case 1:
				for i := range r {
					r[i] = 2
				}
			case 2:
				r[3] = math.NaN()
			}
			got, want := ds.Describe(r), describeReference(r, ax.centers, ax.period)
			for i, g := range []float64{got.Preferred, got.Peak, got.OneMinusCV, got.DirVector, got.OSI, got.DSI} {
				w := []float64{want.Preferred, want.Peak, want.OneMinusCV, want.DirVector, want.OSI, want.DSI}[i]
				if math.Float64bits(g) != math.Float64bits(w) {
					t.Fatalf("period %v curve %d: %+v, want %+v", ax.period, k, got, want)
				}
			}
		}
	}
}

// describeReference is Describe as it was before the Describer (the
// trigonometry computed per call and condition).
func describeReference(r, centers []float64, period float64) Descriptors {
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
		phi := 2 * math.Pi * centers[k] / period
		sum += v
		abs += math.Abs(v)
		c1 += v * math.Cos(phi)
		s1 += v * math.Sin(phi)
		c2 += v * math.Cos(2*phi)
		s2 += v * math.Sin(2*phi)
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
