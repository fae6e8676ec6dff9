package runfolder

import (
	"bytes"
	"context"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder/foldertest"
	"github.com/strialab/stria/train/settings"
)

// oddNames are neuron and model names that a hand-made CSV writer gets
// wrong: commas, quotes, newlines, a leading space and non-ASCII text.
var oddNames = []string{`cell "A"`, "a,b", "line\nbreak", " lead", "Zelle ü", "細胞", `"`, "", "tab\there", "crlf\r\nend", "plain"}

func TestWriteFile(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "x.txt")
	if err := WriteBytes(path, []byte("one")); err != nil {
		t.Fatal(err)
	}
	// A failed write leaves the old content and no temporary file.
	boom := errors.New("boom")
	err := WriteFile(path, func(w io.Writer) error {
		w.Write([]byte("half"))
		return boom
	})
	if !errors.Is(err, boom) || !strings.Contains(err.Error(), path) {
		t.Errorf("failed write: %v, want boom naming %s", err, path)
	}
	if b, _ := os.ReadFile(path); string(b) != "one" {
		t.Errorf("after a failed write the file holds %q, want %q", b, "one")
	}
	// Mode 0644 whatever the umask lets os.CreateTemp choose (0600).
	if err := MakeFolder(filepath.Join(dir, "sub", "deeper")); err != nil {
		t.Fatal(err)
	}
	if err := WriteJSON(filepath.Join(dir, "sub", "deeper", "v.json"), map[string]Num{"nan": Num(math.NaN()), "one": 1}); err != nil {
		t.Fatal(err)
	}
	foldertest.CheckFolder(t, dir, FileMode, FolderMode)
	b, _ := os.ReadFile(filepath.Join(dir, "sub", "deeper", "v.json"))
	if want := "{\n  \"nan\": null,\n  \"one\": 1\n}\n"; string(b) != want {
		t.Errorf("JSON %q, want %q", b, want)
	}
	// An error opening the folder names the file.
	bad := filepath.Join(dir, "no-such-folder", "y.csv")
	if err := WriteTable(bad, []string{"a"}, nil); err == nil || !strings.Contains(err.Error(), bad) {
		t.Errorf("write into a missing folder: %v, want an error naming %s", err, bad)
	}
}

