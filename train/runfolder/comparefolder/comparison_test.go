package comparefolder

import (
	"bytes"
	"github.com/strialab/stria/train/runfolder"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/tuning"
	"github.com/strialab/stria/train/runfolder/foldertest"
	"github.com/strialab/stria/train/settings"
)

func sampleComparison(n, nb int) *ComparisonFolder {
	models := []string{`enc[channels=2,readout_l2=0.1]`, `base "q"`}
	excluded := make([]string, n)
	excluded[1] = "constant response over all trials"
	c := &ComparisonFolder{Settings: []byte("seed: 1\n"), Excluded: excluded, Curves: map[string][]float64{}}
	c.Result = &Comparison{Models: models, Folds: 2, Neurons: n, Excluded: 1, PerNeuron: map[string]map[string][]float64{},
		Summary: map[string]map[string]runfolder.Spread{}, Winner: map[string]string{},
		Ceiling: make([]string, n), UsableFolds: make([]int, n), SplitHalfAll: make([]float64, n), MinReliability: 0.3}
	for j := 0; j < n; j++ {
		c.Result.SplitHalfAll[j] = math.Sqrt(float64(j)) / 2.7
		if j == 1 {
			c.Result.SplitHalfAll[j] = math.NaN()
			continue
		}
		c.Result.Ceiling[j] = eval.Ceiling(j % 4).String()
		c.Result.UsableFolds[j] = j % 3
	}
	for mi, m := range models {
		c.Result.PerNeuron[m] = map[string][]float64{}
		c.Result.Summary[m] = map[string]runfolder.Spread{}
		for k, col := range runfolder.ScoreColumns {
			v := make([]float64, n)
			for j := range v {
				v[j] = math.Sin(float64(1+j*(k+1)+mi)) / 3 // not short in decimal
			}
			v[1] = math.NaN()
			c.Result.PerNeuron[m][col] = v
		}
		for _, k := range CompareMetrics {
			c.Result.Summary[m][k] = runfolder.SpreadOf(eval.Summarize(c.Result.PerNeuron[m][k]), 1)
			c.Result.Summary[m][k] = runfolder.Spread{Median: c.Result.Summary[m][k].Median, Q1: c.Result.Summary[m][k].Q1, Q3: c.Result.Summary[m][k].Q3,
				N: c.Result.Summary[m][k].N, NaN: c.Result.Summary[m][k].NaN, Kept: c.Result.Summary[m][k].Kept, KeptBy: runfolder.ReliableRule(0.3)}
		}
		for f := 0; f < 2; f++ {
			fs := FoldScores{Model: m, Fold: f, Cols: make([][]float64, len(runfolder.ScoreColumns)), Ceiling: make([]string, n)}
			for j := range fs.Ceiling {
				if j != 1 {
					fs.Ceiling[j] = eval.Ceiling((j + f) % 4).String()
				}
			}
			for k := range fs.Cols {
				fs.Cols[k] = make([]float64, n)
				for j := range fs.Cols[k] {
					fs.Cols[k][j] = math.Cos(float64(j+k+f+mi)) * 0.123456789123
				}
				fs.Cols[k][1] = math.NaN()
			}
			c.FoldScores = append(c.FoldScores, fs)
		}
	}
	for _, k := range CompareMetrics {
		c.Result.Winner[k] = models[0]
		w := eval.WilcoxonSignedRank(c.Result.PerNeuron[models[0]][k], c.Result.PerNeuron[models[1]][k])
		c.Result.Pairs = append(c.Result.Pairs, PairTest{Metric: k, A: models[0], B: models[1], ShareA: 2.0 / 3, Wilcoxon: w, Kept: n - 1, KeptBy: runfolder.KeptScored})
	}
	centers := make([]float64, nb)
	for b := range centers {
		centers[b] = 15 + 30*float64(b)
	}
	for _, name := range curveNames(models) {
		v := make([]float64, nb*n)
		for i := range v {
			v[i] = math.Exp(math.Sin(float64(i + len(name))))
		}
		c.Curves[name] = v
	}
	for _, src := range append([]string{"data"}, models...) {
		for j := 0; j < n; j++ {
			r := make([]float64, nb)
			for b := range r {
				r[b] = c.Curves[CurveDataMean][b*n+j]
			}
			c.Descriptors = append(c.Descriptors, Descriptor{Source: src, Neuron: j, Descriptors: tuning.Describe(r, centers, 360)})
		}
	}
	c.Info = ComparisonInfo{Models: models, Encoders: models[:1], Folds: 2, Neurons: n, Excluded: map[string]string{"1": excluded[1]},
		Summary: c.Result.Summary, Winner: c.Result.Winner, Pairs: NewPairInfo(c.Result.Pairs), PValues: WilcoxonNote,
		Cautions: []string{"c"}, Warnings: []string{"w, \"quoted\""}, Axis: runfolder.AxisInfo{Name: "heading", Unit: "deg", Max: 360, Periodic: true, Bins: nb, Encoding: settings.OneHot, Centers: centers},
		Epochs: map[string][]int{models[0]: {3, 4}}, Recordings: []string{"/data/r.npy"}}
	return c
}

