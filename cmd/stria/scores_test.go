package main

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// writeUntunedHeavy writes a recording where most cells are untuned and
// conditions have few trials, the case where noise-ceiling ratios explode:
// n cells, 70 % of them with a flat mean (Poisson counts around a
// baseline of 2-6), the rest von Mises tuned (peak 2-10 spikes above
// baseline, kappa 1-4); 12 directions 30 deg apart (on the bin centres of
// 0..360 in 30-deg bins when centred), perCond trials each, shuffled; one
// constant cell (neuron 0) to check exclusions. It returns the config path
// and which neurons are tuned. split is added to the split section, extra
// to the config.
func writeUntunedHeavy(t *testing.T, dir string, n, perCond int, split, extra string) (string, []bool) {
	t.Helper()
	rng := rand.New(rand.NewPCG(12, 70))
	const nb = 12
	T := nb * perCond
	stim := make([]float64, T)
	for i := range stim {
		stim[i] = float64(30 * (i % nb))
	}
	rng.Shuffle(T, func(a, b int) { stim[a], stim[b] = stim[b], stim[a] })
	tuned := make([]bool, n)
	base, amp, kappa, pref := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	for j := range tuned {
		tuned[j] = j > 0 && rng.Float64() < 0.3
		base[j] = 2 + 4*rng.Float64()
		amp[j] = 2 + 8*rng.Float64()
		kappa[j] = 1 + 3*rng.Float64()
		pref[j] = 360 * rng.Float64()
	}
	poisson := func(lam float64) float32 { // Knuth's method; lam < 20 here
		l, k, p := math.Exp(-lam), 0, 1.0
		for {
			p *= rng.Float64()
			if p <= l {
				return float32(k)
			}
			k++
		}
	}
	y := make([]float32, T*n)
	for i := 0; i < T; i++ {
		for j := 0; j < n; j++ {
			lam := base[j]
			if tuned[j] {
				lam += amp[j] * math.Exp(kappa[j]*(math.Cos((stim[i]-pref[j])*math.Pi/180)-1))
			}
			if j == 0 {
				y[i*n+j] = 3 // constant: excluded from every score
				continue
			}
			y[i*n+j] = poisson(lam)
		}
	}
	if err := format.WriteNPY(filepath.Join(dir, "resp.npy"), []int{T, n}, y); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(filepath.Join(dir, "dir.npy"), []int{T}, stim); err != nil {
		t.Fatal(err)
	}
	cfg := fmt.Sprintf(`seed: 3
data: {responses: resp.npy, stimulus: dir.npy}
axis: {name: direction, unit: deg, min: 0, max: 360, periodic: true, bin_width: 30}
split: {test_fraction: 0.2, validation_fraction: 0.1, folds: 5, keep_blocks: false, zscore: true%s}
model:
  layers: [{channels: 4, kernel: 5, stride: 1, border: circular}]
compare:
  baselines: [condmean, vonmises]
output: %s
%s`, split, filepath.Join(dir, "fit"), extra)
	path := filepath.Join(dir, "cfg.yaml")
	if err := os.WriteFile(path, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	return path, tuned
}

// ratioRange returns the smallest and largest finite value of the ratio
// columns in cols.
func ratioRange(cols map[string][]float64, rows []bool) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, c := range runfolder.RatioColumns {
		for j, v := range cols[c] {
			if rows != nil && !rows[j] || math.IsNaN(v) {
				continue
			}
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	return lo, hi
}

// TestUntunedHeavyRatios runs stria fit and stria compare on an
// untuned-cell-heavy recording (300 cells, 70 % untuned, 8 trials per
// condition: 1-2 held-out trials per condition and fold) and checks issue
// 12's bar: no ratio score below -5 or above 5 without a reason, in the
// fit's neuron_scores.csv and in compare's fold_scores.csv and
// fold_averages.csv (it takes about 2 s); every NaN ratio has its verdict; fit and compare give
// NaN to the same kind of neuron (a ceiling not usable on the scored
// trials); the summaries count the reliable neurons. With -v it logs the
// ranges with the gate switched off (scores.ceiling_alpha: 1,
// scores.min_reliability: -1), the "before".
func TestUntunedHeavyRatios(t *testing.T) {
	type outcome struct {
		fitLo, fitHi, cmpLo, cmpHi, sumLo, sumHi float64
		fitNaN, fitUnusable, cmpNaN, cmpNoFold   int
		reliable, scored, reliableTuned, tuned   int
		foldUnusable                             []int
		fevSummary                               runfolder.Spread
	}
	run := func(extra string) outcome {
		dir := t.TempDir()
		cfg, tuned := writeUntunedHeavy(t, dir, 300, 8, "", extra)
		cmp := filepath.Join(dir, "cmp")
		if out, err := runCLI(t, "fit", "--config", cfg, "--quiet"); err != nil {
			t.Fatalf("fit: %v\n%s", err, out)
		}
		out, err := runCLI(t, "compare", "--config", cfg, "--out", cmp, "--quiet")
		if err != nil {
			t.Fatalf("compare: %v\n%s", err, out)
		}
		// compare prints the data warnings, each once, and the neurons
		// each summary kept.
		if k := strings.Count(out, "warning: 1 neuron(s) have the same value on every trial"); k != 1 {
			t.Errorf("compare printed the constant-neuron warning %d times, want once:\n%s", k, out)
		}
		if extra == "" && !strings.Contains(out, "(reliable)") || !strings.Contains(out, "usable on some fold") {
			t.Errorf("compare output lacks the kept neurons or the verdicts:\n%s", out)
		}
		var o outcome
		// Fit: neuron_scores.csv.
		ns, err := runfolder.ReadNeuronScores(filepath.Join(dir, "fit"), 300)
		if err != nil {
			t.Fatal(err)
		}
		cols := map[string][]float64{}
		for _, c := range runfolder.RatioColumns {
			cols[c] = ns.Col(c)
		}
		o.fitLo, o.fitHi = ratioRange(cols, nil)
		for j := range ns.Names {
			if ns.Excluded[j] != "" {
				continue
			}
			o.scored++
			if tuned[j] {
				o.tuned++
				if ns.SplitHalfAll[j] >= 0.3 {
					o.reliableTuned++
				}
			}
			if math.IsNaN(ns.Col("fev")[j]) {
				o.fitNaN++
			}
			if ns.Ceiling[j] != "usable" {
				o.fitUnusable++
			}
			if math.IsNaN(ns.Col("fev")[j]) && ns.Ceiling[j] == "usable" {
				t.Errorf("fit: neuron %d has NaN fev with a usable ceiling (no reason)", j)
			}
		}
		if ns.Excluded[0] == "" || ns.Ceiling[0] != "" {
			t.Errorf("fit: constant neuron 0 excluded %q, ceiling %q", ns.Excluded[0], ns.Ceiling[0])
		}
		var sum runfolder.Summary
		b, _ := os.ReadFile(filepath.Join(dir, "fit", runfolder.FileSummary))
		if err := json.Unmarshal(b, &sum); err != nil {
			t.Fatal(err)
		}
		o.reliable = sum.Reliable
		if sum.Spread["fev"].Kept != sum.Reliable || sum.Spread["test_r2"].Kept != sum.Scored || sum.Ceilings["usable"] != o.scored-o.fitUnusable {
			t.Errorf("summary.json: fev kept %d, reliable %d; test_r2 kept %d, scored %d; verdicts %v", sum.Spread["fev"].Kept, sum.Reliable, sum.Spread["test_r2"].Kept, sum.Scored, sum.Ceilings)
		}
		// Compare: every fold's scores and the fold averages.
		cf, err := comparefolder.ReadComparison(cmp)
		if err != nil {
			t.Fatal(err)
		}
		o.cmpLo, o.cmpHi = math.Inf(1), math.Inf(-1)
		for _, fs := range cf.FoldScores {
			c := map[string][]float64{}
			for k, name := range runfolder.ScoreColumns {
				c[name] = fs.Cols[k]
			}
			lo, hi := ratioRange(c, nil)
			o.cmpLo, o.cmpHi = math.Min(o.cmpLo, lo), math.Max(o.cmpHi, hi)
			for j, v := range c["fev"] {
				if math.IsNaN(v) && fs.Ceiling[j] == "usable" {
					t.Errorf("compare %s fold %d: neuron %d has NaN fev with a usable ceiling", fs.Model, fs.Fold+1, j)
				}
			}
		}
		// The constant neuron has no descriptor from any source; a tuned
		// one has a preferred direction.
		for _, d := range cf.Descriptors {
			if d.Neuron == 0 && !(math.IsNaN(d.Preferred) && math.IsNaN(d.Peak) && math.IsNaN(d.OneMinusCV) && math.IsNaN(d.OSI) && math.IsNaN(d.DSI) && math.IsNaN(d.DirVector)) {
				t.Errorf("descriptors of the constant neuron 0 (%s): %+v, want NaN throughout", d.Source, d.Descriptors)
			}
		}
		res := cf.Result
		o.fevSummary = res.Summary["encoder"]["fev"]
		o.sumLo, o.sumHi = math.Inf(1), math.Inf(-1)
		for _, m := range res.Models {
			lo, hi := ratioRange(res.PerNeuron[m], nil)
			o.sumLo, o.sumHi = math.Min(o.sumLo, lo), math.Max(o.sumHi, hi)
		}
		for j := 0; j < 300; j++ {
			if cf.Excluded[j] != "" {
				continue
			}
			nan := math.IsNaN(res.PerNeuron["encoder"]["fev"][j])
			if nan {
				o.cmpNaN++
			}
			if res.UsableFolds[j] == 0 {
				o.cmpNoFold++
				if res.Ceiling[j] == "usable" || res.Ceiling[j] == "" {
					t.Errorf("compare: neuron %d has no usable fold but verdict %q", j, res.Ceiling[j])
				}
			}
		}
		for _, fc := range cf.Info.FoldCeilings {
			o.foldUnusable = append(o.foldUnusable, o.scored-fc["usable"])
		}
		if cf.Info.Reliable != o.reliable {
			t.Errorf("reliable neurons: compare %d, fit %d (both over all trials)", cf.Info.Reliable, o.reliable)
		}
		return o
	}
	after := run("")
	before := run("scores: {ceiling_alpha: 1, min_reliability: -1}\n")
	for _, c := range []struct {
		name   string
		lo, hi float64
	}{{"fit neuron_scores.csv", after.fitLo, after.fitHi}, {"compare fold_scores.csv", after.cmpLo, after.cmpHi}, {"compare fold_averages.csv", after.sumLo, after.sumHi}} {
		if c.lo < -5 || c.hi > 5 {
			t.Errorf("%s: ratio scores span [%.3g, %.3g] with the gate, want within [-5, 5]", c.name, c.lo, c.hi)
		}
	}
	// A NaN ratio is exactly a neuron whose ceiling is not usable: on the
	// fit's test trials, and in compare on every fold.
	if after.fitNaN != after.fitUnusable || after.cmpNaN != after.cmpNoFold {
		t.Errorf("NaN fev: fit %d (unusable %d), compare %d (no usable fold %d)", after.fitNaN, after.fitUnusable, after.cmpNaN, after.cmpNoFold)
	}
	t.Logf("scored %d neurons (%d tuned), %d with split_half_all >= 0.3 (%d of them tuned)", after.scored, after.tuned, after.reliable, after.reliableTuned)
	for _, o := range []struct {
		name string
		o    outcome
	}{{"before (alpha 1)", before}, {"after (alpha 0.05)", after}} {
		f := o.o.fevSummary
		t.Logf("%s: fit ratios [%.3g, %.3g], NaN fev %d; compare folds [%.3g, %.3g] (not usable per fold %v), fold averages [%.3g, %.3g], NaN fev %d; encoder fev median %.3g [%.3g, %.3g] over %d kept (%s, %d NaN)",
			o.name, o.o.fitLo, o.o.fitHi, o.o.fitNaN, o.o.cmpLo, o.o.cmpHi, o.o.foldUnusable, o.o.sumLo, o.o.sumHi, o.o.cmpNaN, float64(f.Median), float64(f.Q1), float64(f.Q3), f.Kept, f.KeptBy, f.NaN)
	}
}

// TestInspectSummarises checks that stria inspect shows the stimulus
// range, the distinct values and the blocks, names the split-half
// reliability over all trials, and, on a config that stria fit refuses
// (radian values on a degree axis: 11 of 12 bins empty), still prints the
// summary, then the problem, and fails.
func TestInspectSummarises(t *testing.T) {
	dir := t.TempDir()
	cfg, _ := writeUntunedHeavy(t, dir, 20, 6, ", block_trials: 8", "")
	out, err := runCLI(t, "inspect", "--config", cfg)
	if err != nil {
		t.Fatalf("inspect: %v\n%s", err, out)
	}
	for _, want := range []string{
		"stimulus (direction): values from 0 to 330 deg; 12 distinct: 0, 30, 60",
		"blocks: 9 (runs of split.block_trials = 8 consecutive trials), trials per block min 8, median 8, max 8",
		"split-half reliability (all trials)",
		"neurons at or above scores.min_reliability = 0.3",
		"fewer than 10 trials",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("inspect output lacks %q:\n%s", want, out)
		}
	}
	// The same directions in radians on the degree axis.
	stim := make([]float64, 72)
	for i := range stim {
		stim[i] = float64(i%12) * 30 * math.Pi / 180
	}
	if err := format.WriteNPY64(filepath.Join(dir, "dir.npy"), []int{72}, stim); err != nil {
		t.Fatal(err)
	}
	out, err = runCLI(t, "inspect", "--config", cfg)
	if err == nil || !strings.Contains(err.Error(), "problem") {
		t.Errorf("inspect of radians on a degree axis: err %v, want a failure naming the problems", err)
	}
	for _, want := range []string{"trials: 72   neurons: 20", "values from 0 to 5.75959 deg", "blocks: 9", "look like radians", "problem:"} {
		if !strings.Contains(out, want) {
			t.Errorf("inspect of a refused config lacks %q:\n%s", want, out)
		}
	}
}