func TestNeuronScoresOddNames(t *testing.T) {
	n := len(oddNames)
	scores := make([]eval.Scores, n)
	for j := range scores {
		scores[j] = eval.Scores{TestR2: float64(j) / 7, TestR: -1e-9 * float64(j), ExplainableFraction: math.NaN(), FEV: math.Inf(1),
			CCAbs: 0.5, CCMax: 1.0 / 3, CCNorm: math.Inf(-1), SPE: 12345.678901234, SplitHalf: 1e300}
	}
	ex := map[int]string{2: "constant response over all trials", 4: `odd, "why"` + "\n"}
	dir := t.TempDir()
	path := filepath.Join(dir, FileNeuronScores)
	verdicts := make([]eval.Ceiling, n)
	rel := make([]float64, n)
	for j := range verdicts {
		verdicts[j] = eval.Ceiling(j % 4)
		rel[j] = math.Sqrt(float64(j)) / 3
	}
	want := NewNeuronScores(oddNames, scores, ex, verdicts, rel)
	if err := WriteNeuronScores(dir, want); err != nil {
		t.Fatal(err)
	}
	// encoding/csv reads every row with the names intact.
	rows := foldertest.ReadAllCSV(t, path)
	if len(rows) != n+1 {
		t.Fatalf("%d rows, want %d", len(rows), n+1)
	}
	for j, name := range oddNames {
		if rows[j+1][1] != strings.ReplaceAll(name, "\r\n", "\n") {
			t.Errorf("row %d name %q, want %q", j, rows[j+1][1], name)
		}
	}
	got, err := ReadNeuronScores(dir, n)
	if err != nil {
		t.Fatal(err)
	}
	// encoding/csv turns \r\n inside a quoted field into \n (RFC 4180
	// readers differ here); every other name reads back unchanged.
	for j := range oddNames {
		if w := strings.ReplaceAll(want.Names[j], "\r\n", "\n"); got.Names[j] != w || got.Excluded[j] != want.Excluded[j] {
			t.Errorf("neuron %d: name %q excluded %q, want %q %q", j, got.Names[j], got.Excluded[j], w, want.Excluded[j])
		}
	}
	for j := range verdicts {
		wantCode, wantRel := verdicts[j].String(), rel[j]
		if _, isEx := ex[j]; isEx {
			wantCode, wantRel = "", math.NaN()
		}
		if got.Ceiling[j] != wantCode || !(math.Abs(got.SplitHalfAll[j]-wantRel) <= 5e-8*wantRel || math.IsNaN(wantRel) && math.IsNaN(got.SplitHalfAll[j])) {
			t.Errorf("neuron %d: ceiling %q split_half_all %v, want %q %v", j, got.Ceiling[j], got.SplitHalfAll[j], wantCode, wantRel)
		}
	}
	// Scores read back to 8 significant digits; an excluded neuron is NaN.
	for k, c := range ScoreColumns {
		for j := 0; j < n; j++ {
			g, w := got.Cols[k][j], want.Cols[k][j]
			if _, isEx := ex[j]; isEx && !math.IsNaN(g) {
				t.Errorf("%s of excluded neuron %d = %v, want NaN", c, j, g)
			}
			if !(g == w || math.IsNaN(g) && math.IsNaN(w) || math.Abs(g-w) <= 5e-8*math.Abs(w)) {
				t.Errorf("%s neuron %d: got %v want %v", c, j, g, w)
			}
		}
	}
	// Written again from what was read: the same bytes.
	againDir := t.TempDir()
	again := filepath.Join(againDir, FileNeuronScores)
	got.Names = want.Names // the \r\n case: keep the writer's input
	if err := WriteNeuronScores(againDir, got); err != nil {
		t.Fatal(err)
	}
	a, _ := os.ReadFile(path)
	b, _ := os.ReadFile(again)
	if !bytes.Equal(a, b) {
		t.Errorf("neuron_scores.csv differs after a round trip:\n%s\n---\n%s", a, b)
	}
	if _, err := ReadNeuronScores(dir, n+1); err == nil || !strings.Contains(err.Error(), "want 12") {
		t.Errorf("wrong neuron count: %v", err)
	}
}

// smallFit fits a tiny encoder for a few epochs on a synthetic recording
// whose neurons have odd names; neuron 0 is constant (excluded).
func smallFit(t *testing.T) (*train.Prepared, *train.Fitted, []eval.Scores) {
	t.Helper()
	return smallFitBy(t, train.PrepareRecording)
}

