package train

import (
	"context"
	"math"
	"path/filepath"
	"slices"
	"testing"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/settings"
)

// partsCase writes a small demo-scenario recording (neuron 5 constant) to
// .npy files and returns a config reading them and the recording.
func partsCase(t testing.TB, neurons, trials int) (*settings.Config, *data.Recording) {
	t.Helper()
	rec, _, _ := synth.Population(synth.Config{
		Neurons: neurons, Trials: trials, Bins: 60,
		TwoPeakFrac: 0.25, UntunedFrac: 0.1, GainSD: 0.15, NoiseSD: 0.5, Seed: 11,
	})
	for tr := 0; tr < rec.Y.Rows; tr++ {
		rec.Y.Data[tr*rec.Y.Cols+5] = 0.25
	}
	rec.Neurons = nil // a .npy file names no neurons
	dir := t.TempDir()
	cfg := settings.Defaults()
	cfg.Data.Responses = filepath.Join(dir, "responses.npy")
	cfg.Data.Stimulus = filepath.Join(dir, "heading.npy")
	if err := format.WriteNPY(cfg.Data.Responses, []int{rec.Y.Rows, rec.Y.Cols}, rec.Y.Data); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(cfg.Data.Stimulus, []int{len(rec.Stim)}, rec.Stim); err != nil {
		t.Fatal(err)
	}
	if rec.Block != nil {
		cfg.Data.Block = filepath.Join(dir, "block.npy")
		b := make([]float64, len(rec.Block))
		for i, v := range rec.Block {
			b[i] = float64(v)
		}
		if err := format.WriteNPY64(cfg.Data.Block, []int{len(b)}, b); err != nil {
			t.Fatal(err)
		}
	}
	cfg.Axis = settings.AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 6, Encoding: settings.OneHot}
	cfg.Train.MaxEpochs = 150
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	return &cfg, rec
}

type partsResult struct {
	p      *Prepared
	f      *Fitted
	scores []eval.Scores
	rel    []float64
}

