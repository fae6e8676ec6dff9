package data

import (
	"fmt"
	"math"
)

// MaxBins caps the number of stimulus bins an axis may declare.
const MaxBins = 100000

// Axis is the stimulus axis declared in the config, cut into equal bins.
//
// For a periodic axis Max-Min is the period (direction 0..360 deg,
// orientation 0..180 deg, heading 0..360 deg) and values wrap around. A
// non-periodic axis (position on a track, tone frequency on a log scale)
// accepts only values inside [Min, Max].
//
// Exactly one of BinWidth and Bins is set (> 0). With BinWidth, the width
// must divide Max-Min to within 1e-9 relative; the number of bins is then
// round((Max-Min)/BinWidth).
type Axis struct {
	Name     string // e.g. "heading"
	Unit     string // e.g. "deg"
	Min, Max float64
	Periodic bool
	BinWidth float64
	Bins     int
}

// Validate checks the axis; errors name the config field, e.g.
// "axis.bin_width 7 does not divide the range 0..360 (51.43 bins)".
func (a Axis) Validate() error {
	if math.IsNaN(a.Min) || math.IsInf(a.Min, 0) || math.IsNaN(a.Max) || math.IsInf(a.Max, 0) {
		return fmt.Errorf("data: axis.min %g and axis.max %g must be finite numbers", a.Min, a.Max)
	}
	if !(a.Max > a.Min) {
		return fmt.Errorf("data: axis.max %g must be greater than axis.min %g", a.Max, a.Min)
	}
	if math.IsInf(a.Max-a.Min, 0) {
		return fmt.Errorf("data: axis range %g..%g is too wide to compute with", a.Min, a.Max)
	}
	if a.Bins < 0 {
		return fmt.Errorf("data: axis.bins %d must be positive", a.Bins)
	}
	if math.IsNaN(a.BinWidth) || a.BinWidth < 0 || math.IsInf(a.BinWidth, 0) {
		return fmt.Errorf("data: axis.bin_width %g must be a positive number", a.BinWidth)
	}
	switch {
	case a.Bins > 0 && a.BinWidth > 0:
		return fmt.Errorf("data: set only one of axis.bins (%d) and axis.bin_width (%g)", a.Bins, a.BinWidth)
	case a.Bins == 0 && a.BinWidth == 0:
		return fmt.Errorf("data: set one of axis.bins and axis.bin_width")
	case a.Bins > MaxBins:
		return fmt.Errorf("data: axis.bins %d is more than %d", a.Bins, MaxBins)
	case a.BinWidth > 0:
		r := a.Max - a.Min
		q := r / a.BinWidth
		n := math.Round(q)
		if n < 1 || math.Abs(n*a.BinWidth-r) > 1e-9*r {
			return fmt.Errorf("data: axis.bin_width %g does not divide the range %g..%g (%.4g bins)", a.BinWidth, a.Min, a.Max, q)
		}
		if n > MaxBins {
			return fmt.Errorf("data: axis.bin_width %g gives %g bins, more than %d", a.BinWidth, n, MaxBins)
		}
	}
	return nil
}

// NumBins returns the number of bins, or 0 if the axis is not valid.
func (a Axis) NumBins() int {
	if a.Validate() != nil {
		return 0
	}
	if a.Bins > 0 {
		return a.Bins
	}
	return int(math.Round((a.Max - a.Min) / a.BinWidth))
}

// edge returns edge i of n: Min + i (Max-Min)/n, with edge n exactly Max.
func (a Axis) edge(i, n int) float64 {
	if i == n {
		return a.Max
	}
	return a.Min + (a.Max-a.Min)*float64(i)/float64(n)
}

// Edges returns the NumBins+1 bin edges, Edges[0] = Min and
// Edges[NumBins] = Max (nil for an invalid axis).
func (a Axis) Edges() []float64 {
	n := a.NumBins()
	if n == 0 {
		return nil
	}
	e := make([]float64, n+1)
	for i := range e {
		e[i] = a.edge(i, n)
	}
	return e
}

// Centers returns the NumBins bin centres (nil for an invalid axis).
func (a Axis) Centers() []float64 {
	n := a.NumBins()
	if n == 0 {
		return nil
	}
	c := make([]float64, n)
	for i := range c {
		c[i] = a.Min + (a.Max-a.Min)*(float64(i)+0.5)/float64(n)
	}
	return c
}

// BinLabel describes bin i for messages, e.g. "bin 3 [18, 24) deg".
func (a Axis) BinLabel(i int) string {
	n := a.NumBins()
	if n == 0 || i < 0 || i >= n {
		return fmt.Sprintf("bin %d", i)
	}
	closing := ")"
	if i == n-1 && !a.Periodic {
		closing = "]"
	}
	s := fmt.Sprintf("bin %d [%g, %g%s", i, a.edge(i, n), a.edge(i+1, n), closing)
	if a.Unit != "" {
		s += " " + a.Unit
	}
	return s
}

