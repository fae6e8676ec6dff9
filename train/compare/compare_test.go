package compare

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/runfolder/comparefolder"
	"github.com/strialab/stria/train/settings"
)

func TestSpecsGrid(t *testing.T) {
	src := `data: {responses: r.npy}
axis: {min: 0, max: 360, periodic: true, bin_width: 30}
compare:
  encoders:
    - name: enc
      grid:
        readout_l2: [0.1, 1]
        channels: [2, 4]
    - name: small
      layers: [{channels: 2, kernel: 3}]
  baselines: [condmean, vonmises]
`
	cfg, err := settings.ParseConfig([]byte(src), "c.yaml")
	if err != nil {
		t.Fatal(err)
	}
	specs, err := Specs(cfg)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, s := range specs {
		names = append(names, s.Name)
	}
	// Grid keys expand in sorted order (channels before readout_l2).
	want := []string{"enc[channels=2,readout_l2=0.1]", "enc[channels=2,readout_l2=1]", "enc[channels=4,readout_l2=0.1]",
		"enc[channels=4,readout_l2=1]", "small", "condmean", "vonmises"}
	if strings.Join(names, " ") != strings.Join(want, " ") {
		t.Fatalf("specs %v, want %v", names, want)
	}
	if specs[2].Cfg.Model.Layers[0].Channels != 4 || specs[2].Cfg.Model.ReadoutL2 != (settings.Penalty{Value: 0.1}) || specs[4].Cfg.Model.Layers[0].Kernel != 3 {
		t.Errorf("grid values not applied: %+v / %+v", specs[2].Cfg.Model, specs[4].Cfg.Model)
	}
	if cfg.Model.Layers[0].Channels != 8 {
		t.Error("expanding the grid changed the base config")
	}
	cfg.Compare.Encoders[0].Grid["kernal"] = []float64{3}
	if _, err := Specs(cfg); err == nil || !strings.Contains(err.Error(), `unknown key "kernal"`) {
		t.Errorf("misspelt grid key: %v", err)
	}
	delete(cfg.Compare.Encoders[0].Grid, "kernal")
	cfg.Compare.Baselines = []string{"gaussian"}
	if _, err := Specs(cfg); err == nil {
		t.Error("gaussian accepted on a periodic axis")
	}
}

// TestResolvedConfigRoundTrip checks that the resolved config a run or a
// comparison writes reads back to the same models (stria gather relies on
// it): a spec without layers must keep the config's layers.
func TestResolvedConfigRoundTrip(t *testing.T) {
	src := "data: {responses: /r.npy}\naxis: {min: 0, max: 360, periodic: true, bin_width: 30}\n" +
		"compare:\n  encoders:\n    - name: a\n    - name: b\n      layers: [{channels: 2, kernel: 3}]\n"
	cfg, err := settings.ParseConfig([]byte(src), "c.yaml")
	if err != nil {
		t.Fatal(err)
	}
	b, err := cfg.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	back, err := settings.ParseConfig(b, "resolved.yaml")
	if err != nil {
		t.Fatalf("resolved config does not parse: %v\n%s", err, b)
	}
	s1, err1 := Specs(cfg)
	s2, err2 := Specs(back)
	if err1 != nil || err2 != nil || len(s1) != len(s2) {
		t.Fatalf("specs: %v / %v", err1, err2)
	}
	for i := range s1 {
		if s1[i].Name != s2[i].Name || (s1[i].Cfg != nil && s1[i].Cfg.Model.Layers[0] != s2[i].Cfg.Model.Layers[0]) {
			t.Errorf("spec %d: %+v then %+v", i, s1[i], s2[i])
		}
	}
}