func fitWith(t testing.TB, p *Prepared) partsResult {
	t.Helper()
	f, err := Fit(context.Background(), p, Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Reliability before scoring: scoring does not change it.
	rel := Reliability(p)
	curves := slices.Clone(f.Curves)
	r := partsResult{p: p, f: f, scores: ScoreFitted(p, f), rel: rel}
	f.Curves = curves
	return r
}

// floatsOf lists every number a run folder gets from a fit, by name.
func floatsOf(r partsResult) map[string][]float64 {
	N := r.p.Neurons()
	w := make([]float64, N*r.f.Net.Features())
	r.f.ReadoutWeights(w, 0, N)
	m := map[string][]float64{
		"filters": r.f.Net.ConvW(0), "filter_bias": r.f.Net.ConvB(0), "readout_bias": r.f.ReadoutBias(), "weights": w, "curves": r.f.Curves, "readout_l2": r.f.ReadoutL2,
		"reliability": r.rel,
	}
	if r.p.Norm != nil {
		m["norm_mean"], m["norm_scale"] = r.p.Norm.Mean, r.p.Norm.Scale
	}
	var log, sc []float64
	for _, e := range r.f.Log {
		log = append(log, e.TrainLoss, e.ValLoss, e.ValR2)
	}
	for _, s := range r.scores {
		sc = append(sc, s.TestR2, s.TestR, s.ExplainableFraction, s.FEV, s.CCAbs, s.CCMax, s.CCNorm, s.SPE, s.SplitHalf)
	}
	m["log"], m["scores"] = log, sc
	return m
}

// TestPartsStreamedEqualsInMemory: the fit from one streamed pass over the
// .npy file equals, bit for bit, the fit from the same statistics of the
// recording in memory (AccumulatePartsMatrix sums in the same order), and
// agrees with train's in-memory path (absolute per-condition sums,
// condstats.New) to rounding: the statistics are summed relative to a
// reference trial here and absolutely there, so the last bits of the sums
// differ (about 1e-16 relative). Measured with the quasi-Newton filters:
// filters 3e-15, readout weights 2e-13, curves and readout bias 1e-12,
// scores 5e-12 relative (values below 1e-3 compared absolutely; the
// ratio metrics divide by differences of nearly equal sums, such as the
// signal power, which carry the sums' rounding up); the tolerance is
// 2e-11. (With Adam on the filters, 150 steps carried the difference up
// to 1.3e-10.) Those largest elementwise differences are of numbers near
// zero in groups of far larger ones (a correlation of 7e-4 that moved by
// 2e-15); measured against the scale of their quantity (normwiseWorst:
// a metric over all neurons, a neuron's curve or weights) the largest
// difference is 2e-14, within the 1e-12 asked of a path whose summation
// order must differ.
//
// With a fixed model.readout_l2 the one-pass readout goes through the
// eigendecomposition of A A^T and the in-memory one through a Cholesky
// solve: the same numbers to rounding.
func TestPartsStreamedEqualsInMemory(t *testing.T) {
	for _, tc := range []struct {
		name    string
		penalty settings.Penalty
	}{{"auto", settings.Penalty{Auto: true, Value: 1}}, {"fixed", settings.Penalty{Value: 0.5}}} {
		t.Run(tc.name, func(t *testing.T) { testPartsStreamed(t, tc.penalty) })
	}
}

func testPartsStreamed(t *testing.T, penalty settings.Penalty) {
	cfg, mem := partsCase(t, 300, 1200)
	cfg.Model.ReadoutL2 = penalty
	copyCfg := func() *settings.Config { c := *cfg; return &c }

	legacy, err := PrepareRecording(copyCfg(), mem)
	if err != nil {
		t.Fatal(err)
	}
	fromMatrix, err := PrepareParts(copyCfg(), mem, nil)
	if err != nil {
		t.Fatal(err)
	}
	rec, s, err := data.LoadStream(cfg.Source())
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	streamed, err := PrepareParts(copyCfg(), rec, s)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range []*Prepared{fromMatrix, streamed} {
		if !slices.Equal(p.Report.Warnings, legacy.Report.Warnings) || !slices.Equal(p.Report.Constant, legacy.Report.Constant) {
			t.Fatalf("report:\n got %q %v\nwant %q %v", p.Report.Warnings, p.Report.Constant, legacy.Report.Warnings, legacy.Report.Constant)
		}
		if !slices.Equal(p.Train, legacy.Train) || !slices.Equal(p.Test, legacy.Test) || !slices.Equal(p.Cond, legacy.Cond) {
			t.Fatalf("split differs: %d %d %d / %d %d %d blocks %v", len(p.Train), len(p.Val), len(p.Test), len(legacy.Train), len(legacy.Val), len(legacy.Test), p.Rec.Block != nil)
		}
	}
	want := floatsOf(fitWith(t, legacy))
	fm := floatsOf(fitWith(t, fromMatrix))
	st := floatsOf(fitWith(t, streamed))
	worst := 0.0
	for name, w := range want {
		if !slices.Equal(bitsOf(st[name]), bitsOf(fm[name])) {
			t.Errorf("%s: streamed and in-memory statistics give different bits", name)
		}
		if len(fm[name]) != len(w) {
			t.Fatalf("%s: %d values, want %d", name, len(fm[name]), len(w))
		}
		for i, v := range w {
			g := fm[name][i]
			if name == "log" && i%3 == 2 && math.IsNaN(g) {
				// The statistics path logs the validation R^2 at the
				// best epoch only (projection.MSE.Validate).
				continue
			}
			if math.IsNaN(v) != math.IsNaN(g) {
				t.Fatalf("%s[%d]: got %v want %v", name, i, g, v)
			}
			if d := math.Abs(g-v) / math.Max(math.Abs(v), 1e-3); d > worst && !math.IsNaN(d) {
				worst = d
			}
		}
	}
	t.Logf("largest relative difference from train's in-memory path: %.3g", worst)
	if worst > 2e-11 {
		t.Errorf("statistics path differs from the in-memory path by %.3g relative, want <= 2e-11", worst)
	}
	N := legacy.Neurons()
	F := len(want["weights"]) / N
	name, nw := normwiseWorst(want, fm, N, F)
	t.Logf("largest normwise relative difference: %.3g (%s)", nw, name)
	if nw > 1e-12 {
		t.Errorf("%s: statistics path differs from the in-memory path by %.3g normwise, want <= 1e-12", name, nw)
	}
}

// normwiseWorst returns the largest normwise relative difference
// max|got - want| / max|want| (the infinity norm; Higham, Accuracy and
// Stability of Numerical Algorithms, 2nd ed., section 1.2) over the
// natural groups of each named array: a metric of the scores (9 per
// neuron) or of the log (3 per epoch), a neuron's curve (bins x N) or
// readout weights (N x F), else the whole array. The elementwise measure
// above divides by values near zero within a group whose scale is far
// larger (a correlation of 7e-4 among correlations near 0.7); this one
// measures each number against the scale of the quantity it belongs to.
// NaNs (checked above) are skipped.
func normwiseWorst(want, got map[string][]float64, N, F int) (string, float64) {
	group := func(name string, i int) int {
		switch name {
		case "scores":
			return i % 9
		case "log":
			return i % 3
		case "curves":
			return i % N
		case "weights":
			return i / F
		}
		return 0
	}
	worstName, worst := "", 0.0
	for name, w := range want {
		diff, scale := map[int]float64{}, map[int]float64{}
		for i, v := range w {
			g := got[name][i]
			if math.IsNaN(v) || math.IsNaN(g) {
				continue
			}
			k := group(name, i)
			diff[k] = math.Max(diff[k], math.Abs(g-v))
			scale[k] = math.Max(scale[k], math.Abs(v))
		}
		for k, d := range diff {
			if d == 0 {
				continue
			}
			if r := d / scale[k]; r > worst {
				worstName, worst = name, r
			}
		}
	}
	return worstName, worst
}

func bitsOf(v []float64) []uint64 {
	out := make([]uint64, len(v))
	for i, x := range v {
		out[i] = math.Float64bits(x)
	}
	return out
}
