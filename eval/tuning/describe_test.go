package tuning

import (
	"math"
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
