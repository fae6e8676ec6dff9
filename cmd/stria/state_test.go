package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval/state"
	"github.com/strialab/stria/train/runfolder"
)

// writeStateSim writes a state.Simulate population (running speed as the
// covariate, in a CSV with the direction) and a config; nan puts a NaN
// speed on trial 5.
func writeStateSim(t *testing.T, dir string, nan bool) string {
	t.Helper()
	cfg := state.DefaultSim()
	cfg.Neurons, cfg.Repeats, cfg.Seed = 40, 20, 9
	sim := state.Simulate(cfg)
	T, N, B := len(sim.Cond), cfg.Neurons, cfg.Conditions
	if err := format.WriteNPY(filepath.Join(dir, "responses.npy"), []int{T, N}, sim.Y); err != nil {
		t.Fatal(err)
	}
	var sb strings.Builder
	sb.WriteString("direction,speed\n")
	for i, c := range sim.Cond {
		v := sim.Speed[i]
		if nan && i == 5 {
			v = math.NaN()
		}
		sb.WriteString(runfolder.FormatExact(float64(c)*360/float64(B)) + "," + runfolder.FormatExact(v) + "\n")
	}
	if err := os.WriteFile(filepath.Join(dir, "behaviour.csv"), []byte(sb.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	conf := `seed: 1
data: {responses: responses.npy, stimulus: behaviour.csv, stimulus_column: direction, covariate_columns: [speed]}
axis: {name: direction, unit: deg, min: 0, max: 360, periodic: true, bins: 16}
split: {folds: 2, keep_blocks: false}
model: {layers: [{channels: 2, kernel: 5, border: circular}]}
train: {max_epochs: 60, patience: 20}
compare: {baselines: [condmean], output: compare}
state: {population_gain: true, compare_models: [encoder, condmean]}
output: run
`
	path := filepath.Join(dir, "c.yaml")
	if err := os.WriteFile(path, []byte(conf), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestStateEndToEnd: stria fit with a covariate column and the population
// gain writes the state outputs before complete.json and prints the
// caution; stria compare scores the state variants on the same folds and
// tests them in pairs; a NaN covariate stops the fit naming the file, the
// covariate and the trial, with no completed folder.
func TestStateEndToEnd(t *testing.T) {
	dir := t.TempDir()
	cfg := writeStateSim(t, dir, false)
	out, err := runCLI(t, "fit", "--config", cfg, "--quiet")
	if err != nil {
		t.Fatalf("fit: %v\n%s", err, out)
	}
	if out, err := runCLI(t, "inspect", "--config", cfg); err != nil || !strings.Contains(out, "state covariates (") {
		t.Errorf("inspect: %v, want the covariates listed\n%s", err, out)
	}
	for _, want := range []string{"state terms (state_terms.csv)", "with covariates:", "with population gain:", "can exceed the stimulus-only noise ceiling"} {
		if !strings.Contains(out, want) {
			t.Errorf("fit printout lacks %q:\n%s", want, out)
		}
	}
	run := filepath.Join(dir, "run")
	if err := runfolder.CheckComplete(run, runfolder.KindRun); err != nil {
		t.Fatal(err)
	}
	hdr, rows, err := runfolder.ReadTable(filepath.Join(run, runfolder.FileStateTerms))
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 40 || !strings.Contains(strings.Join(hdr, ","), "gain_speed,offset_speed,bias") || !strings.Contains(strings.Join(hdr, ","), "r2_added_population") {
		t.Errorf("state_terms.csv: %d rows, header %v", len(rows), hdr)
	}
	for _, a := range []string{runfolder.ArrayStateGains, runfolder.ArrayStateOffsets, runfolder.ArrayStateTuning, runfolder.ArrayPopulationCoupled} {
		if _, _, err := runfolder.ReadStateArray(run, a); err != nil {
			t.Error(err)
		}
	}
	var sum struct {
		State *runfolder.StateSummary `json:"state"`
	}
	b, _ := os.ReadFile(filepath.Join(run, runfolder.FileSummary))
	if err := json.Unmarshal(b, &sum); err != nil || sum.State == nil || sum.State.Scores == nil || sum.State.Population == nil {
		t.Fatalf("summary.json state block: %v %s", err, b)
	}
	if !(sum.State.Scores.MeanAdded > 0.05) {
		t.Errorf("got mean R^2 added %v, want > 0.05 (planted speed effects)", sum.State.Scores.MeanAdded)
	}
	// A second fit over the first replaces the state outputs too.
	if out, err := runCLI(t, "fit", "--config", cfg, "--quiet", "--overwrite"); err != nil {
		t.Fatalf("fit --overwrite: %v\n%s", err, out)
	}
	if out, err := runCLI(t, "report", run); err != nil {
		t.Fatalf("report: %v\n%s", err, out)
	}
	html, _ := os.ReadFile(filepath.Join(run, runfolder.FileReport))
	if !strings.Contains(string(html), "State terms") {
		t.Errorf("report.html has no state section")
	}

	out, err = runCLI(t, "compare", "--config", cfg, "--quiet")
	if err != nil {
		t.Fatalf("compare: %v\n%s", err, out)
	}
	_, pairs, err := runfolder.ReadTable(filepath.Join(dir, "compare", "model_pairs.csv"))
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, r := range pairs {
		found = found || (r[0] == "test_r2" && r[1] == "encoder" && r[2] == "encoder+state")
	}
	if !found {
		t.Errorf("model_pairs.csv has no test_r2 pair of encoder and encoder+state")
	}
	if !strings.Contains(out, "encoder+popgain") || !strings.Contains(out, "condmean+state") {
		t.Errorf("compare printout lacks the variants:\n%s", out)
	}
	// A variant is drawn against its own model only.
	if out, err := runCLI(t, "export", filepath.Join(dir, "compare")); err != nil {
		t.Fatalf("export: %v\n%s", err, out)
	}
	figs, _ := filepath.Glob(filepath.Join(dir, "compare", runfolder.DirFigures, "scatter_*.svg"))
	var names []string
	for _, f := range figs {
		names = append(names, filepath.Base(f))
	}
	want := []string{"scatter_cc_norm_condmean_vs_encoder.svg", "scatter_test_r2_condmean_vs_condmean+popgain.svg", "scatter_test_r2_condmean_vs_condmean+state.svg",
		"scatter_test_r2_condmean_vs_encoder.svg", "scatter_test_r2_encoder_vs_encoder+popgain.svg", "scatter_test_r2_encoder_vs_encoder+state.svg"}
	if strings.Join(names, " ") != strings.Join(want, " ") {
		t.Errorf("got scatter figures %v, want %v", names, want)
	}

	// The population gain alone: no covariate file, its couplings drawn.
	pop := t.TempDir()
	cfg = writeStateSim(t, pop, false)
	conf, _ := os.ReadFile(cfg)
	conf = []byte(strings.Replace(strings.Replace(string(conf), ", covariate_columns: [speed]", "", 1), "compare_models: [encoder, condmean]", "compare_models: [condmean]", 1))
	if err := os.WriteFile(cfg, conf, 0o644); err != nil {
		t.Fatal(err)
	}
	if out, err := runCLI(t, "fit", "--config", cfg, "--quiet"); err != nil || !strings.Contains(out, "with population gain:") || strings.Contains(out, "with covariates:") {
		t.Fatalf("fit with the population gain alone: %v\n%s", err, out)
	}
	if out, err := runCLI(t, "export", filepath.Join(pop, "run")); err != nil {
		t.Fatalf("export: %v\n%s", err, out)
	}
	if _, err := os.Stat(filepath.Join(pop, "run", runfolder.DirFigures, "state_gains.svg")); err != nil {
		t.Errorf("no gain histogram of the population gain: %v", err)
	}

	bad := t.TempDir()
	cfg = writeStateSim(t, bad, true)
	out, err = runCLI(t, "fit", "--config", cfg, "--quiet")
	if err == nil || !strings.Contains(err.Error(), `behaviour.csv: state: covariate "speed": value NaN at trial 5 (0-based)`) {
		t.Errorf("got error %v, want one naming the file, covariate and trial\n%s", err, out)
	}
	out, err = runCLI(t, "inspect", "--config", cfg)
	if err == nil || !strings.Contains(out, `problem: `) || !strings.Contains(out, `covariate "speed": value NaN at trial 5 (0-based)`) {
		t.Errorf("inspect: got error %v, want the NaN covariate listed as a problem\n%s", err, out)
	}
	if runfolder.CheckComplete(filepath.Join(bad, "run"), runfolder.KindRun) == nil {
		t.Errorf("a fit refused for its covariates left a completed run folder")
	}
}