func TestComparisonRoundTrip(t *testing.T) {
	const n, nb = 7, 12
	c := sampleComparison(n, nb)
	dir := filepath.Join(t.TempDir(), "cmp")
	if err := runfolder.Begin(dir); err != nil {
		t.Fatal(err)
	}
	if err := WriteComparison(dir, c); err != nil {
		t.Fatal(err)
	}
	const incomplete = "is incomplete: the comparison that wrote it did not finish (no complete.json)"
	if _, err := runfolder.Open(dir); err == nil || !strings.Contains(err.Error(), incomplete) {
		t.Errorf("Open before Finish: %v, want %q", err, incomplete)
	}
	if err := runfolder.Finish(dir, runfolder.FormatComparison); err != nil {
		t.Fatal(err)
	}
	foldertest.CheckFolder(t, dir, runfolder.FileMode, runfolder.FolderMode)
	if k, err := runfolder.Open(dir); k != runfolder.KindComparison || err != nil {
		t.Errorf("Open: %q %v", k, err)
	}
	for _, f := range []string{FileFoldScores, FileFoldAverages, FileModelSummary, FileModelPairs, FileDescriptors} {
		rows := foldertest.ReadAllCSV(t, filepath.Join(dir, f))
		if len(rows) < 2 {
			t.Errorf("%s: %d rows", f, len(rows))
		}
	}
	back, err := ReadComparison(dir)
	if err != nil {
		t.Fatal(err)
	}
	// model_summary.csv and model_pairs.csv hold comparison.json's
	// numbers to 8 significant digits.
	spreads, err := ReadSpreadTable(filepath.Join(dir, FileModelSummary))
	if err != nil {
		t.Fatal(err)
	}
	if len(spreads) != 2*len(CompareMetrics) {
		t.Fatalf("%d summary rows", len(spreads))
	}
	close8 := func(g, w float64) bool {
		return g == w || math.IsNaN(g) && math.IsNaN(w) || math.Abs(g-w) <= 5e-8*math.Abs(w)
	}
	for _, r := range spreads {
		w := c.Result.Summary[r.Model][r.Metric]
		if !close8(float64(r.Median), float64(w.Median)) || !close8(float64(r.Q3), float64(w.Q3)) || r.N != w.N || r.NaN != w.NaN || r.Kept != w.Kept || r.KeptBy != w.KeptBy {
			t.Errorf("model_summary.csv %s %s: %+v, want %+v", r.Model, r.Metric, r.Spread, w)
		}
	}
	pairs, err := ReadPairsTable(filepath.Join(dir, FileModelPairs))
	if err != nil {
		t.Fatal(err)
	}
	for i, pt := range pairs {
		w := c.Result.Pairs[i]
		if pt.A != w.A || pt.B != w.B || pt.Metric != w.Metric || !close8(pt.P, w.P) || !close8(pt.ShareA, w.ShareA) || pt.N != w.N || pt.Method != w.Method || pt.Kept != w.Kept || pt.KeptBy != w.KeptBy {
			t.Errorf("model_pairs.csv row %d: %+v, want %+v", i, pt, w)
		}
	}
	// The fold averages read back exactly.
	for _, m := range c.Info.Models {
		for _, col := range runfolder.ScoreColumns {
			g, w := back.Result.PerNeuron[m][col], c.Result.PerNeuron[m][col]
			for j := range w {
				if g[j] != w[j] && !(math.IsNaN(g[j]) && math.IsNaN(w[j])) {
					t.Fatalf("%s %s neuron %d: read back %v, wrote %v", m, col, j, g[j], w[j])
				}
			}
		}
	}
	if !slices.Equal(back.Result.Ceiling, c.Result.Ceiling) || !slices.Equal(back.Result.UsableFolds, c.Result.UsableFolds) || !slices.Equal(back.FoldScores[2].Ceiling, c.FoldScores[2].Ceiling) {
		t.Errorf("verdicts read back: %v %v %v, want %v %v %v", back.Result.Ceiling, back.Result.UsableFolds, back.FoldScores[2].Ceiling, c.Result.Ceiling, c.Result.UsableFolds, c.FoldScores[2].Ceiling)
	}
	for j, w := range c.Result.SplitHalfAll {
		if g := back.Result.SplitHalfAll[j]; g != w && !(math.IsNaN(g) && math.IsNaN(w)) {
			t.Errorf("split_half_all of neuron %d read back %v, wrote %v", j, g, w)
		}
	}
	if len(back.FoldScores) != 4 || back.FoldScores[3].Model != `base "q"` || back.FoldScores[3].Fold != 1 || back.Excluded[1] == "" {
		t.Errorf("fold scores read back: %d tables, last %q fold %d", len(back.FoldScores), back.FoldScores[3].Model, back.FoldScores[3].Fold)
	}
	again := filepath.Join(t.TempDir(), "again")
	if err := WriteComparison(again, back); err != nil {
		t.Fatal(err)
	}
	if err := runfolder.Finish(again, runfolder.FormatComparison); err != nil {
		t.Fatal(err)
	}
	foldertest.SameFolders(t, dir, again, runfolder.FileComplete)
}

