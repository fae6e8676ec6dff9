package data

import (
	"math"
	"strings"
	"testing"
)

// direction is the motion-direction axis 0..360 deg in 6-degree bins:
// 60 bins (eval/methods.md §0 [practice]).
var direction = Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 6}

// TestAxisBinDirection: hand-worked cases. Bin i is [6i, 6i+6) after taking
// the value modulo 360 [computed by hand].
func TestAxisBinDirection(t *testing.T) {
	if n := direction.NumBins(); n != 60 {
		t.Fatalf("NumBins = %d, want 60 (360/6)", n)
	}
	cases := []struct {
		v    float64
		want int
		why  string
	}{
		{0, 0, "left edge of bin 0"},
		{5.999, 0, "just below the edge at 6"},
		{6, 1, "edges belong to the bin on their right (half-open bins)"},
		{359.9, 59, "last bin is [354, 360)"},
		{360, 0, "360 mod 360 = 0"},
		{-0.1, 59, "-0.1 mod 360 = 359.9"},
		{720.5, 0, "720.5 mod 360 = 0.5"},
		{-360, 0, "-360 mod 360 = 0"},
		{-1e-20, 59, "-1e-20 + 360 rounds to 360 in float64; the value is still just below 0, so the last bin"},
		{183, 30, "183/6 = 30.5"},
	}
	for _, c := range cases {
		got, err := direction.Bin(c.v)
		if err != nil || got != c.want {
			t.Errorf("Bin(%v) = %d, %v; want %d (%s)", c.v, got, err, c.want, c.why)
		}
	}
	for _, v := range []float64{math.NaN(), math.Inf(1)} {
		if _, err := direction.Bin(v); err == nil {
			t.Errorf("Bin(%v): no error", v)
		}
	}
}

// TestAxisBinOrientation: orientation 0..180 periodic in 12 bins of 15 deg
// [computed by hand]: 179 -> 11, 180 -> 0 (180 mod 180), 195 -> 1, -10 -> 11.
func TestAxisBinOrientation(t *testing.T) {
	a := Axis{Name: "orientation", Unit: "deg", Min: 0, Max: 180, Periodic: true, Bins: 12}
	for v, want := range map[float64]int{0: 0, 14.99: 0, 15: 1, 179: 11, 180: 0, 195: 1, -10: 11, 90: 6} {
		if got, err := a.Bin(v); err != nil || got != want {
			t.Errorf("Bin(%v) = %d, %v; want %d", v, got, err, want)
		}
	}
}

// TestAxisBinTrack: a 200 cm track, not periodic, 20 bins of 10 cm
// [computed by hand]: 0 -> 0, 9.99 -> 0, 10 -> 1, 200 -> 19 (Max goes into the
// last bin), 200.1 and -0.1 are outside.
func TestAxisBinTrack(t *testing.T) {
	a := Axis{Name: "position", Unit: "cm", Min: 0, Max: 200, Bins: 20}
	for v, want := range map[float64]int{0: 0, 9.99: 0, 10: 1, 199.99: 19, 200: 19} {
		if got, err := a.Bin(v); err != nil || got != want {
			t.Errorf("Bin(%v) = %d, %v; want %d", v, got, err, want)
		}
	}
	if _, err := a.Bin(-0.1); err == nil {
		t.Error("Bin(-0.1): no error")
	}
	_, err := a.BinTrials([]float64{0, 50, 200, 200.1})
	for _, w := range []string{"trial 3 (0-based)", "200.1", "outside", "position", "[0, 200]"} {
		if err == nil || !strings.Contains(err.Error(), w) {
			t.Errorf("BinTrials error %v, want it to contain %q", err, w)
		}
	}
	b, err := a.BinTrials([]float64{0, 50, 200})
	if err != nil || b[0] != 0 || b[1] != 5 || b[2] != 19 {
		t.Errorf("BinTrials = %v, %v; want [0 5 19]", b, err)
	}
	if got := a.BinLabel(19); got != "bin 19 [190, 200] cm" {
		t.Errorf("BinLabel(19) = %q", got)
	}
	if got := direction.BinLabel(59); got != "bin 59 [354, 360) deg" {
		t.Errorf("BinLabel(59) = %q", got)
	}
}

// TestAxisBinMatchesEdges: for an axis whose width is not exact in binary
// (0..1 in 10 bins), every edge value goes into the bin on its right and the
// value just below it into the bin on its left, exactly as Edges says.
func TestAxisBinMatchesEdges(t *testing.T) {
	for _, a := range []Axis{{Min: 0, Max: 1, Bins: 10}, {Min: -3.3, Max: 7.1, Bins: 7, Periodic: true}, {Min: 0, Max: 180, BinWidth: 7.5}} {
		e := a.Edges()
		for i := 0; i < len(e)-1; i++ {
			if got, _ := a.Bin(e[i]); got != i {
				t.Errorf("%+v: Bin(edge %d = %v) = %d", a, i, e[i], got)
			}
			below := math.Nextafter(e[i+1], math.Inf(-1))
			if got, _ := a.Bin(below); got != i {
				t.Errorf("%+v: Bin(just below edge %d) = %d, want %d", a, i+1, got, i)
			}
		}
	}
}