// smallFitBy is smallFit with the recording prepared by prepare.
func smallFitBy(t *testing.T, prepare func(*settings.Config, *data.Recording) (*train.Prepared, error)) (*train.Prepared, *train.Fitted, []eval.Scores) {
	t.Helper()
	n := len(oddNames)
	rec, _, _ := synth.Population(synth.Config{Neurons: n, Trials: 360, Bins: 12, TwoPeakFrac: 0.25, GainSD: 0.1, NoiseSD: 0.5, Seed: 3})
	rec.Neurons = slices.Clone(oddNames)
	for i := 0; i < rec.Y.Rows; i++ {
		rec.Y.Row(i)[0] = 2
	}
	cfg := settings.Defaults()
	cfg.Data.Responses = "synthetic"
	cfg.Axis = settings.AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 30, Encoding: settings.OneHot}
	cfg.Split.KeepBlocks = false
	cfg.Model.Layers = []settings.LayerConfig{{Channels: 2, Kernel: 3, Stride: 1}}
	cfg.Train.MaxEpochs, cfg.Train.Patience = 4, 4
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := prepare(&cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	f, err := train.Fit(context.Background(), p, train.Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	return p, f, train.ScoreFitted(p, f)
}

// TestFactoredReadout: a fit from statistics per condition writes its
// readout as coefficients and a basis (no readout_weight.npy), and
// LoadModel multiplies them out into the fit's weights bit for bit; the
// folder reads back and writes again byte for byte; a basis missing from
// model.json is refused.
func TestFactoredReadout(t *testing.T) {
	p, f, scores := smallFitBy(t, func(cfg *settings.Config, rec *data.Recording) (*train.Prepared, error) {
		return train.PrepareParts(cfg, rec, nil)
	})
	if f.Readout == nil {
		t.Fatal("a fit from statistics without a factored readout")
	}
	dir := filepath.Join(t.TempDir(), "run")
	if err := Begin(dir); err != nil {
		t.Fatal(err)
	}
	if err := WriteModel(dir, p, f); err != nil {
		t.Fatal(err)
	}
	if _, err := WriteResults(dir, p, f, scores, time.Second); err != nil {
		t.Fatal(err)
	}
	if err := Finish(dir, FormatRun); err != nil {
		t.Fatal(err)
	}
	for name, want := range map[string]bool{"readout_coef": true, "readout_basis": true, "readout_weight": false} {
		_, err := os.Stat(filepath.Join(dir, DirParameters, name+".npy"))
		if got := err == nil; got != want {
			t.Errorf("parameters/%s.npy there: %v, want %v", name, got, want)
		}
	}
	m, err := LoadModel(dir)
	if err != nil {
		t.Fatal(err)
	}
	N := p.Neurons()
	want := make([]float64, N*f.Net.Features())
	f.ReadoutWeights(want, 0, N)
	for i, w := range want {
		if g := m.Net.ReadW()[i]; math.Float64bits(g) != math.Float64bits(w) {
			t.Fatalf("readout weight %d of neuron %d: loaded %v, fitted %v", i%f.Net.Features(), i/f.Net.Features(), g, w)
		}
	}
	r, err := ReadRun(dir)
	if err != nil {
		t.Fatal(err)
	}
	copyDir := filepath.Join(t.TempDir(), "copy")
	if err := WriteRun(copyDir, r); err != nil {
		t.Fatal(err)
	}
	if err := Finish(copyDir, FormatRun); err != nil {
		t.Fatal(err)
	}
	foldertest.SameFolders(t, dir, copyDir, FileComplete)

	mf, err := ReadManifest(dir)
	if err != nil {
		t.Fatal(err)
	}
	delete(mf.Arrays, "readout_basis")
	if err := WriteJSON(filepath.Join(dir, FileManifest), mf); err != nil {
		t.Fatal(err)
	}
	if _, err := LoadModel(dir); err == nil || !strings.Contains(err.Error(), "readout_coef without a readout_basis") {
		t.Errorf("LoadModel without the basis: %v", err)
	}
}

func TestRunRoundTrip(t *testing.T) {
	p, f, scores := smallFit(t)
	dir := filepath.Join(t.TempDir(), "run")
	if err := Begin(dir); err != nil {
		t.Fatal(err)
	}
	if err := WriteModel(dir, p, f); err != nil {
		t.Fatal(err)
	}
	sum, err := WriteResults(dir, p, f, scores, 1500*time.Millisecond)
	if err != nil {
		t.Fatal(err)
	}
	// Readers refuse the folder until complete.json is written.
	const incomplete = "is incomplete: the fit that wrote it did not finish (no complete.json)"
	if _, err := LoadModel(dir); err == nil || !strings.Contains(err.Error(), dir+" "+incomplete) {
		t.Errorf("LoadModel before Finish: %v, want %q", err, incomplete)
	}
	if _, err := Open(dir); err == nil || !strings.Contains(err.Error(), incomplete) {
		t.Errorf("Open before Finish: %v", err)
	}
	if _, err := ReadRun(dir); err == nil || !strings.Contains(err.Error(), incomplete) {
		t.Errorf("ReadRun before Finish: %v", err)
	}
	if err := Finish(dir, FormatRun); err != nil {
		t.Fatal(err)
	}
	foldertest.CheckFolder(t, dir, FileMode, FolderMode)
	if k, err := Open(dir); k != KindRun || err != nil {
		t.Errorf("Open: %q %v, want %q", k, err, KindRun)
	}
	if sum.Excluded != 1 || sum.Scored != len(oddNames)-1 || sum.WallSeconds != 1.5 {
		t.Errorf("summary: excluded %d scored %d wall %v", sum.Excluded, sum.Scored, sum.WallSeconds)
	}

	// Every file reads back, and written again gives the same bytes.
	r, err := ReadRun(dir)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(r.Manifest.Names, oddNames) {
		t.Errorf("manifest names %q, want %q", r.Manifest.Names, oddNames)
	}
	if r.NeuronScores.Excluded[0] == "" || r.NeuronScores.Names[1] != "a,b" || r.NeuronScores.Names[0] != `cell "A"` {
		t.Errorf("neuron_scores.csv read back: names %q excluded %q", r.NeuronScores.Names[:2], r.NeuronScores.Excluded[0])
	}
	if len(r.History) != len(f.Log) || r.History[0].Epoch != 1 {
		t.Errorf("history: %d epochs read, %d written", len(r.History), len(f.Log))
	}
	if !slices.Equal(r.Split.Test, p.Test) || !slices.Equal(r.Split.Cond, p.Cond) {
		t.Error("split.json does not read back")
	}
	copyDir := filepath.Join(t.TempDir(), "copy")
	if err := WriteRun(copyDir, r); err != nil {
		t.Fatal(err)
	}
	if err := Finish(copyDir, FormatRun); err != nil {
		t.Fatal(err)
	}
	foldertest.SameFolders(t, dir, copyDir, FileComplete)
	// Settings reload into a config.
	if _, err := LoadSettings(dir); err != nil {
		t.Errorf("settings.yaml: %v", err)
	}

	// The loaded model predicts what the fitted net predicts, in
	// recording units (the z-scoring undone).
	m, err := LoadModel(dir)
	if err != nil {
		t.Fatal(err)
	}
	pred, err := m.Predict(m.Manifest.Axis.Centers)
	if err != nil {
		t.Fatal(err)
	}
	want := train.PredictConditions(f.Net, p.NBins)
	n := p.Neurons()
	for b := 0; b < p.NBins; b++ {
		for j := 0; j < n; j++ {
			w := want[b*n+j]
			if p.Norm != nil {
				w = w*p.Norm.Scale[j] + p.Norm.Mean[j]
			}
			if g := float64(pred.Data[b*n+j]); math.Abs(g-w) > 1e-5*math.Max(1, math.Abs(w)) {
				t.Fatalf("bin %d neuron %d: loaded model predicts %v, fitted net %v", b, j, g, w)
			}
		}
	}

	// Begin removes the marker of a finished run.
	if err := Begin(dir); err != nil {
		t.Fatal(err)
	}
	if err := CheckComplete(dir, KindRun); err == nil {
		t.Error("Begin left complete.json")
	}
}

func TestResumeState(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "run")
	c := &train.Checkpoint{Epoch: 3, Params: []float64{1, math.NaN(), 3}, RNG: []byte{1, 2}, Log: []train.EpochLog{{Epoch: 1, TrainLoss: 0.5}}, Config: []byte("seed: 1\n")}
	if err := SaveResumeState(dir, c); err != nil {
		t.Fatal(err)
	}
	if k, err := Kind(dir); k != KindRun || err != nil {
		t.Errorf("Kind of an interrupted run: %q %v", k, err)
	}
	back, err := LoadResumeState(dir)
	if err != nil {
		t.Fatal(err)
	}
	if back.Epoch != 3 || len(back.Params) != 3 || !math.IsNaN(back.Params[1]) || string(back.Config) != "seed: 1\n" || back.Log[0].TrainLoss != 0.5 {
		t.Errorf("resume state read back as %+v", back)
	}
	foldertest.CheckFolder(t, dir, FileMode, FolderMode)
	if err := RemoveResumeState(dir); err != nil {
		t.Fatal(err)
	}
	if err := RemoveResumeState(dir); err != nil {
		t.Errorf("removing a missing resume state: %v", err)
	}
}

