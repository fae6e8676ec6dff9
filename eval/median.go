package eval

import (
	"math"
	"slices"
)

// Median returns the median of x, sorting x in place (no allocation); NaN
// if x is empty. x must not hold NaN.
func Median(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	slices.Sort(x)
	k := len(x) / 2
	if len(x)%2 == 1 {
		return x[k]
	}
	return 0.5 * (x[k-1] + x[k])
}
