package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval/report/browsertest"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// runCLI runs the stria command line with args and returns its output.
func runCLI(t *testing.T, args ...string) (string, error) {
	t.Helper()
	app := newApp()
	var out, errOut bytes.Buffer
	app.Writer, app.ErrWriter = &out, &errOut
	err := app.RunContext(context.Background(), append([]string{"stria"}, args...))
	return out.String() + errOut.String(), err
}

// TestDemoEndToEnd runs a small demo and checks the run folder, then
// predicts from it.
func TestDemoEndToEnd(t *testing.T) {
	dir := t.TempDir()
	out, err := runCLI(t, "demo", "--out", dir, "--neurons", "60", "--trials", "1200", "--quiet")
	if err != nil {
		t.Fatalf("demo: %v\n%s", err, out)
	}
	for _, want := range []string{"stria inspect", "split-half reliability", "stria fit", "test_r2", "cc_norm", "depend on the split", "report.html"} {
		if !strings.Contains(out, want) {
			t.Errorf("demo output lacks %q", want)
		}
	}
	run := filepath.Join(dir, "run")
	for _, f := range []string{filepath.Join(run, runfolder.FileReport), filepath.Join(dir, "compare", runfolder.FileReport)} {
		if st, err := os.Stat(f); err != nil || st.Size() < 10000 {
			t.Errorf("demo report %s missing or small (%v)", f, err)
		}
	}
	checkInBrowser(t, filepath.Join(run, runfolder.FileReport), "demo-run-report")
	checkInBrowser(t, filepath.Join(dir, "compare", runfolder.FileReport), "demo-compare-report")
	for _, f := range []string{runfolder.FileSettings, runfolder.FileManifest, runfolder.FileFilters, runfolder.FileNeuronScores, runfolder.FileSummary, runfolder.FileHistory, runfolder.FileSplit, "parameters/readout_weight.npy"} {
		if st, err := os.Stat(filepath.Join(run, f)); err != nil || st.Size() == 0 {
			t.Errorf("run folder: %s missing or empty (%v)", f, err)
		}
	}
	if _, err := os.Stat(filepath.Join(run, runfolder.FileResume)); err == nil {
		t.Error("checkpoint left behind after a finished fit")
	}
	// Both folders are marked complete, and every file the demo wrote is
	// readable by others (0644; folders 0755).
	for _, d := range []string{run, filepath.Join(dir, "compare")} {
		if _, err := runfolder.Open(d); err != nil {
			t.Errorf("%s: %v", d, err)
		}
	}
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		info, err := d.Info()
		if err != nil {
			return err
		}
		want := fs.FileMode(0o644)
		if d.IsDir() {
			want = 0o755 | fs.ModeDir
		}
		if p != dir && info.Mode() != want {
			t.Errorf("%s has mode %v, want %v", p, info.Mode(), want)
		}
		return nil
	})
	// metrics.csv: one row per neuron with the documented columns.
	f, err := os.Open(filepath.Join(run, runfolder.FileNeuronScores))
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(f).ReadAll()
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 61 {
		t.Errorf("metrics.csv has %d rows, want header + 60", len(rows))
	}
	head := strings.Join(rows[0], ",")
	for _, c := range []string{"neuron", "test_r2", "test_r", "explainable_fraction", "fev", "cc_norm"} {
		if !strings.Contains(head, c) {
			t.Errorf("metrics.csv header %q lacks %s", head, c)
		}
	}
	var sum runfolder.Summary
	b, _ := os.ReadFile(filepath.Join(run, runfolder.FileSummary))
	if err := json.Unmarshal(b, &sum); err != nil {
		t.Fatal(err)
	}
	if sum.WallSeconds <= 0 || sum.Neurons != 60 || len(sum.Cautions) == 0 {
		t.Errorf("summary.json: %+v", sum)
	}
	filters, err := format.ReadNPY(filepath.Join(run, runfolder.FileFilters))
	if err != nil || filters.Rows != 8 || filters.Cols != 9 {
		t.Errorf("filters.npy: %v, %+v", err, filters)
	}

	// The comparison folder.
	cmpDir := filepath.Join(dir, "compare")
	for _, f := range []string{comparefolder.FileFoldScores, comparefolder.FileModelSummary, comparefolder.FileModelPairs, runfolder.FileComparison, comparefolder.FileDescriptors, "tuning_curves/condmean.npy"} {
		if st, err := os.Stat(filepath.Join(cmpDir, f)); err != nil || st.Size() == 0 {
			t.Errorf("comparison folder: %s missing or empty (%v)", f, err)
		}
	}
	sc, _ := os.ReadFile(filepath.Join(cmpDir, comparefolder.FileFoldScores))
	if !strings.HasPrefix(string(sc), "model,fold,neuron,test_r2,test_r,explainable_fraction,fev,") || !strings.Contains(string(sc), "cc_norm") {
		t.Errorf("scores.csv header: %.100s", sc)
	}
	// 5 folds x 60 neurons x (2 encoders + 4 baselines) rows and a header.
	if got := strings.Count(string(sc), "\n"); got != 1+5*60*6 {
		t.Errorf("scores.csv has %d lines, want %d", got, 1+5*60*6)
	}
	if !strings.Contains(out, "best median cc_norm") || !strings.Contains(out, "Wilcoxon") {
		t.Error("compare output lacks the winners or the test")
	}

	// The resolved config in the run folder refits to the same numbers.
	out, err = runCLI(t, "fit", "--config", filepath.Join(run, runfolder.FileSettings), "--out", filepath.Join(dir, "again"), "--quiet")
	if err != nil {
		t.Fatalf("refit from the resolved config: %v\n%s", err, out)
	}
	m1, _ := os.ReadFile(filepath.Join(run, runfolder.FileNeuronScores))
	m2, _ := os.ReadFile(filepath.Join(dir, "again", runfolder.FileNeuronScores))
	if !bytes.Equal(m1, m2) {
		t.Error("refitting the resolved config gave other metrics")
	}

	// predict: three headings, including the wrap-around value 360.
	stim := filepath.Join(dir, "new.npy")
	if err := format.WriteNPY64(stim, []int{3}, []float64{0, 90, 360}); err != nil {
		t.Fatal(err)
	}
	pred := filepath.Join(dir, "pred.npy")
	if out, err := runCLI(t, "predict", "--stimulus", stim, "--out", pred, run); err != nil {
		t.Fatalf("predict: %v\n%s", err, out)
	}
	m, err := format.ReadNPY(pred)
	if err != nil || m.Rows != 3 || m.Cols != 60 {
		t.Fatalf("predictions: %v %+v", err, m)
	}
	for j := 0; j < 60; j++ {
		if m.Data[j] != m.Data[2*60+j] {
			t.Fatalf("neuron %d: prediction at 0 deg %v differs from 360 deg %v", j, m.Data[j], m.Data[120+j])
		}
	}
	// An out-of-range value is an error naming it (on a periodic axis any value
	// wraps, so use NaN).
	if err := format.WriteNPY64(stim, []int{2}, []float64{10, nanValue()}); err != nil {
		t.Fatal(err)
	}
	if _, err := runCLI(t, "predict", "--stimulus", stim, "--out", filepath.Join(dir, "pred2.npy"), run); err == nil || !strings.Contains(err.Error(), "1 (0-based)") {
		t.Errorf("predict with NaN stimulus: %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "pred2.npy")); err == nil {
		t.Error("a failed predict left an output file")
	}
}

