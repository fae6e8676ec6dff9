package state

import (
	"errors"
	"math"
	"strings"
	"testing"
)

func TestNewCovariatesErrors(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	for _, tc := range []struct {
		name   string
		names  []string
		cols   [][]float64
		trials int
		column string
		trial  int
		want   string // substring of the message
	}{
		{"NaN", []string{"speed", "pupil"}, [][]float64{{1, 2, 3, 4}, {1, nan, 2, nan}}, 4, "pupil", 1, `covariate "pupil": value NaN at trial 1 (0-based) (2 trials in all)`},
		{"Inf", []string{"speed"}, [][]float64{{1, 2, inf, 4}}, 4, "speed", 2, `value +Inf at trial 2 (0-based)`},
		{"wrong length", []string{"speed", "pupil"}, [][]float64{{1, 2, 3, 4}, {1, 2, 3}}, 4, "pupil", -1, `has 3 values, the responses have 4 trials`},
		{"constant", []string{"speed", "lick"}, [][]float64{{1, 2, 3, 4}, {0, 0, 0, 0}}, 4, "lick", -1, `constant (0) over all 4 trials`},
		{"repeated name", []string{"speed", "speed"}, [][]float64{{1, 2}, {2, 1}}, 2, "speed", -1, `name used twice`},
		{"empty name", []string{""}, [][]float64{{1, 2}}, 2, "#0", -1, `column 0 (0-based) has an empty name`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := NewCovariates(tc.names, tc.cols, tc.trials)
			var ce *CovariateError
			if !errors.As(err, &ce) {
				t.Fatalf("got error %v, want a *CovariateError", err)
			}
			if ce.Column != tc.column || ce.Trial != tc.trial {
				t.Errorf("got column %q trial %d, want %q %d", ce.Column, ce.Trial, tc.column, tc.trial)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Errorf("got message %q, want it to contain %q", err, tc.want)
			}
		})
	}
	if _, err := NewCovariates([]string{"a"}, nil, 3); err == nil {
		t.Error("got no error for 1 name and 0 columns")
	}
}

func TestStandardizer(t *testing.T) {
	c, err := NewCovariates([]string{"speed", "pupil"}, [][]float64{{0, 2, 4, 6, 100}, {1, 1, 1, 1, 5}}, 5)
	if err != nil {
		t.Fatal(err)
	}
	// pupil is constant over the training trials 0-3: refused, by name.
	_, err = NewStandardizer(c, []int{0, 1, 2, 3})
	var ce *CovariateError
	if !errors.As(err, &ce) || ce.Column != "pupil" || !strings.Contains(err.Error(), "4 training trials") {
		t.Fatalf("got %v, want a *CovariateError on pupil over 4 training trials", err)
	}
	if _, err := NewStandardizer(c, nil); err == nil {
		t.Error("got no error without training trials")
	}
	if _, err := NewStandardizer(c, []int{0, 7}); err == nil || !strings.Contains(err.Error(), "trial 7") {
		t.Errorf("got %v, want an error naming trial 7", err)
	}
	s, err := NewStandardizer(c, []int{0, 1, 2, 4})
	if err != nil {
		t.Fatal(err)
	}
	// speed over trials 0,1,2,4: mean 106/4 = 26.5, ddof-0 variance
	// (0+4+16+10000)/4 - 26.5^2 = 2505 - 702.25 = 1802.75 [computed].
	if math.Abs(s.Mean[0]-26.5) > 1e-12 || math.Abs(s.Scale[0]-math.Sqrt(1802.75)) > 1e-12 {
		t.Errorf("got mean %v scale %v, want 26.5 and sqrt(1802.75)", s.Mean[0], s.Scale[0])
	}
}

// TestRaw checks that the raw-unit coefficients give the same prediction
// as the standardised ones on every trial [derived identity].
func TestRaw(t *testing.T) {
	c, err := NewCovariates([]string{"speed", "pupil"}, [][]float64{{0, 3, 20, 7, 12}, {2.5, 3, 1.2, 4, 2}}, 5)
	if err != nil {
		t.Fatal(err)
	}
	s, err := NewStandardizer(c, []int{0, 1, 2, 3})
	if err != nil {
		t.Fatal(err)
	}
	z := make([]float64, 10)
	s.Apply(z, c)
	p := newParams(2, 2, true)
	copy(p.Gain, []float64{0.2, -0.1, 0.05, 0.3})
	copy(p.Offset, []float64{1.5, -0.4, 0.7, 0.2})
	copy(p.Bias, []float64{0.3, -0.2})
	f := []float64{4, 9} // one condition, two neurons
	cond := make([]int, 5)
	pred := make([]float64, 10)
	Predict(pred, p, f, z, cond, []int{0, 1, 2, 3, 4})
	r := s.Raw(p)
	for tt := 0; tt < 5; tt++ {
		for n := 0; n < 2; n++ {
			g, h := r.Base[n], r.Bias[n]
			for k := 0; k < 2; k++ {
				g += r.Gain[n*2+k] * c.Values[tt*2+k]
				h += r.Offset[n*2+k] * c.Values[tt*2+k]
			}
			if got := g*f[n] + h; math.Abs(got-pred[tt*2+n]) > 1e-12 {
				t.Errorf("trial %d neuron %d: raw prediction %v, standardised %v", tt, n, got, pred[tt*2+n])
			}
		}
	}
}

