package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/acuityfolder"
)

// TestAcuityEndToEnd runs stria acuity on a small synthetic recording
// (the demo's scenario), then stria report on its folder, and checks the
// files, the completion marker, the figures with their arrays and the
// report.
func TestAcuityEndToEnd(t *testing.T) {
	dir := t.TempDir()
	cfgPath, _, err := writeDemo(demoOptions{dir: dir, neurons: 40, trials: 1200, seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "acu")
	got, err := runCLI(t, "acuity", "--config", cfgPath, "--out", out, "--quiet")
	if err != nil {
		t.Fatalf("stria acuity: %v\n%s", err, got)
	}
	for _, want := range []string{"acuity folder: " + out, "linear Fisher information", "saturation fit", "extrapolation", "decoder lda", "decoder model-gaussian",
		"note: Linear Fisher information estimates need many more trials than neurons", "note: The information of an infinite population", "note: Decoding accuracy depends on the decoder"} {
		if !strings.Contains(got, want) {
			t.Errorf("stria acuity output lacks %q:\n%s", want, got)
		}
	}
	for _, f := range []string{runfolder.FileSettings, acuityfolder.FileAcuity, acuityfolder.FileInfoPairs, acuityfolder.FileInfoVsSize, acuityfolder.FileInfoSubsets,
		acuityfolder.FileDecodingSummary, acuityfolder.FileDecodingVsSize, acuityfolder.FileConfusion, runfolder.FileComplete} {
		if st, err := os.Stat(filepath.Join(out, f)); err != nil || st.Size() == 0 {
			t.Errorf("acuity folder: %s missing or empty (%v)", f, err)
		}
	}
	f, err := acuityfolder.ReadAcuity(out)
	if err != nil {
		t.Fatal(err)
	}
	if len(f.Pairs) != 60 || f.Info.Folds != 5 || len(f.Info.Decoders) != 2 || f.Info.Decoders[0].Trials != 1200 {
		t.Errorf("folder holds %d pairs, %d folds, %d decoders, %d decoded trials; want 60 pairs (periodic axis of 60 bins), 5 folds, 2 decoders, all 1200 trials",
			len(f.Pairs), f.Info.Folds, len(f.Info.Decoders), f.Info.Decoders[0].Trials)
	}
	if len(f.Info.Cautions) != 3 {
		t.Errorf("%s holds %d cautions, want 3", acuityfolder.FileAcuity, len(f.Info.Cautions))
	}

	got, err = runCLI(t, "report", out)
	if err != nil {
		t.Fatalf("stria report: %v\n%s", err, got)
	}
	report := filepath.Join(out, runfolder.FileReport)
	if strings.TrimSpace(got) != report {
		t.Errorf("stria report printed %q, want the report's path %s", got, report)
	}
	figs := filepath.Join(out, runfolder.DirFigures)
	for name, texts := range map[string][]string{
		"acuity_information":              {"heading (deg)", "recorded", "trial-shuffled"},
		"acuity_threshold":                {"heading (deg)"},
		"acuity_saturation":               {"neurons", "saturation fit"},
		"acuity_confusion_lda":            {"decoded heading (deg)", "true heading (deg)"},
		"acuity_confusion_model-gaussian": {"decoded heading (deg)"},
		"acuity_decoding_error":           {"neurons", "lda", "model-gaussian"},
	} {
		checkFigure(t, filepath.Join(figs, name), texts...)
	}
	for _, a := range []string{"acuity_information.csv", "acuity_saturation.csv", "acuity_saturation_fit.csv", "acuity_confusion_lda.csv", "acuity_confusion_model-gaussian.csv", "acuity_decoding_error.csv"} {
		if st, err := os.Stat(filepath.Join(figs, a)); err != nil || st.Size() < 50 {
			t.Errorf("figure array %s missing or empty (%v)", a, err)
		}
	}
	cols := readCSVCols(t, filepath.Join(figs, "acuity_information.csv"))
	if len(cols["information"]) != 60 || len(cols["stimulus"]) != 60 {
		t.Errorf("acuity_information.csv: %d rows, want one per pair (60)", len(cols["information"]))
	}
	checkSelfContained(t, report, 6)
	b, _ := os.ReadFile(report)
	for _, want := range []string{"Linear Fisher information across the stimulus", "EXTRAPOLATION", "Cross-validated decoding", "the folds are those of stria compare"} {
		if !strings.Contains(string(b), want) {
			t.Errorf("report lacks %q", want)
		}
	}
	checkInBrowser(t, report, "acuity-report")

	// stria export writes the same figures elsewhere.
	other := filepath.Join(dir, "figs")
	if got, err = runCLI(t, "export", "--out", other, out); err != nil || !strings.Contains(got, "exported 6 figures of the acuity folder") {
		t.Errorf("stria export of the acuity folder: %v\n%s", err, got)
	}
	sa, _ := os.ReadFile(filepath.Join(figs, "acuity_saturation.svg"))
	sb, _ := os.ReadFile(filepath.Join(other, "acuity_saturation.svg"))
	if len(sa) == 0 || string(sa) != string(sb) {
		t.Error("stria export and stria report drew different acuity_saturation.svg files")
	}

	// The finished folder is not replaced silently, not mixed with a fit
	// or a comparison, and --overwrite deletes only stria's files.
	before, _ := os.ReadFile(filepath.Join(out, acuityfolder.FileAcuity))
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"acuity", "--config", cfgPath, "--out", out, "--quiet"}, "holds an acuity folder: give --overwrite"},
		{[]string{"fit", "--config", cfgPath, "--out", out, "--quiet"}, "holds an acuity folder; a fit needs its own folder"},
		{[]string{"fit", "--config", cfgPath, "--out", out, "--quiet", "--overwrite"}, "holds an acuity folder; a fit needs its own folder"},
		{[]string{"compare", "--config", cfgPath, "--out", out, "--quiet"}, "holds an acuity folder; a comparison needs its own folder"},
	} {
		got, err := runCLI(t, c.args...)
		if err == nil || !strings.Contains(got+err.Error(), c.want) {
			t.Errorf("stria %s into the acuity folder: got %v\n%s\nwant an error containing %q", strings.Join(c.args[:1], " "), err, got, c.want)
		}
	}
	if after, _ := os.ReadFile(filepath.Join(out, acuityfolder.FileAcuity)); string(after) != string(before) {
		t.Error("a refused command changed acuity.json")
	}
	mine := filepath.Join(out, "notes.txt")
	os.WriteFile(mine, []byte("mine"), 0o644)
	if got, err := runCLI(t, "acuity", "--config", cfgPath, "--out", out, "--quiet", "--overwrite"); err == nil || !strings.Contains(got+err.Error(), "notes.txt") {
		t.Errorf("acuity --overwrite of a folder holding notes.txt: got %v\n%s\nwant a refusal naming notes.txt", err, got)
	}
	os.Remove(mine)
	if got, err := runCLI(t, "acuity", "--config", cfgPath, "--out", out, "--quiet", "--overwrite"); err != nil {
		t.Errorf("acuity --overwrite: %v\n%s", err, got)
	}
	if _, err := os.Stat(filepath.Join(out, runfolder.FileReport)); err == nil {
		t.Error("acuity --overwrite left the earlier report.html")
	}
}