func TestArrayTask(t *testing.T) {
	src := "data: {responses: /r.npy}\naxis: {min: 0, max: 360, periodic: true, bin_width: 30}\nsplit: {folds: 3}\n" +
		"compare:\n  encoders: [{name: a}, {name: b}]\n  baselines: [condmean]\n"
	cfg, err := settings.ParseConfig([]byte(src), "c.yaml")
	if err != nil {
		t.Fatal(err)
	}
	p, err := NewPlan(cfg)
	if err != nil {
		t.Fatal(err)
	}
	// 3 models x 3 folds; ids recording-free for a single recording.
	if len(p.Units) != 9 || p.Units[0].ID != "a/fold1" || p.Units[8].ID != "condmean/fold3" {
		t.Fatalf("units %+v", p.Units)
	}
	// Every unit goes to exactly one of 4 tasks: fold by fold, runs of 3,
	// 2, 2 and 2 consecutive units.
	want := [][]string{
		{"a/fold1", "b/fold1", "condmean/fold1"},
		{"a/fold2", "b/fold2"},
		{"condmean/fold2", "a/fold3"},
		{"b/fold3", "condmean/fold3"},
	}
	seen := map[string]int{}
	for i := 1; i <= 4; i++ {
		var got []string
		for _, u := range p.ArrayTask(i, 4) {
			seen[u.ID]++
			got = append(got, u.ID)
		}
		if !slices.Equal(got, want[i-1]) {
			t.Errorf("task %d: %v, want %v", i, got, want[i-1])
		}
	}
	for _, u := range p.Units {
		if seen[u.ID] != 1 {
			t.Errorf("unit %s in %d tasks, want 1", u.ID, seen[u.ID])
		}
	}
	// More tasks than units: the last ones are empty.
	if got := p.ArrayTask(10, 10); len(got) != 0 {
		t.Errorf("task 10 of 10 on 9 units: %v, want none", got)
	}
	for _, c := range []struct{ i, n int }{{0, 3}, {4, 3}, {1, 0}, {-1, -1}} {
		if err := CheckArrayTask(c.i, c.n); err == nil {
			t.Errorf("array task %d of %d accepted", c.i, c.n)
		}
	}
}