func TestAcrossAndFoldResults(t *testing.T) {
	dir := t.TempDir()
	a, b := sampleComparison(5, 4).Result, sampleComparison(6, 4).Result
	a.Recording, b.Recording = "m1,left", "m2"
	if err := WriteAcross(dir, NewAcross([]*Comparison{a, b}, a)); err != nil {
		t.Fatal(err)
	}
	rows := foldertest.ReadAllCSV(t, filepath.Join(dir, FilePerRecording))
	// 2 recordings x 2 models x 4 metrics, then 2 models x 4 metrics of
	// the median over recordings.
	if len(rows) != 1+16+8 || rows[1][0] != "m1,left" || rows[17][0] != "median of recordings" {
		t.Errorf("per_recording.csv: %d rows, first %q", len(rows), rows[1])
	}
	// Read back and written again: the same bytes.
	across, err := ReadAcross(dir)
	if err != nil {
		t.Fatal(err)
	}
	if r := across.PerRecording[0]; r.Recording != "m1,left" || r.Model != a.Models[0] || r.Metric != CompareMetrics[0] || r.N != a.Summary[a.Models[0]][CompareMetrics[0]].N {
		t.Errorf("per_recording.csv row 1 read back as %+v", r)
	}
	again := t.TempDir()
	if err := WriteAcross(again, across); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{FilePerRecording, FilePooledSummary, FilePooledPairs} {
		x, _ := os.ReadFile(filepath.Join(dir, f))
		y, _ := os.ReadFile(filepath.Join(again, f))
		if !bytes.Equal(x, y) {
			t.Errorf("%s differs after reading back and writing again", f)
		}
	}
	if k, err := runfolder.Kind(dir); k != runfolder.KindMany || err != nil {
		t.Errorf("Kind: %q %v", k, err)
	}
	r := &FoldResult{ID: "m1/enc/fold2", Model: "enc", Fold: 1, Scores: []eval.Scores{{TestR2: 0.5, CCNorm: math.NaN()}}, Curves: []float64{1, 2}, Epochs: 7}
	if HasFoldResult(dir, r.ID) {
		t.Error("a result before it was written")
	}
	if err := WriteFoldResult(dir, r); err != nil {
		t.Fatal(err)
	}
	got, err := ReadFoldResult(dir, r.ID)
	if err != nil || !HasFoldResult(dir, r.ID) {
		t.Fatal(err)
	}
	if got.ID != r.ID || got.Epochs != 7 || got.Scores[0].TestR2 != 0.5 || !math.IsNaN(got.Scores[0].CCNorm) || !slices.Equal(got.Curves, r.Curves) {
		t.Errorf("fold result read back as %+v", got)
	}
	os.WriteFile(FoldResultPath(dir, "bad"), []byte("not gob"), 0o644)
	if _, err := ReadFoldResult(dir, "bad"); err == nil || !strings.Contains(err.Error(), "run its array task again") {
		t.Errorf("a broken fold result: %v", err)
	}
	foldertest.CheckFolder(t, filepath.Join(dir, DirFoldResults, "m1"), runfolder.FileMode, runfolder.FolderMode)
}

func TestRemoveFoldResultTemps(t *testing.T) {
	dir := t.TempDir()
	p := FoldResultPath(dir, "encoder/fold1")
	os.MkdirAll(filepath.Dir(p), 0o755)
	mine, other := filepath.Join(filepath.Dir(p), ".fold1.gob.tmp123"), filepath.Join(filepath.Dir(p), ".fold2.gob.tmp9")
	for _, f := range []string{mine, other} {
		os.WriteFile(f, []byte("x"), 0o644)
	}
	if err := RemoveFoldResultTemps(dir, "encoder/fold1"); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(mine); err == nil {
		t.Error("the unit's temporary file is left")
	}
	if _, err := os.Stat(other); err != nil {
		t.Error("another unit's temporary file was removed")
	}
}

// TestNamesKnownToRunfolder checks that every top-level name of a
// comparison folder is one runfolder.Empty may delete.
func TestNamesKnownToRunfolder(t *testing.T) {
	for _, name := range []string{FileFoldScores, FileFoldAverages, FileModelSummary, FileModelPairs, FileComparison,
		FileDescriptors, DirCurves, DirFoldResults, FilePerRecording, FilePooledSummary, FilePooledPairs} {
		if !runfolder.IsStriaName(name) {
			t.Errorf("got runfolder.IsStriaName(%q) false, want true", name)
		}
	}
}