// TestAcuityRefusesBadConfig checks that a bad acuity setting is refused
// before any work, naming the key, and that nothing is written.
func TestAcuityRefusesBadConfig(t *testing.T) {
	dir := t.TempDir()
	cfg := filepath.Join(dir, "bad.yaml")
	out := filepath.Join(dir, "acu")
	if err := os.WriteFile(cfg, []byte("data: {responses: r.npy}\naxis: {min: 0, max: 360}\nacuity:\n  shrinkage: 3\n  sizes: [8, 4]\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	_, err := runCLI(t, "acuity", "--config", cfg, "--out", out)
	if err == nil || !strings.Contains(err.Error(), "acuity.shrinkage 3") || !strings.Contains(err.Error(), "acuity.sizes[1] 4") {
		t.Errorf("got %v, want an error naming acuity.shrinkage and acuity.sizes[1]", err)
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("a refused config left an output folder")
	}
}

// TestAcuityRunEncoder checks acuity.encoder: the model decoder uses the
// encoder of a finished run folder and decodes only that run's held-out
// test trials, while the LDA still decodes every trial on compare's
// folds; a folder that is not a finished run is refused, naming the key.
func TestAcuityRunEncoder(t *testing.T) {
	dir := t.TempDir()
	cfgPath, _, err := writeDemo(demoOptions{dir: dir, neurons: 30, trials: 1200, seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if out, err := runCLI(t, "fit", "--config", cfgPath, "--quiet"); err != nil {
		t.Fatalf("stria fit: %v\n%s", err, out)
	}
	b, err := os.ReadFile(cfgPath)
	if err != nil {
		t.Fatal(err)
	}
	withEncoder := func(name, enc string) string {
		p := filepath.Join(dir, name)
		text := strings.Replace(string(b), "  output: acuity\n", "  encoder: "+enc+"\n  output: acuity\n", 1)
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	out := filepath.Join(dir, "acu")
	if got, err := runCLI(t, "acuity", "--config", withEncoder("enc.yaml", "run"), "--out", out, "--quiet"); err != nil {
		t.Fatalf("stria acuity: %v\n%s", err, got)
	}
	f, err := acuityfolder.ReadAcuity(out)
	if err != nil {
		t.Fatal(err)
	}
	sp, err := runfolder.ReadSplit(filepath.Join(dir, "run"))
	if err != nil {
		t.Fatal(err)
	}
	if len(f.Info.Decoders) != 2 || f.Info.Decoders[0].Trials != 1200 || f.Info.Decoders[1].Trials != len(sp.Test) {
		t.Fatalf("decoders %+v: want lda on all 1200 trials and the model on the run's %d test trials", f.Info.Decoders, len(sp.Test))
	}
	if d := f.Info.Decoders[1].Description; !strings.Contains(d, filepath.Join(dir, "run")) || !strings.Contains(d, "held-out test trials only") {
		t.Errorf("model decoder description %q does not name the run folder and its test trials", d)
	}
	_, err = runCLI(t, "acuity", "--config", withEncoder("bad.yaml", "nowhere"), "--out", filepath.Join(dir, "acu2"), "--quiet")
	if err == nil || !strings.Contains(err.Error(), "acuity.encoder") {
		t.Errorf("a missing run folder: got %v, want an error naming acuity.encoder", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "acu2")); err == nil {
		t.Error("a refused encoder left an acuity folder")
	}
}