// wrap maps v into [Min, Max) on a periodic axis; it returns the offset
// u = v' - Min in [0, period]. u can equal the period only when v was a
// hair below a multiple of the period and the sum rounded up.
func (a Axis) wrap(v float64) float64 {
	p := a.Max - a.Min
	u := math.Mod(v-a.Min, p)
	if u < 0 {
		u += p
	}
	return u
}

// Bin returns the bin of value v. Bins are half-open, [e_i, e_{i+1}).
// On a periodic axis v is first taken modulo the period, so with 0..360 in
// 6-degree bins: 359.9 -> 59, 360 -> 0, -0.1 -> 59, 720.5 -> 0. On a
// non-periodic axis Max itself goes into the last bin and a value outside
// [Min, Max] is an error. NaN and Inf are errors; so is an invalid axis.
func (a Axis) Bin(v float64) (int, error) {
	if err := a.Validate(); err != nil {
		return 0, err
	}
	i, err := a.bin(v, a.NumBins())
	if err != nil {
		return 0, fmt.Errorf("data: %v", err)
	}
	return i, nil
}

func (a Axis) bin(v float64, n int) (int, error) {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("stimulus value %g is not a finite number", v)
	}
	var x float64 // position on [Min, Max]
	if a.Periodic {
		x = v
		if v < a.Min || v >= a.Max {
			// Wrap only values outside [Min, Max), so that values inside
			// are compared with the edges without any rounding.
			u := a.wrap(v)
			if u >= a.Max-a.Min {
				return n - 1, nil // a tiny negative offset rounded up to the period
			}
			x = a.Min + u
		}
	} else {
		if v < a.Min || v > a.Max {
			return 0, fmt.Errorf("stimulus value %g is outside the %s axis range [%g, %g]", v, a.label(), a.Min, a.Max)
		}
		x = v
	}
	i := int((x - a.Min) / (a.Max - a.Min) * float64(n))
	if i >= n {
		i = n - 1
	}
	if i < 0 {
		i = 0
	}
	// Make the result agree exactly with Edges despite rounding.
	for i > 0 && x < a.edge(i, n) {
		i--
	}
	for i < n-1 && x >= a.edge(i+1, n) {
		i++
	}
	return i, nil
}

func (a Axis) label() string {
	if a.Name == "" {
		return "stimulus"
	}
	return a.Name
}

// OneHot writes the one-hot code of v into dst (length NumBins): 1 at
// Bin(v), 0 elsewhere. It panics if len(dst) != NumBins and returns Bin's
// error for a bad value (dst is then all zero).
func (a Axis) OneHot(dst []float64, v float64) error {
	n := a.NumBins()
	if len(dst) != n {
		panic(fmt.Sprintf("data: OneHot dst length %d, axis has %d bins", len(dst), n))
	}
	clear(dst)
	if n == 0 {
		return a.Validate()
	}
	i, err := a.bin(v, n)
	if err != nil {
		return fmt.Errorf("data: %v", err)
	}
	dst[i] = 1
	return nil
}

// Soft writes a two-hot code of v into dst (length NumBins): with bin
// centres c_i and p = (v - c_0)/w (w the bin width), the weights are
// 1 - (p - floor(p)) at bin floor(p) and p - floor(p) at the next bin. On a
// periodic axis the bin indices wrap (a value between the last and the first
// centre shares its weight between bins NumBins-1 and 0); on a bounded axis p
// is clamped to [0, NumBins-1], so values within half a bin of either end go
// wholly to the end bin. The weights sum to 1. It panics if
// len(dst) != NumBins and returns Bin's error for a bad value.
func (a Axis) Soft(dst []float64, v float64) error {
	n := a.NumBins()
	if len(dst) != n {
		panic(fmt.Sprintf("data: Soft dst length %d, axis has %d bins", len(dst), n))
	}
	clear(dst)
	if n == 0 {
		return a.Validate()
	}
	if _, err := a.bin(v, n); err != nil {
		return fmt.Errorf("data: %v", err)
	}
	r := a.Max - a.Min
	u := v - a.Min
	if a.Periodic && (v < a.Min || v >= a.Max) {
		u = a.wrap(v)
	}
	p := u/r*float64(n) - 0.5
	if !a.Periodic {
		p = math.Max(0, math.Min(p, float64(n-1)))
	}
	f := math.Floor(p)
	w := p - f
	i0 := int(f)
	if a.Periodic {
		i0 = ((i0 % n) + n) % n
	}
	if i0 >= n-1 && !a.Periodic {
		dst[n-1] = 1
		return nil
	}
	i1 := i0 + 1
	if i1 == n {
		i1 = 0
	}
	dst[i0] += 1 - w
	dst[i1] += w
	return nil
}

// BinTrials bins every trial's stimulus value. The error names the trial
// (0-based) and its value.
func (a Axis) BinTrials(stim []float64) ([]int, error) {
	if err := a.Validate(); err != nil {
		return nil, err
	}
	n := a.NumBins()
	b := make([]int, len(stim))
	for t, v := range stim {
		i, err := a.bin(v, n)
		if err != nil {
			return nil, fmt.Errorf("data: trial %d (0-based): %v", t, err)
		}
		b[t] = i
	}
	return b, nil
}
