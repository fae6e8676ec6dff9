package data

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// repeatLevels returns each value k times, in a shuffled order.
func repeatLevels(values []float64, k int, seed uint64) []float64 {
	var s []float64
	for i := 0; i < k; i++ {
		s = append(s, values...)
	}
	rand.New(rand.NewPCG(seed, 1)).Shuffle(len(s), func(i, j int) { s[i], s[j] = s[j], s[i] })
	return s
}

func steps(n int, step, start float64) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = start + step*float64(i)
	}
	return v
}

// TestCenterOnStimulus: hand-worked axes [computed by hand]. After centring,
// every trial's bin centre equals its stimulus value (checked through
// BinTrials and Centers, to 1e-9 of the bin width).
func TestCenterOnStimulus(t *testing.T) {
	ori := Axis{Name: "orientation", Unit: "deg", Min: 0, Max: 180, Periodic: true, BinWidth: 15}
	cases := []struct {
		name     string
		a        Axis
		stim     []float64
		min, max float64 // of the centred axis
		bins     int
		noted    bool // a note says the axis moved
	}{
		{"orientations on left edges", ori, repeatLevels(steps(12, 15, 0), 5, 1), -7.5, 172.5, 12, true},
		{"already centred", Axis{Unit: "deg", Min: -7.5, Max: 172.5, Periodic: true, BinWidth: 15}, repeatLevels(steps(12, 15, 0), 5, 2), -7.5, 172.5, 12, false},
		{"spacing three bins", Axis{Unit: "deg", Min: 0, Max: 180, Periodic: true, BinWidth: 5}, repeatLevels(steps(12, 15, 0), 3, 3), -2.5, 177.5, 36, true},
		{"values given as 180 and -15", ori, append(repeatLevels(steps(12, 15, 0), 3, 4), 180, -15), -7.5, 172.5, 12, true},
		{"directions by bins", Axis{Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 8}, repeatLevels(steps(8, 45, 0), 4, 5), -22.5, 337.5, 8, true},
		{"track positions", Axis{Name: "position", Unit: "cm", Min: 0, Max: 100, BinWidth: 10}, repeatLevels(steps(11, 10, 0), 4, 6), -5, 105, 11, true},
		// No bin past half a bin beyond the outermost sites: it could hold
		// no trial, and the fit refuses empty bins (the bins between the
		// sites stay, as the spacing is twice the bin width).
		{"track, fewer sites", Axis{Name: "position", Unit: "cm", Min: 0, Max: 100, Bins: 10}, repeatLevels(steps(4, 20, 20), 6, 7), 15, 85, 7, true},
		{"track sites short of its end", Axis{Name: "position", Unit: "cm", Min: 0, Max: 200, BinWidth: 10}, repeatLevels(steps(20, 10, 0), 4, 6), -5, 195, 20, true},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			b, note, err := c.a.CenterOnStimulus(c.stim, nil)
			if err != nil {
				t.Fatal(err)
			}
			if !near(b.Min, c.min, 1e-9) || !near(b.Max, c.max, 1e-9) || b.NumBins() != c.bins {
				t.Errorf("centred axis %+v: got min %v max %v bins %d, want %v %v %d", b, b.Min, b.Max, b.NumBins(), c.min, c.max, c.bins)
			}
			if (note != "") != c.noted {
				t.Errorf("note %q, want a note: %v", note, c.noted)
			}
			bins, err := b.BinTrials(c.stim)
			if err != nil {
				t.Fatal(err)
			}
			ctr := b.Centers()
			w := b.width()
			for i, x := range c.stim {
				d := math.Abs(x - ctr[bins[i]])
				if b.Periodic {
					d = math.Mod(d, b.Max-b.Min)
					d = math.Min(d, b.Max-b.Min-d)
				}
				if d > 1e-9*w {
					t.Fatalf("trial %d: value %v in bin %d with centre %v", i, x, bins[i], ctr[bins[i]])
				}
			}
		})
	}
	// The note names the values and the new axis lines.
	_, note, _ := ori.CenterOnStimulus(repeatLevels(steps(12, 15, 0), 2, 9), nil)
	for _, w := range []string{"12 orientation values 0, 15, 30, ..., 150, 165 deg", "7.5 deg", "axis: {min: -7.5, max: 172.5, periodic: true, bin_width: 15}"} {
		if !strings.Contains(note, w) {
			t.Errorf("note %q does not contain %q", note, w)
		}
	}
}

// TestCenterOnErrors: designs whose values cannot all be centres; the error
// gives the fix [computed by hand].
func TestCenterOnErrors(t *testing.T) {
	dir6 := Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 6}
	cases := []struct {
		name string
		a    Axis
		stim []float64
		want []string
	}{
		{"45-degree steps on 6-degree bins", dir6, repeatLevels(steps(8, 45, 0), 3, 1),
			[]string{"8 discrete values 0, 45", "spacing (45", "not a whole multiple", "axis: {min: -22.5, max: 337.5, periodic: true, bin_width: 45}"}},
		{"uneven steps", dir6, repeatLevels([]float64{0, 10, 30, 45}, 3, 2),
			[]string{"spacing (10, 15, 20, 315", "bin_width: 5}", "empty"}},
		{"two values in one bin", dir6, repeatLevels([]float64{0, 2, 180}, 3, 3),
			[]string{"2 deg apart share a bin", "bin_width: 2}"}},
		{"tones on no common grid", Axis{Name: "frequency", Unit: "Hz", Min: 500, Max: 4000, BinWidth: 100}, repeatLevels([]float64{1000, 1414.2, 2000, 2828.4}, 5, 4),
			[]string{"not on a common grid", "log2", "min: -0.5, max: 3.5, bin_width: 1"}},
		{"radians on a degree axis", Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 30}, repeatLevels(steps(12, math.Pi/6, 0), 3, 5),
			[]string{"share a bin", "look like radians"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, _, err := c.a.CenterOnStimulus(c.stim, nil)
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q\ndoes not contain %q", err, w)
				}
			}
		})
	}
}

