package train

import (
	"context"
	"math"
	"reflect"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/nn"
)

// TestAcuityConfigErrors checks that every bad setting of the acuity
// section is refused with a message naming its key.
func TestAcuityConfigErrors(t *testing.T) {
	cases := []struct {
		name string
		edit func(*AcuityConfig)
		want string
	}{
		{"sizes not increasing", func(a *AcuityConfig) { a.Sizes = []int{10, 10} }, "acuity.sizes[1] 10: sizes must increase strictly"},
		{"size zero", func(a *AcuityConfig) { a.Sizes = []int{0, 4} }, "acuity.sizes[0] 0"},
		{"one size", func(a *AcuityConfig) { a.DecodeSizes = []int{5} }, "acuity.decode_sizes: give at least two sizes"},
		{"size count", func(a *AcuityConfig) { a.SizeCount = 1 }, "acuity.size_count 1"},
		{"max size", func(a *AcuityConfig) { a.MaxSize = -3 }, "acuity.max_size -3"},
		{"repeats", func(a *AcuityConfig) { a.Repeats = 0 }, "acuity.repeats 0"},
		{"bootstrap negative", func(a *AcuityConfig) { a.Bootstrap = -1 }, "acuity.bootstrap -1"},
		{"bootstrap too few", func(a *AcuityConfig) { a.Bootstrap = 20 }, "acuity.bootstrap 20"},
		{"bootstrap one repeat", func(a *AcuityConfig) { a.Repeats = 1 }, "acuity.bootstrap 1000 with acuity.repeats 1"},
		{"no decoder", func(a *AcuityConfig) { a.Decoders = nil }, "acuity.decoders: give at least one of lda or model"},
		{"decoder twice", func(a *AcuityConfig) { a.Decoders = []AcuityDecoder{DecoderLDA, DecoderLDA} }, "acuity.decoders[1] lda: listed twice"},
		{"shrinkage", func(a *AcuityConfig) { a.Shrinkage = 1.5 }, "acuity.shrinkage 1.5"},
		{"decode repeats", func(a *AcuityConfig) { a.DecodeRepeats = 0 }, "acuity.decode_repeats 0"},
		{"output", func(a *AcuityConfig) { a.Output = "" }, "acuity.output"},
		{"encoder without model decoder", func(a *AcuityConfig) { a.Encoder, a.Decoders = "run", []AcuityDecoder{DecoderLDA} }, "acuity.encoder run: used only by the model decoder"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			cfg := validBase()
			c.edit(&cfg.Acuity)
			err := cfg.Validate()
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("got error %v, want one containing %q", err, c.want)
			}
		})
	}
	// A wrong word names the key and its line.
	_, err := ParseConfig([]byte("acuity:\n  decoders: [lda, bayes]\n"), "x.yaml")
	if err == nil || !strings.Contains(err.Error(), "acuity.decoders") || !strings.Contains(err.Error(), "line 2") || !strings.Contains(err.Error(), "lda or model") {
		t.Errorf("unknown decoder: got %v, want an error naming acuity.decoders, line 2 and the words", err)
	}
	_, err = ParseConfig([]byte("acuity:\n  repeat: 3\n"), "x.yaml")
	if err == nil || !strings.Contains(err.Error(), `"acuity.repeat"`) {
		t.Errorf("misspelt key: got %v, want an error naming acuity.repeat", err)
	}
	cfg, err := ParseConfig([]byte("acuity:\n  decoders: [model]\n  sizes: [4, 8, 16]\n"), "x.yaml")
	if err != nil || !slices.Equal(cfg.Acuity.Decoders, []AcuityDecoder{DecoderModel}) || !slices.Equal(cfg.Acuity.Sizes, []int{4, 8, 16}) || cfg.Acuity.Repeats != 20 {
		t.Errorf("parsed %+v, %v; want decoders [model], sizes [4 8 16] and the default repeats 20", cfg.Acuity, err)
	}
}

func TestGeometricSizes(t *testing.T) {
	cases := []struct {
		lo, hi, count int
		want          []int
	}{
		{10, 24000, 8, []int{10, 30, 92, 281, 854, 2597, 7894, 24000}}, // 10 * 2400^(i/7), rounded [computed by hand]
		{5, 63, 8, []int{5, 7, 10, 15, 21, 31, 44, 63}},
		{10, 4, 8, []int{4}},         // lo above hi: hi only
		{1, 4, 8, []int{1, 2, 3, 4}}, // repeats dropped
		{2, 9, 2, []int{2, 9}},
	}
	for _, c := range cases {
		if got := GeometricSizes(c.lo, c.hi, c.count); !slices.Equal(got, c.want) {
			t.Errorf("GeometricSizes(%d, %d, %d) = %v, want %v", c.lo, c.hi, c.count, got, c.want)
		}
	}
}

// TestAcuityUsesCompareFolds checks that the decoders run on the folds of
// stria compare (Folds of the same config, prepared afresh as compare's
// plan does), that every trial is decoded exactly once, and that the same
// config gives the same numbers on one core as on all.
func TestAcuityUsesCompareFolds(t *testing.T) {
	small := func(c *Config) {
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
	cfg := Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 6, Encoding: OneHot}
	cfg.Split.KeepBlocks, cfg.Split.ZScore = false, false
	cfg.Model.Loss, cfg.Model.Output = Poisson, nn.Softplus
	cfg.Train.MaxEpochs, cfg.Train.Patience = 80, 20
	cfg.Acuity.Decoders = []AcuityDecoder{DecoderModel}
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
	p, _ := synthPrepared(t, 20, 1200, func(c *Config) {
		c.Axis.Periodic = false
		c.Axis.BinWidth = 12
		c.Acuity.Decoders = []AcuityDecoder{DecoderLDA}
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