func TestArrayTaskFromEnv(t *testing.T) {
	for _, c := range []struct {
		name    string
		env     map[string]string
		i, n    int
		ok      bool
		wantErr string
	}{
		{"not in an array", map[string]string{}, 0, 0, false, ""},
		{"array 1-4", map[string]string{"SLURM_ARRAY_TASK_ID": "3", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_COUNT": "4"}, 3, 4, true, ""},
		// --array=5-7: task 7 is the third of three (7 - 5 + 1).
		{"array 5-7", map[string]string{"SLURM_ARRAY_TASK_ID": "7", "SLURM_ARRAY_TASK_MIN": "5", "SLURM_ARRAY_TASK_COUNT": "3"}, 3, 3, true, ""},
		{"no count", map[string]string{"SLURM_ARRAY_TASK_ID": "2", "SLURM_ARRAY_TASK_MIN": "1"}, 0, 0, true, "SLURM_ARRAY_TASK_COUNT is not"},
		{"not a number", map[string]string{"SLURM_ARRAY_TASK_ID": "x", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_COUNT": "2"}, 0, 0, true, `SLURM_ARRAY_TASK_ID="x"`},
		// --array=1,5,9 (3 tasks): task 9 maps to 9 of 3, out of range.
		{"gappy array", map[string]string{"SLURM_ARRAY_TASK_ID": "9", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_COUNT": "3"}, 0, 0, true, "contiguous"},
	} {
		t.Run(c.name, func(t *testing.T) {
			i, n, ok, err := ArrayTaskFromEnv(func(k string) string { return c.env[k] })
			if c.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), c.wantErr) {
					t.Errorf("err %v, want one containing %q", err, c.wantErr)
				}
				return
			}
			if err != nil || i != c.i || n != c.n || ok != c.ok {
				t.Errorf("got %d of %d, ok %v, err %v; want %d of %d, ok %v", i, n, ok, err, c.i, c.n, c.ok)
			}
		})
	}
}

// TestAcrossFolds checks the fold averages, spreads, winners and pairs on
// numbers worked by hand.
func TestAcrossFolds(t *testing.T) {
	sc := func(r2 ...float64) []eval.Scores {
		out := make([]eval.Scores, len(r2))
		for j, v := range r2 {
			// A usable noise ceiling: positive signal and a significant F.
			out[j] = eval.Scores{TestR2: v, TestR: v, FEV: v, CCNorm: v, SP: 1, ExplainableFraction: 0.5, SignalF: math.Inf(1), SignalDF1: 3, SignalDF2: 20}
		}
		return out
	}
	perFold := map[string][][]eval.Scores{
		// Model a: neuron 0 averages (0.2+0.4)/2 = 0.3, neuron 1 is
		// excluded, neuron 2 averages 0.6, neuron 3 0.8.
		"a": {sc(0.2, 9, 0.5, 0.8), sc(0.4, 9, 0.7, 0.8)},
		// Model b: 0.1, -, 0.7, 0.9.
		"b": {sc(0.1, 9, 0.7, 0.9), sc(0.1, 9, 0.7, 0.9)},
	}
	c, _ := AcrossFolds([]string{"a", "b"}, 2, 4, perFold, []bool{false, true, false, false}, Scoring{Alpha: 0.05})
	if got := c.PerNeuron["a"]["test_r2"]; fmt.Sprint(got) != "[0.30000000000000004 NaN 0.6 0.8]" {
		t.Errorf("fold averages of a: %v, want [0.3 NaN 0.6 0.8]", got)
	}
	// Medians over the three scored neurons: a 0.6, b 0.7; the excluded
	// neuron is not an undefined score (NaN count 0).
	if s := c.Summary["b"]["cc_norm"]; float64(s.Median) != 0.7 || s.N != 3 || s.NaN != 0 {
		t.Errorf("spread of b: %+v, want median 0.7, n 3, nan 0", s)
	}
	if c.Winner["test_r2"] != "b" || c.Excluded != 1 {
		t.Errorf("winner %q excluded %d, want b and 1", c.Winner["test_r2"], c.Excluded)
	}
	// a beats b on neuron 0 only: share 1/3.
	for _, pt := range c.Pairs {
		if pt.A != "a" || pt.B != "b" || pt.ShareA != 1.0/3 || pt.N != 3 {
			t.Errorf("pair %+v, want a vs b, share 1/3, n 3", pt)
		}
	}
	if len(c.Pairs) != len(comparefolder.CompareMetrics) {
		t.Errorf("%d pairs, want one per metric", len(c.Pairs))
	}
	// Pooling two recordings concatenates their neurons.
	p := Pool([]*comparefolder.Comparison{c, c})
	if p.Neurons != 8 || p.Excluded != 2 || len(p.PerNeuron["a"]["fev"]) != 8 || !slices.Equal(p.Models, c.Models) {
		t.Errorf("pooled: %d neurons, %d excluded, models %v", p.Neurons, p.Excluded, p.Models)
	}
	if s := p.Summary["a"]["test_r2"]; s.N != 6 || s.NaN != 0 {
		t.Errorf("pooled spread %+v, want n 6, nan 0", s)
	}
}

// TestSummariseGates checks that compare gates every fold's ceilings as a
// fit does, averages the ratio scores over the usable folds only, gives a
// neuron without a usable fold NaN with its verdict, and summarises and
// tests the ratio metrics over the reliable neurons only (numbers by
// hand).
func TestSummariseGates(t *testing.T) {
	usable := eval.Scores{SP: 1, ExplainableFraction: 0.5, SignalF: 50, SignalDF1: 11, SignalDF2: 36}
	chance := eval.Scores{SP: 0.01, ExplainableFraction: 0.01, SignalF: 1.1, SignalDF1: 11, SignalDF2: 36} // p about 0.39
	none := eval.Scores{SP: -0.2, ExplainableFraction: -0.1, SignalF: 0.8, SignalDF1: 11, SignalDF2: 36}
	with := func(s eval.Scores, v float64) eval.Scores {
		s.TestR2, s.TestR, s.FEV, s.CCNorm, s.SPE = v, v, v, v, v
		return s
	}
	// Neuron 0: usable on both folds (FEV 0.5, 0.7). Neuron 1: usable on
	// fold 1 only (0.4; fold 2's -700 comes from a chance ceiling). Neuron
	// 2: never usable (fold 1 chance, fold 2 no signal power; FEV 3 and
	// -50). Neuron 3: usable, but unreliable (split-half 0.1).
	perFold := map[string][][]eval.Scores{
		"a": {
			{with(usable, 0.5), with(usable, 0.4), with(chance, 3), with(usable, 0.9)},
			{with(usable, 0.7), with(chance, -700), with(none, -50), with(usable, 0.9)},
		},
	}
	rel := []float64{0.8, 0.6, 0.05, 0.1}
	c, verdicts := AcrossFolds([]string{"a"}, 2, 4, perFold, nil, Scoring{Alpha: 0.05, SplitHalfAll: rel, MinReliability: 0.3})
	fev := c.PerNeuron["a"]["fev"]
	if math.Abs(fev[0]-0.6) > 1e-15 || fev[1] != 0.4 || !math.IsNaN(fev[2]) || fev[3] != 0.9 {
		t.Errorf("fold-averaged fev %v, want [0.6 0.4 NaN 0.9]", fev)
	}
	// test_r2 is not gated: neuron 1 averages (0.4 - 700)/2.
	if got := c.PerNeuron["a"]["test_r2"][1]; got != (0.4-700)/2 {
		t.Errorf("test_r2 of neuron 1 = %v, want %v", got, (0.4-700)/2)
	}
	if want := []int{2, 1, 0, 2}; !slices.Equal(c.UsableFolds, want) {
		t.Errorf("usable folds %v, want %v", c.UsableFolds, want)
	}
	// Neuron 2: one fold signal_not_significant, one no_signal_power: a
	// tie, the first in code order.
	if want := []string{"usable", "usable", "no_signal_power", "usable"}; !slices.Equal(c.Ceiling, want) {
		t.Errorf("verdicts %v, want %v", c.Ceiling, want)
	}
	if verdicts[1][1] != eval.CeilingNotSignificant || verdicts[1][2] != eval.CeilingNoSignal {
		t.Errorf("fold 2 verdicts %v", verdicts[1])
	}
	if c.FoldCeilings[1]["usable"] != 2 || c.FoldCeilings[1]["signal_not_significant"] != 1 || c.FoldCeilings[1]["no_signal_power"] != 1 {
		t.Errorf("fold 2 counts %v", c.FoldCeilings[1])
	}
	// fev over the reliable neurons 0, 1 (2 is reliable-less too):
	// median of 0.6 and 0.4; test_r2 over all four.
	s := c.Summary["a"]["fev"]
	if math.Abs(float64(s.Median)-0.5) > 1e-15 || s.N != 2 || s.NaN != 0 || s.Kept != 2 || s.KeptBy != "split_half_all >= 0.3" {
		t.Errorf("fev spread %+v, want median 0.5 over 2 kept neurons", s)
	}
	if s := c.Summary["a"]["test_r2"]; s.Kept != 4 || s.KeptBy != "scored" {
		t.Errorf("test_r2 spread %+v, want 4 kept, scored", s)
	}
	if Reliable(c) != 2 {
		t.Errorf("reliable %d, want 2", Reliable(c))
	}
}

func TestCompareWarnings(t *testing.T) {
	got := compareWarnings([]string{"fold 1: bin 3 has no training trials", "the test split: bin 2 has no test trials", "fold 1: bin 3 has no training trials", "constant neuron 4"})
	want := []string{"fold 1: bin 3 has no training trials", "constant neuron 4"}
	if !slices.Equal(got, want) {
		t.Errorf("got %q, want %q", got, want)
	}
}