// sampleComparison builds the comparison folder of two models with odd
// names on n neurons, neuron 1 excluded.
func TestKind(t *testing.T) {
	dir := t.TempDir()
	if _, err := Kind(dir); err == nil || !strings.Contains(err.Error(), "neither a run folder") {
		t.Errorf("empty folder: %v", err)
	}
	os.WriteFile(filepath.Join(dir, FileManifest), []byte("{}"), 0o644)
	if k, err := Kind(dir); k != KindRun || err != nil {
		t.Errorf("with model.json: %q %v", k, err)
	}
	os.WriteFile(filepath.Join(dir, FileComparison), []byte("{}"), 0o644)
	if k, err := Kind(dir); k != KindComparison || err != nil {
		t.Errorf("with comparison.json: %q %v", k, err)
	}
	if _, err := Kind(filepath.Join(dir, FileManifest)); err == nil || !strings.Contains(err.Error(), "not a folder") {
		t.Errorf("a file: %v", err)
	}
	// A folder of an older stria: named as such, not as unfinished.
	os.WriteFile(filepath.Join(dir, "config.yaml"), []byte("seed: 1\n"), 0o644)
	if _, err := Open(dir); err == nil || !strings.Contains(err.Error(), "written by an older stria") {
		t.Errorf("an old folder: %v", err)
	}
}