// TestStimulusLevels: what counts as a discrete stimulus.
func TestStimulusLevels(t *testing.T) {
	dir6 := Axis{Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 6}
	rng := rand.New(rand.NewPCG(4, 4))
	cont := make([]float64, 1000)
	for i := range cont {
		cont[i] = 360 * rng.Float64()
	}
	few := cont[:50] // 50 distinct values, fewer than the 60 bins, but no repeats
	cases := []struct {
		name     string
		stim     []float64
		ids      []int
		discrete bool
		k        int
	}{
		{"continuous", cont, nil, false, 1000},
		{"fewer trials than bins", few, nil, false, 50},
		{"12 repeated values", repeatLevels(steps(12, 30, 0), 2, 1), nil, true, 12},
		{"float32 rounding merges", []float64{10, float64(float32(10.0000001)), 20, 20}, nil, true, 2},
		{"360 is 0", []float64{0, 360, 90, 90}, nil, true, 2},
		{"one value per id", few, seqInts(50), true, 50},
		{"ids over several values", []float64{0, 10, 0, 10}, []int{0, 0, 1, 1}, true, 2}, // 2 levels, 4 trials: repeats
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			lv, discrete, err := dir6.StimulusLevels(c.stim, c.ids)
			if err != nil || discrete != c.discrete || len(lv.Values) != c.k {
				t.Errorf("got %d levels, discrete %v, err %v; want %d, %v", len(lv.Values), discrete, err, c.k, c.discrete)
			}
		})
	}
	if _, _, err := dir6.StimulusLevels([]float64{1, math.NaN()}, nil); err == nil || !strings.Contains(err.Error(), "trial 1 (0-based)") {
		t.Errorf("NaN stimulus: error %v", err)
	}
}

func seqInts(n int) []int {
	v := make([]int, n)
	for i := range v {
		v[i] = i
	}
	return v
}

// TestRadiansHint: degree axes only, values within +-2 pi.
func TestRadiansHint(t *testing.T) {
	deg := Axis{Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 12}
	if deg.RadiansHint([]float64{0, 1.5, 3.1, 6.2}) == "" {
		t.Error("no hint for values in [0, 2 pi] on a degree axis")
	}
	if deg.RadiansHint([]float64{0, 1.5, 30}) != "" || deg.RadiansHint([]float64{0, 0}) != "" {
		t.Error("hint for values that are not all in [0, 2 pi], or all zero")
	}
	if (Axis{Unit: "rad", Min: 0, Max: 2 * math.Pi, Periodic: true, Bins: 12}).RadiansHint([]float64{1, 2}) != "" {
		t.Error("hint on a radian axis")
	}
}

// TestConditionValues: the mean stimulus value per bin, wrapped on a periodic
// axis; the centre for an empty bin [computed by hand].
func TestConditionValues(t *testing.T) {
	a := Axis{Min: -7.5, Max: 172.5, Periodic: true, BinWidth: 15}
	stim := []float64{0, 179, 15, 16, 40}
	cond, err := a.BinTrials(stim)
	if err != nil {
		t.Fatal(err)
	}
	got := a.ConditionValues(nil, stim, cond)
	// bin 0 [-7.5, 7.5): 0 and 179 (wrapped to -1) -> -0.5; bin 1: 15, 16 ->
	// 15.5; bin 2 [22.5, 37.5) empty -> its centre 30; bin 3: 40 alone.
	want := []float64{-0.5, 15.5, 30, 40}
	for b, w := range want {
		if !near(got[b], w, 1e-12) {
			t.Errorf("bin %d: %v, want %v", b, got[b], w)
		}
	}
	// The left-edge design: condition values are the levels, the centres are not.
	ori := Axis{Min: 0, Max: 180, Periodic: true, BinWidth: 15}
	lv := repeatLevels(steps(12, 15, 0), 2, 8)
	c, _ := ori.BinTrials(lv)
	v := ori.ConditionValues(nil, lv, c)
	for b := range v {
		if !near(v[b], 15*float64(b), 1e-12) {
			t.Errorf("left-edge design, bin %d: value %v, want %v", b, v[b], 15*b)
		}
	}
}

func near(got, want, tol float64) bool { return math.Abs(got-want) <= tol }

// TestCenterOffset: 24 directions 15 deg apart in 12 bins of 30 deg: each
// bin holds x and x + 15, mean x + 7.5, centre x + 15: offset -7.5 [computed
// by hand]. The centred orientation design has offset 0.
func TestCenterOffset(t *testing.T) {
	a := Axis{Min: 0, Max: 360, Periodic: true, BinWidth: 30}
	stim := repeatLevels(steps(24, 15, 0), 2, 3)
	cond, _ := a.BinTrials(stim)
	if _, off := a.CenterOffset(a.ConditionValues(nil, stim, cond)); !near(off, -7.5, 1e-9) {
		t.Errorf("coarse bins: offset %v, want -7.5", off)
	}
	o := Axis{Min: -7.5, Max: 172.5, Periodic: true, BinWidth: 15}
	stim = repeatLevels(steps(12, 15, 0), 2, 4)
	cond, _ = o.BinTrials(stim)
	if b, off := o.CenterOffset(o.ConditionValues(nil, stim, cond)); off != 0 {
		t.Errorf("centred: bin %d offset %v, want 0", b, off)
	}
}