// TestStimulusLinked: a running speed that follows the stimulus is flagged,
// an independent one is not, and its share is near the null expectation.
func TestStimulusLinked(t *testing.T) {
	for _, tc := range []struct {
		name   string
		link   float64
		warned bool
	}{
		{"independent", 0, false},
		{"linked", 0.9, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			cfg := DefaultSim()
			cfg.Neurons, cfg.SpeedLink, cfg.Seed = 2, tc.link, 3
			s := Simulate(cfg)
			T := len(s.Cond)
			c, err := NewCovariates([]string{"speed"}, [][]float64{s.Speed}, T)
			if err != nil {
				t.Fatal(err)
			}
			all := make([]int, T)
			for i := range all {
				all[i] = i
			}
			got := StimulusLinked(c, s.Cond, cfg.Conditions, all, DefaultShareThreshold)
			share := make([]float64, 1)
			ConditionShare(share, c, s.Cond, cfg.Conditions, all)
			null := NullShare(cfg.Conditions, T)
			t.Logf("share %.4f, null %.4f", share[0], null)
			if (len(got) > 0) != tc.warned {
				t.Fatalf("got %v, want warned = %v", got, tc.warned)
			}
			if tc.warned && (got[0].Name != "speed" || got[0].Share != share[0]) {
				t.Errorf("got %+v, want speed with share %v", got[0], share[0])
			}
		})
	}
}

// TestNullShare: over many independent draws the condition share of an
// unrelated covariate averages (B-1)/(T-1) = 15/639 [derived for Gaussian
// values; the simulated speed is a two-part mixture, so within 4 standard
// errors of the mean of 100 draws].
func TestNullShare(t *testing.T) {
	const R = 100
	var m, m2 float64
	cfg := DefaultSim()
	cfg.Neurons = 1
	share := make([]float64, 1)
	for seed := uint64(0); seed < R; seed++ {
		cfg.Seed = seed
		s := Simulate(cfg)
		c, err := NewCovariates([]string{"speed"}, [][]float64{s.Speed}, len(s.Cond))
		if err != nil {
			t.Fatal(err)
		}
		all := make([]int, len(s.Cond))
		for i := range all {
			all[i] = i
		}
		ConditionShare(share, c, s.Cond, cfg.Conditions, all)
		m += share[0]
		m2 += share[0] * share[0]
	}
	m /= R
	se := math.Sqrt((m2/R - m*m) / R)
	null := NullShare(cfg.Conditions, cfg.Conditions*cfg.Repeats)
	if math.Abs(m-null) > 4*se {
		t.Errorf("got mean share %.5f +- %.5f, want %.5f", m, se, null)
	}
}

func TestNewStatsErrors(t *testing.T) {
	y := []float32{1, 2, 3, 4, 5, float32(math.NaN()), 7, 8}
	cond := []int{0, 1, 0, 1}
	if _, err := NewStats(y, 2, nil, 0, cond, 2, []int{0, 1, 2, 3}); err == nil || !strings.Contains(err.Error(), "neuron 1 (0-based) is NaN at trial 2 (0-based)") {
		t.Errorf("got %v, want an error naming neuron 1 and trial 2", err)
	}
	y[5] = 6
	if _, err := NewStats(y, 2, nil, 0, []int{0, 1, 5, 1}, 2, []int{0, 1, 2, 3}); err == nil || !strings.Contains(err.Error(), "trial 2 (0-based) has condition 5") {
		t.Errorf("got %v, want an error naming trial 2's condition", err)
	}
	z := []float64{0, 1, math.Inf(-1), 3}
	if _, err := NewStats(y, 2, z, 1, cond, 2, []int{0, 1, 2, 3}); err == nil || !strings.Contains(err.Error(), "at trial 2 (0-based)") {
		t.Errorf("got %v, want an error naming trial 2", err)
	}
}
