package acuity

import (
	"fmt"
	"math"
	"testing"
)

// The bias correction for 50 trials in each of two conditions, 20 neurons,
// step 1: I_bc = 10 * 77/98 - 20 * (2/50) (doc.go).
func ExampleCorrectInfo() {
	ibc := CorrectInfo(10, 50, 50, 20, 1)
	fmt.Printf("I_bc = %.6f, threshold = %.6f\n", ibc, Threshold(ibc))
	// Output: I_bc = 7.057143, threshold = 0.376431
}

// TestEqualTrialsForm: with TA = TB = T the derived correction reduces to
// I_naive (2T - N - 3)/(2T - 2) - 2N/(T ds^2), the equal-trial form of
// Kanitscheider et al. 2015 [mem].
func TestEqualTrialsForm(t *testing.T) {
	cases := []struct {
		naive    float64
		T, N     int
		ds, want float64
	}{
		{10, 50, 20, 1, 10*77.0/98 - 0.8},
		{3.5, 100, 150, 6, 3.5*47.0/198 - 300.0/(100*36)},
		{0.2, 12, 1, 0.5, 0.2*20.0/22 - 2.0/(12*0.25)},
	}
	for _, c := range cases {
		got := CorrectInfo(c.naive, c.T, c.T, c.N, c.ds)
		eq := c.naive*float64(2*c.T-c.N-3)/float64(2*c.T-2) - 2*float64(c.N)/(float64(c.T)*c.ds*c.ds)
		if math.Abs(got-c.want) > 1e-12*math.Abs(c.want) || math.Abs(got-eq) > 1e-12*math.Abs(c.want) {
			t.Errorf("T %d N %d: got %v want %v (equal-T form %v)", c.T, c.N, got, c.want, eq)
		}
	}
	if !math.IsNaN(CorrectInfo(1, 10, 10, 17, 1)) || math.IsNaN(CorrectInfo(1, 10, 10, 16, 1)) {
		t.Errorf("limit: want NaN for N = 17 = 2T-3 and a number for N = 16")
	}
}