// TestSummarizeKeeps checks the neurons each summary keeps (numbers by
// hand): ratio columns over the reliable scored neurons, the rest over the
// scored ones, verdicts counted over the scored neurons.
func TestSummarizeKeeps(t *testing.T) {
	nan := math.NaN()
	scores := []eval.Scores{
		{TestR2: 0.1, FEV: 0.5, CCNorm: 0.9, SPE: 0.4},
		{TestR2: 0.2, FEV: nan, CCNorm: nan, SPE: nan}, // ceiling not usable
		{TestR2: 0.3, FEV: -40, CCNorm: 7, SPE: -40},   // unreliable: left out of the ratio summaries
		{TestR2: 0.4, FEV: 0.7, CCNorm: 1.0, SPE: 0.6},
		{TestR2: 9, FEV: 9, CCNorm: 9, SPE: 9}, // excluded
	}
	verdicts := []eval.Ceiling{eval.CeilingUsable, eval.CeilingNotSignificant, eval.CeilingUsable, eval.CeilingUsable, eval.CeilingNoSignal}
	rel := []float64{0.8, 0.5, 0.1, 0.9, nan}
	s := NewSummary(scores, map[int]string{4: "constant"}, verdicts, rel, 0.3)
	if s.Scored != 4 || s.Reliable != 3 || s.Ceilings["usable"] != 3 || s.Ceilings["signal_not_significant"] != 1 || s.Ceilings["no_signal_power"] != 0 {
		t.Errorf("scored %d reliable %d verdicts %v, want 4, 3, usable 3 and signal_not_significant 1", s.Scored, s.Reliable, s.Ceilings)
	}
	// fev over neurons 0, 1, 3: values 0.5, NaN, 0.7.
	if f := s.Spread["fev"]; float64(f.Median) != 0.6 || f.N != 2 || f.NaN != 1 || f.Kept != 3 || f.KeptBy != "split_half_all >= 0.3" {
		t.Errorf("fev spread %+v, want median 0.6, n 2, nan 1, kept 3 by split_half_all >= 0.3", f)
	}
	if r := s.Spread["test_r2"]; float64(r.Median) != 0.25 || r.Kept != 4 || r.KeptBy != KeptScored {
		t.Errorf("test_r2 spread %+v, want median 0.25 over the 4 scored", r)
	}
	if a := s.Spread[ColSplitHalfAll]; float64(a.Median) != 0.65 || a.Kept != 4 {
		t.Errorf("split_half_all spread %+v, want median 0.65 over 4", a)
	}
	// -1 keeps every scored neuron, even one whose Spearman-Brown
	// reliability is below -1 or NaN.
	rel[0], rel[1] = -3, nan
	s = NewSummary(scores, map[int]string{4: "constant"}, verdicts, rel, -1)
	if f := s.Spread["fev"]; f.Kept != 4 || f.KeptBy != KeptScored || s.Reliable != 4 {
		t.Errorf("min_reliability -1: fev spread %+v, reliable %d, want all 4 scored kept", f, s.Reliable)
	}
}
