package train

import (
	"context"
	"github.com/strialab/stria/train/settings"
	"math"
	"reflect"
	"runtime"
	"slices"
	"testing"

	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/nn"
)

// TestAcuityUsesCompareFolds checks that the decoders run on the folds of
// stria compare (Folds of the same config, prepared afresh as compare's
// plan does), that every trial is decoded exactly once, and that the same
// config gives the same numbers on one core as on all.
func TestAcuityUsesCompareFolds(t *testing.T) {
	small := func(c *settings.Config) {
		c.Acuity.Repeats, c.Acuity.Bootstrap, c.Acuity.DecodeRepeats, c.Acuity.SizeCount = 4, 100, 2, 4
		c.Train.MaxEpochs = 60
	}
	p, _ := synthPrepared(t, 30, 1200, small)
	res, err := Acuity(context.Background(), p, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	q, _ := synthPrepared(t, 30, 1200, small)
	want, err := Folds(q)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(res.FoldSets, want) {
		t.Fatal("acuity's folds differ from Folds of the same config (the folds of stria compare)")
	}
	af := AcuityFolds(want)
	seen := make([]int, len(p.Cond))
	for f, s := range want {
		tr := append(slices.Clone(s[0]), s[1]...)
		slices.Sort(tr)
		if !slices.Equal(af[f].Train, tr) || !slices.Equal(af[f].Test, s[2]) {
			t.Errorf("fold %d: acuity trains on %d trials and tests %d, want training+validation %d and test %d", f+1, len(af[f].Train), len(af[f].Test), len(tr), len(s[2]))
		}
		for _, tt := range s[2] {
			seen[tt]++
		}
	}
	for tt, k := range seen {
		if k != 1 {
			t.Fatalf("trial %d is in %d test sets, want 1", tt, k)
		}
	}
	if len(res.Decoders) != 2 || res.Decoders[0].Name != "lda" || res.Decoders[1].Name != "model-gaussian" {
		t.Fatalf("decoders %v, want lda and model-gaussian", res.Decoders)
	}
	for _, d := range res.Decoders {
		if len(d.Summary.Trials) != len(p.Cond) {
			t.Errorf("%s decoded %d trials, want all %d", d.Name, len(d.Summary.Trials), len(p.Cond))
		}
		if n := d.Curve.Sizes[len(d.Curve.Sizes)-1]; n != 30 || d.Curve.MAE[len(d.Curve.Sizes)-1] != d.Summary.MAE {
			t.Errorf("%s: largest decoding size %d with error %v, want all 30 neurons with the whole-population error %v", d.Name, n, d.Curve.MAE[len(d.Curve.Sizes)-1], d.Summary.MAE)
		}
	}
	// The second run on one core: the numbers must not depend on it.
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(1))
	again, err := Acuity(context.Background(), q, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(again.Curve, res.Curve) || again.Fit != res.Fit || again.Decoders[0].Summary.MAE != res.Decoders[0].Summary.MAE || again.Decoders[1].Summary.MAE != res.Decoders[1].Summary.MAE {
		t.Error("the same config gave other numbers on one core")
	}
}

// TestAcuityPoissonModel checks that a count model is decoded with the
// Poisson likelihood, and that it decodes the synthetic heading far better
// than chance (60 bins of 6 deg: a random guess has a mean absolute error
// of about 90 deg [computed: uniform error on a circle]).
func TestAcuityPoissonModel(t *testing.T) {
	rec, _, _ := synth.Population(synth.Config{Neurons: 40, Trials: 1200, Bins: 60, TwoPeakFrac: 0.25, UntunedFrac: 0.1, GainSD: 0.15, Poisson: true, Seed: 5})
	cfg := settings.Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = settings.AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 6, Encoding: settings.OneHot}
	cfg.Split.KeepBlocks, cfg.Split.ZScore = false, false
	cfg.Model.Loss, cfg.Model.Output = settings.Poisson, nn.Softplus
	cfg.Train.MaxEpochs, cfg.Train.Patience = 80, 20
	cfg.Acuity.Decoders = []settings.AcuityDecoder{settings.DecoderModel}
	cfg.Acuity.Repeats, cfg.Acuity.Bootstrap, cfg.Acuity.DecodeRepeats, cfg.Acuity.SizeCount = 3, 0, 1, 3
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := PrepareRecording(&cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Acuity(context.Background(), p, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Decoders) != 1 || res.Decoders[0].Name != "model-poisson" {
		t.Fatalf("decoders %v, want model-poisson alone", res.Decoders)
	}
	if mae := res.Decoders[0].Summary.MAE; !(mae < 30) {
		t.Errorf("Poisson model decoder: mean absolute error %.1f deg, want well below chance (about 90 deg)", mae)
	}
	// No bootstrap: no interval.
	if res.FitError == "" && (!math.IsNaN(res.Fit.Lo) || !math.IsNaN(res.Fit.Hi)) {
		t.Errorf("bootstrap 0: interval %v to %v, want NaN", res.Fit.Lo, res.Fit.Hi)
	}
}

// TestAcuityBoundedAxis checks a bounded axis: one pair fewer than bins
// (no wrap pair), and decoding errors as plain differences.
func TestAcuityBoundedAxis(t *testing.T) {
	p, _ := synthPrepared(t, 20, 1200, func(c *settings.Config) {
		c.Axis.Periodic = false
		c.Axis.BinWidth = 12
		c.Acuity.Decoders = []settings.AcuityDecoder{settings.DecoderLDA}
		c.Acuity.Repeats, c.Acuity.Bootstrap, c.Acuity.DecodeRepeats, c.Acuity.SizeCount = 3, 0, 1, 3
	})
	res, err := Acuity(context.Background(), p, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Pairs) != p.NBins-1 || res.Axis.Periodic() {
		t.Errorf("%d pairs on a bounded axis of %d bins (periodic %v), want %d", len(res.Pairs), p.NBins, res.Axis.Periodic(), p.NBins-1)
	}
	s := res.Decoders[0].Summary
	for i, tr := range s.Trials {
		// The error is decoded minus true bin centre; find the decoded bin
		// back from it and check it is a bin.
		want := s.Err[i] + res.Axis.Values[p.Cond[tr]]
		k := slices.Index(res.Axis.Values, want)
		if k < 0 {
			t.Fatalf("trial %d: error %v does not lead to a bin centre (%v): not a plain difference", tr, s.Err[i], want)
		}
	}
}