func nanValue() float64 { var z float64; return z / z }

func TestFitRefusesBadConfig(t *testing.T) {
	dir := t.TempDir()
	cfg := filepath.Join(dir, "c.yaml")
	os.WriteFile(cfg, []byte("data:\n  responses: r.npy\naxis:\n  min: 0\n  max: 360\n  bins: 10\nmodel:\n  layers:\n    - channels: 4\n      kernel: 11\n"), 0o644)
	_, err := runCLI(t, "fit", "--config", cfg, "--quiet")
	if err == nil || !strings.Contains(err.Error(), "model.layers[0].kernel 11 is longer than its input (10 positions)") {
		t.Errorf("got %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "runs")); err == nil {
		t.Error("a refused config still created an output folder")
	}
}

// TestInterruptAndResume stops a fit with SIGINT (as Ctrl-C does), checks
// that it left a checkpoint and said how to continue, resumes it, and
// expects exactly the metrics of an uninterrupted fit.
func TestInterruptAndResume(t *testing.T) {
	if testing.Short() {
		t.Skip("trains for several seconds")
	}
	dir := t.TempDir()
	cfgPath, _, err := writeDemo(demoOptions{dir: dir, neurons: 60, trials: 1200, seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(cfgPath)
	// The trial-level adam solver: the default (projected, quasi-Newton)
	// ends this fit in well under a second.
	src := strings.Replace(string(b), "max_epochs: 3000\n  patience: 100", "max_epochs: 1500\n  patience: 100000\n  solver: adam", 1)
	if src == string(b) {
		t.Fatal("demo config changed: adjust this test")
	}
	os.WriteFile(cfgPath, []byte(src), 0o644)

	cmd := child("fit", "--config", cfgPath, "--out", filepath.Join(dir, "cut"), "--quiet")
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	time.Sleep(1500 * time.Millisecond)
	cmd.Process.Signal(os.Interrupt)
	if err := cmd.Wait(); err == nil {
		t.Fatal("the fit finished before it was interrupted: make it longer")
	}
	if !strings.Contains(stderr.String(), "--resume") || !strings.Contains(stderr.String(), "checkpoint") {
		t.Errorf("interrupted fit said:\n%s", stderr.String())
	}
	if _, err := os.Stat(filepath.Join(dir, "cut", runfolder.FileResume)); err != nil {
		t.Fatalf("no checkpoint after the interrupt: %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "cut", runfolder.FileNeuronScores)); err == nil {
		t.Error("an interrupted fit wrote metrics.csv")
	}
	if out, err := runCLI(t, "fit", "--config", cfgPath, "--out", filepath.Join(dir, "cut"), "--resume", "--quiet"); err != nil {
		t.Fatalf("resume: %v\n%s", err, out)
	}
	if out, err := runCLI(t, "fit", "--config", cfgPath, "--out", filepath.Join(dir, "whole"), "--quiet"); err != nil {
		t.Fatalf("uninterrupted: %v\n%s", err, out)
	}
	m1, _ := os.ReadFile(filepath.Join(dir, "cut", runfolder.FileNeuronScores))
	m2, _ := os.ReadFile(filepath.Join(dir, "whole", runfolder.FileNeuronScores))
	if len(m1) == 0 || !bytes.Equal(m1, m2) {
		t.Error("the resumed fit's metrics differ from an uninterrupted fit's")
	}
}

// checkInBrowser opens a report that stria wrote in headless Chromium:
// every figure must be visible, the page must not reach outside itself or
// report a console error. The screenshot is kept in $STRIA_ARTEFACTS.
func checkInBrowser(t *testing.T, path, name string) {
	t.Helper()
	if err := browsertest.Available(); err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("CI=true: %v", err)
		}
		t.Logf("browser check of %s skipped: %v", path, err)
		return
	}
	page, err := browsertest.Open(path, t.TempDir(), 90*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	if len(page.Figures) < 5 {
		t.Errorf("%s: only %d figures", name, len(page.Figures))
	}
	for _, f := range page.Figures {
		if !f.OK {
			t.Errorf("%s: figure %s not visible: %+v", name, f.ID, f)
		}
	}
	if len(page.TOCBroken) > 0 {
		t.Errorf("%s: broken contents links %v", name, page.TOCBroken)
	}
	for _, u := range page.Requests {
		t.Errorf("%s: the page requested %s", name, u)
	}
	for _, p := range page.Problems {
		t.Errorf("%s: browser reported %s", name, p)
	}
	if d := os.Getenv("STRIA_ARTEFACTS"); d != "" {
		os.MkdirAll(d, 0o755)
		if err := os.WriteFile(filepath.Join(d, name+".png"), page.Screenshot, 0o644); err != nil {
			t.Error(err)
		}
	}
	t.Logf("%s: %d figures visible, page height %.0f px", name, len(page.Figures), page.Height)
}