func TestAxisValidate(t *testing.T) {
	cases := []struct {
		a    Axis
		want string
	}{
		{Axis{Min: 0, Max: 360, BinWidth: 7}, "axis.bin_width 7 does not divide the range 0..360"},
		{Axis{Min: 0, Max: 360}, "set one of axis.bins and axis.bin_width"},
		{Axis{Min: 0, Max: 360, Bins: 10, BinWidth: 36}, "set only one"},
		{Axis{Min: 10, Max: 10, Bins: 1}, "axis.max 10 must be greater than axis.min 10"},
		{Axis{Min: 0, Max: math.NaN(), Bins: 1}, "finite"},
		{Axis{Min: 0, Max: 1, Bins: -1}, "axis.bins -1"},
		{Axis{Min: 0, Max: 1, BinWidth: 1e-9}, "more than"},
	}
	for _, c := range cases {
		err := c.a.Validate()
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: Validate() = %v, want %q", c.a, err, c.want)
		}
		if c.a.NumBins() != 0 || c.a.Edges() != nil {
			t.Errorf("%+v: NumBins/Edges on an invalid axis should be 0/nil", c.a)
		}
	}
	// 0.1 does not divide 1 exactly in binary, but within 1e-9 relative: 10 bins.
	if n := (Axis{Min: 0, Max: 1, BinWidth: 0.1}).NumBins(); n != 10 {
		t.Errorf("bin width 0.1 on 0..1: NumBins = %d, want 10", n)
	}
	c := direction.Centers()
	if len(c) != 60 || c[0] != 3 || c[59] != 357 {
		t.Errorf("Centers: %d, first %v last %v; want 60, 3, 357", len(c), c[0], c[59])
	}
}

// TestAxisSoft: hand-worked two-hot codes [computed by hand]. On the direction
// axis the centres are 3, 9, ..., 357.
func TestAxisSoft(t *testing.T) {
	dst := make([]float64, 60)
	check := func(a Axis, v float64, want map[int]float64) {
		t.Helper()
		if err := a.Soft(dst[:a.NumBins()], v); err != nil {
			t.Fatal(err)
		}
		sum := 0.0
		for i, x := range dst[:a.NumBins()] {
			sum += x
			if math.Abs(x-want[i]) > 1e-12 {
				t.Errorf("Soft(%v)[%d] = %v, want %v", v, i, x, want[i])
			}
		}
		if math.Abs(sum-1) > 1e-12 {
			t.Errorf("Soft(%v) sums to %v", v, sum)
		}
	}
	check(direction, 6, map[int]float64{0: 0.5, 1: 0.5})     // half way between centres 3 and 9
	check(direction, 3, map[int]float64{0: 1})               // on a centre
	check(direction, 4.5, map[int]float64{0: 0.75, 1: 0.25}) // a quarter of the way from 3 to 9
	check(direction, 0, map[int]float64{59: 0.5, 0: 0.5})    // half way between 357 and 363 = 3: wraps
	check(direction, 358.5, map[int]float64{59: 0.75, 0: 0.25})
	check(direction, -1.5, map[int]float64{59: 0.75, 0: 0.25}) // -1.5 mod 360 = 358.5
	track := Axis{Min: 0, Max: 200, Bins: 20}                  // centres 5, 15, ..., 195
	check(track, 1, map[int]float64{0: 1})                     // below the first centre: clamped
	check(track, 200, map[int]float64{19: 1})                  // above the last centre: clamped
	check(track, 12.5, map[int]float64{0: 0.25, 1: 0.75})
	if err := track.Soft(dst[:20], 201); err == nil {
		t.Error("Soft outside the track: no error")
	}
}

func TestAxisOneHot(t *testing.T) {
	dst := make([]float64, 60)
	dst[5] = 7
	if err := direction.OneHot(dst, 359.9); err != nil {
		t.Fatal(err)
	}
	for i, x := range dst {
		want := 0.0
		if i == 59 {
			want = 1
		}
		if x != want {
			t.Errorf("OneHot(359.9)[%d] = %v, want %v", i, x, want)
		}
	}
	defer func() {
		if recover() == nil {
			t.Error("OneHot with a short dst did not panic")
		}
	}()
	direction.OneHot(dst[:10], 1)
}
