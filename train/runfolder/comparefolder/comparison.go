package comparefolder

import (
	"bufio"
	"encoding/csv"
	"encoding/gob"
	"errors"
	"fmt"
	"github.com/strialab/stria/train/runfolder"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/tuning"
)

// Comparison folder file names (settings.yaml, figures/, report.html and
// complete.json as in run folders).
const (
	FileFoldScores    = "fold_scores.csv"          // model, fold, neuron: scores on the fold's test trials
	FileFoldAverages  = "fold_averages.csv"        // model, neuron: scores averaged over folds
	FileModelSummary  = "model_summary.csv"        // model, metric: median and quartiles over neurons
	FileModelPairs    = "model_pairs.csv"          // metric, model pair: share and Wilcoxon test
	FileComparison    = runfolder.FileComparison   // ComparisonInfo
	FileDescriptors   = "tuning_descriptors.csv"   // source, neuron: tuning descriptors
	DirCurves         = "tuning_curves"            // <model>.npy, data_mean.npy, data_sem.npy: bins x neurons
	DirFoldResults    = runfolder.DirFoldResults   // <recording>/<model>/fold<k>.gob: one unit's FoldResult
	FilePerRecording  = runfolder.FilePerRecording // several recordings: every recording's medians
	FilePooledSummary = "pooled_summary.csv"       // several recordings: neurons pooled
	FilePooledPairs   = "pooled_pairs.csv"         // several recordings: pairs on pooled neurons
)

// Curve names of the data in tuning_curves/ beside the models' curves.
const (
	CurveDataMean = "data_mean"
	CurveDataSEM  = "data_sem"
)

// CompareMetrics are the metrics summarised and tested in a comparison.
var CompareMetrics = []string{"test_r2", "test_r", "fev", "cc_norm"}

// WilcoxonNote states how the p-values of model_pairs.csv are computed.
const WilcoxonNote = "Wilcoxon signed-rank test, two-sided, across neurons on fold-averaged scores; zero differences dropped; exact null distribution for n <= 50 without ties or zeros, otherwise the normal approximation with tie correction and no continuity correction (as scipy 1.10's defaults). Not corrected for multiple comparisons."

// FileName turns a model name into a file name.
func FileName(model string) string {
	r := strings.NewReplacer("[", "_", "]", "", ",", "_", "=", "-", "/", "_", " ", "_")
	return r.Replace(model)
}

// PairTest is the comparison of two models on one metric across neurons.
type PairTest struct {
	Metric string
	A, B   string
	// ShareA is the share of neurons (with both scores defined) where A
	// scores higher than B.
	ShareA float64
	eval.Wilcoxon
	// Kept is the number of neurons the test was taken over (before
	// dropping NaN pairs), chosen by KeptBy (as in Spread).
	Kept   int
	KeptBy string
}

// Comparison is the outcome of a cross-validated comparison of models on
// one recording (or on the neurons of several, pooled).
type Comparison struct {
	// Recording names the recording ("" for a single one, "pooled" for
	// neurons pooled across recordings).
	Recording string
	Models    []string
	Folds     int
	Neurons   int
	// Excluded counts the neurons left out (constant responses).
	Excluded int
	// PerNeuron[model][column] is each neuron's score averaged over the
	// folds, for every column of ScoreColumns (NaN folds left out; NaN for
	// excluded neurons). The ratio columns are NaN on the folds where the
	// neuron's noise ceiling is not usable, so they average over the folds
	// where it is.
	PerNeuron map[string]map[string][]float64
	// Ceiling[j] is neuron j's verdict over the folds (an eval.Ceiling
	// code; "" when excluded): "usable" when the ceiling is usable on at
	// least one fold, otherwise the verdict of most folds (the first in
	// code order on a tie). UsableFolds[j] is the number of folds where it
	// is usable, the folds its ratio scores average over.
	Ceiling     []string
	UsableFolds []int
	// FoldCeilings[f] counts the scored neurons by verdict on fold f.
	FoldCeilings []map[string]int
	// SplitHalfAll[j] is neuron j's split-half reliability over all trials;
	// the ratio metrics are summarised and tested over the neurons with
	// SplitHalfAll >= MinReliability only. nil: every neuron.
	SplitHalfAll   []float64
	MinReliability float64
	// Summary[model][metric] over neurons, for CompareMetrics.
	Summary map[string]map[string]runfolder.Spread
	Pairs   []PairTest
	// Cautions and Warnings are those of comparison.json (the data
	// warnings without repeats).
	Cautions, Warnings []string
	// Winner is the model with the highest median, per metric.
	Winner map[string]string
}

// ComparisonInfo is comparison.json.
type ComparisonInfo struct {
	Models []string `json:"models"`
	// Encoders are the models that are encoders (the others are
	// per-neuron baselines).
	Encoders []string          `json:"encoders"`
	Folds    int               `json:"folds"`
	Neurons  int               `json:"neurons"`
	Excluded map[string]string `json:"excluded_neurons"`
	// Ceilings counts the scored neurons by their verdict over the folds
	// (Comparison.Ceiling); FoldCeilings by verdict on each fold.
	Ceilings     map[string]int   `json:"ceiling_verdicts"`
	FoldCeilings []map[string]int `json:"ceiling_verdicts_per_fold"`
	// Reliable counts the scored neurons with split_half_all >=
	// MinReliability, the neurons of the ratio metrics' summaries and
	// tests.
	Reliable       int                                    `json:"neurons_reliable"`
	MinReliability float64                                `json:"min_reliability"`
	Summary        map[string]map[string]runfolder.Spread `json:"summary"`
	Winner         map[string]string                      `json:"winner"`
	Pairs          []PairInfo                             `json:"pairs"`
	PValues        string                                 `json:"p_value_method"`
	Cautions       []string                               `json:"cautions"`
	Warnings       []string                               `json:"warnings"`
	Axis           runfolder.AxisInfo                     `json:"axis"`
	Epochs         map[string][]int                       `json:"encoder_epochs,omitempty"`
	Recordings     []string                               `json:"recordings"`
}

// PairInfo is one pairwise test in comparison.json.
type PairInfo struct {
	Metric  string        `json:"metric"`
	A       string        `json:"model_a"`
	B       string        `json:"model_b"`
	ShareA  runfolder.Num `json:"share_a_higher"`
	W       runfolder.Num `json:"w"`
	P       runfolder.Num `json:"p"`
	N       int           `json:"n"`
	Dropped int           `json:"dropped"`
	Method  string        `json:"method"`
	Kept    int           `json:"neurons_kept"`
	KeptBy  string        `json:"kept_by"`
}

// FoldScores is one model's scores on one fold, as in fold_scores.csv:
// Cols[k][j] is column ScoreColumns[k] of neuron j (NaN for an excluded
// neuron), Ceiling[j] its noise-ceiling verdict on the fold's test trials
// ("" for an excluded neuron).
type FoldScores struct {
	Model   string
	Fold    int // 0-based; written 1-based
	Cols    [][]float64
	Ceiling []string
}

// Descriptor is one row of tuning_descriptors.csv: the descriptors of the
// data's or a model's curve of one neuron.
type Descriptor struct {
	Source string // "data" or a model
	Neuron int
	tuning.Descriptors
}

// ComparisonFolder is everything a comparison folder of one recording
// holds, as written by WriteComparison and read by ReadComparison.
type ComparisonFolder struct {
	Settings []byte
	Info     ComparisonInfo
	// Result gives the fold averages (fold_averages.csv) and is the
	// source of model_summary.csv and model_pairs.csv.
	Result     *Comparison
	FoldScores []FoldScores
	// Excluded[j] is why neuron j is excluded ("" when scored).
	Excluded []string
	// Curves are the arrays of tuning_curves/ (bins x neurons) by name:
	// each model's (under its name) and CurveDataMean, CurveDataSEM.
	Curves      map[string][]float64
	Descriptors []Descriptor
}

// NewFoldScores builds the table of one model's scores on one fold, with
// the verdicts of its noise ceilings.
func NewFoldScores(model string, fold int, scores []eval.Scores, excluded map[int]string, verdicts []eval.Ceiling) FoldScores {
	t := runfolder.NewNeuronScores(nil, scores, excluded, verdicts, nil)
	return FoldScores{Model: model, Fold: fold, Cols: t.Cols, Ceiling: t.Ceiling}
}

// NewPairInfo converts the pairwise tests of a comparison for
// comparison.json.
func NewPairInfo(pairs []PairTest) []PairInfo {
	out := make([]PairInfo, len(pairs))
	for i, pt := range pairs {
		out[i] = PairInfo{Metric: pt.Metric, A: pt.A, B: pt.B, ShareA: runfolder.Num(pt.ShareA), W: runfolder.Num(pt.W), P: runfolder.Num(pt.P), N: pt.N, Dropped: pt.Dropped, Method: pt.Method, Kept: pt.Kept, KeptBy: pt.KeptBy}
	}
	return out
}

// WriteComparison writes the comparison folder of one recording (not
// complete.json: call Finish after it). The files are written at once, each
// atomically (their bytes do not depend on the order).
func WriteComparison(dir string, c *ComparisonFolder) error {
	if err := runfolder.MakeFolder(filepath.Join(dir, DirCurves)); err != nil {
		return err
	}
	n := c.Info.Neurons
	header := append(append([]string{"model", "fold", "neuron"}, runfolder.ScoreColumns...), runfolder.ColCeiling, "excluded")
	writes := []func() error{
		func() error {
			// Rows by model and fold, neurons in order (by blocks on all
			// cores: runfolder.WriteCSVRows).
			return runfolder.WriteCSVRows(filepath.Join(dir, FileFoldScores), header, len(c.FoldScores)*n, func(row []string, i int) {
				fs, j := &c.FoldScores[i/n], i%n
				row[0], row[1], row[2] = fs.Model, strconv.Itoa(fs.Fold+1), strconv.Itoa(j)
				for k := range runfolder.ScoreColumns {
					row[3+k] = runfolder.FormatScore(fs.Cols[k][j])
				}
				row[len(row)-2] = fs.Ceiling[j]
				row[len(row)-1] = c.Excluded[j]
			})
		},
		func() error { return writeFoldAverages(filepath.Join(dir, FileFoldAverages), c.Result) },
		func() error {
			return WriteSpreadTable(filepath.Join(dir, FileModelSummary), summaryRows(c.Result), false)
		},
		func() error { return WritePairsTable(filepath.Join(dir, FileModelPairs), c.Result.Pairs) },
		func() error {
			return runfolder.WriteCSVRows(filepath.Join(dir, FileDescriptors), descriptorHeader, len(c.Descriptors), func(row []string, i int) {
				d := &c.Descriptors[i]
				row[0], row[1] = d.Source, strconv.Itoa(d.Neuron)
				for q, v := range [...]float64{d.Preferred, d.Peak, d.OneMinusCV, d.DirVector, d.OSI, d.DSI} {
					row[2+q] = runfolder.FormatScore(v)
				}
			})
		},
		func() error { return runfolder.WriteBytes(filepath.Join(dir, runfolder.FileSettings), c.Settings) },
		func() error { return runfolder.WriteJSON(filepath.Join(dir, FileComparison), c.Info) },
	}
	nb := c.Info.Axis.Bins
	for _, name := range curveNames(c.Info.Models) {
		v, ok := c.Curves[name]
		if !ok {
			return fmt.Errorf("%s: no curves of %s", dir, name)
		}
		writes = append(writes, func() error {
			return format.WriteNPY64(filepath.Join(dir, DirCurves, FileName(name)+".npy"), []int{nb, n}, v)
		})
	}
	errs := make([]error, len(writes))
	var wg sync.WaitGroup
	for i, w := range writes {
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs[i] = w()
		}()
	}
	wg.Wait()
	return errors.Join(errs...)
}

var descriptorHeader = []string{"source", "neuron", "preferred", "peak", "one_minus_cv", "direction_vector", "osi", "dsi"}

// curveNames are the arrays of tuning_curves/: the models', then the
// data's.
func curveNames(models []string) []string {
	return append(append([]string(nil), models...), CurveDataMean, CurveDataSEM)
}

// Columns of fold_averages.csv beside ScoreColumns and ColCeiling (the
// verdict over the folds, Comparison.Ceiling) and ColSplitHalfAll.
const (
	// ColCeilingFolds is the number of folds where the neuron's noise
	// ceiling is usable: the folds its ratio scores average over.
	ColCeilingFolds = "ceiling_folds"
)

// writeFoldAverages writes fold_averages.csv: one row per model and
// neuron, every score column, exact to the last bit, then the neuron's
// verdict over the folds, its number of usable folds and its reliability
// over all trials (the same in every model's rows).
func writeFoldAverages(path string, c *Comparison) error {
	header := append(append([]string{"model", "neuron"}, runfolder.ScoreColumns...), runfolder.ColCeiling, ColCeilingFolds, runfolder.ColSplitHalfAll)
	n := c.Neurons
	cols := make([][][]float64, len(c.Models)) // [model][column][neuron]
	for mi, m := range c.Models {
		for _, col := range runfolder.ScoreColumns {
			cols[mi] = append(cols[mi], c.PerNeuron[m][col])
		}
	}
	return runfolder.WriteCSVRows(path, header, len(c.Models)*n, func(row []string, i int) {
		mi, j := i/n, i%n
		row[0], row[1] = c.Models[mi], strconv.Itoa(j)
		for k, col := range cols[mi] {
			row[2+k] = runfolder.FormatExact(col[j])
		}
		rel := math.NaN()
		if c.SplitHalfAll != nil {
			rel = c.SplitHalfAll[j]
		}
		row[len(row)-3], row[len(row)-2], row[len(row)-1] = c.Ceiling[j], strconv.Itoa(c.UsableFolds[j]), runfolder.FormatExact(rel)
	})
}

// FoldAverages is fold_averages.csv read back: Scores[model][column]
// [neuron] and the per-neuron columns (the same in every model's rows).
type FoldAverages struct {
	Scores       map[string]map[string][]float64
	Ceiling      []string
	UsableFolds  []int
	SplitHalfAll []float64
}

// ReadFoldAverages reads fold_averages.csv of a comparison folder of
// models with n neurons.
func ReadFoldAverages(dir string, models []string, n int) (*FoldAverages, error) {
	path := filepath.Join(dir, FileFoldAverages)
	tb, err := runfolder.ReadColumns(path)
	if err != nil {
		return nil, err
	}
	fixed, err := tb.Cols("model", "neuron", runfolder.ColCeiling, ColCeilingFolds, runfolder.ColSplitHalfAll)
	if err != nil {
		return nil, err
	}
	kc, err := tb.Cols(runfolder.ScoreColumns...)
	if err != nil {
		return nil, err
	}
	fa := &FoldAverages{Scores: map[string]map[string][]float64{}, Ceiling: make([]string, n), UsableFolds: make([]int, n), SplitHalfAll: make([]float64, n)}
	out := fa.Scores
	seen := map[string][]bool{}
	for _, m := range models {
		out[m] = map[string][]float64{}
		for _, c := range runfolder.ScoreColumns {
			out[m][c] = make([]float64, n)
		}
		seen[m] = make([]bool, n)
	}
	for i, r := range tb.Rows {
		m := r[fixed[0]]
		if _, ok := out[m]; !ok {
			return nil, fmt.Errorf("%s: line %d: model %q is not in %s", path, i+2, m, FileComparison)
		}
		j, err := tb.Int(i, fixed[1])
		if err != nil {
			return nil, err
		}
		if j < 0 || j >= n {
			return nil, fmt.Errorf("%s: line %d: neuron %d out of range (0..%d)", path, i+2, j, n-1)
		}
		if seen[m][j] {
			return nil, fmt.Errorf("%s: line %d: model %q, neuron %d a second time", path, i+2, m, j)
		}
		seen[m][j] = true
		for q, k := range kc {
			if out[m][runfolder.ScoreColumns[q]][j], err = tb.Float(i, k); err != nil {
				return nil, err
			}
		}
		if fa.Ceiling[j], err = runfolder.CeilingCode(tb, i, fixed[2]); err != nil {
			return nil, err
		}
		if fa.UsableFolds[j], err = tb.Int(i, fixed[3]); err != nil {
			return nil, err
		}
		if fa.SplitHalfAll[j], err = tb.Float(i, fixed[4]); err != nil {
			return nil, err
		}
	}
	for _, m := range models {
		for j, ok := range seen[m] {
			if !ok {
				return nil, fmt.Errorf("%s: no row for model %q, neuron %d", path, m, j)
			}
		}
	}
	return fa, nil
}

// SpreadRow is one row of model_summary.csv, pooled_summary.csv or
// per_recording.csv: the spread over neurons of one model's fold-averaged
// metric (Recording is empty outside per_recording.csv).
type SpreadRow struct {
	Recording, Model, Metric string
	runfolder.Spread
}

// summaryRows lists the spreads of a comparison, models in order, metrics
// in the order of CompareMetrics.
func summaryRows(c *Comparison) []SpreadRow {
	var rows []SpreadRow
	for _, m := range c.Models {
		for _, k := range CompareMetrics {
			rows = append(rows, SpreadRow{Model: m, Metric: k, Spread: c.Summary[m][k]})
		}
	}
	return rows
}

var (
	spreadHeader   = []string{"model", "metric", "median", "q1", "q3", "neurons", "nan", "neurons_kept", "kept_by"}
	perRecHeader   = append([]string{"recording"}, spreadHeader...)
	pairsHeader    = []string{"metric", "model_a", "model_b", "share_a_higher", "w", "p", "n", "dropped", "method", "neurons_kept", "kept_by"}
	recordingsRows = "median of recordings"
)

// WriteSpreadTable writes rows as model_summary.csv or pooled_summary.csv,
// or, withRecording, as per_recording.csv.
func WriteSpreadTable(path string, rows []SpreadRow, withRecording bool) error {
	header := spreadHeader
	if withRecording {
		header = perRecHeader
	}
	return runfolder.WriteCSV(path, header, func(cw *csv.Writer) error {
		for _, r := range rows {
			lead := []string{r.Model, r.Metric}
			if withRecording {
				lead = []string{r.Recording, r.Model, r.Metric}
			}
			s := r.Spread
			if err := cw.Write(append(lead, runfolder.FormatScore(float64(s.Median)), runfolder.FormatScore(float64(s.Q1)), runfolder.FormatScore(float64(s.Q3)), strconv.Itoa(s.N), strconv.Itoa(s.NaN), strconv.Itoa(s.Kept), s.KeptBy)); err != nil {
				return err
			}
		}
		return nil
	})
}

// ReadSpreadTable reads model_summary.csv, pooled_summary.csv or
// per_recording.csv (which has a recording column).
func ReadSpreadTable(path string) ([]SpreadRow, error) {
	tb, err := runfolder.ReadColumns(path)
	if err != nil {
		return nil, err
	}
	k, err := tb.Cols(spreadHeader...)
	if err != nil {
		return nil, err
	}
	kr, errRec := tb.Col("recording")
	rows := make([]SpreadRow, len(tb.Rows))
	for i, r := range tb.Rows {
		row := SpreadRow{Model: r[k[0]], Metric: r[k[1]]}
		if errRec == nil {
			row.Recording = r[kr]
		}
		for q, dst := range []*runfolder.Num{&row.Median, &row.Q1, &row.Q3} {
			v, err := tb.Float(i, k[2+q])
			if err != nil {
				return nil, err
			}
			*dst = runfolder.Num(v)
		}
		if row.N, err = tb.Int(i, k[5]); err != nil {
			return nil, err
		}
		if row.NaN, err = tb.Int(i, k[6]); err != nil {
			return nil, err
		}
		if row.Kept, err = tb.Int(i, k[7]); err != nil {
			return nil, err
		}
		row.KeptBy = r[k[8]]
		rows[i] = row
	}
	return rows, nil
}

// WritePairsTable writes pairwise tests as model_pairs.csv or
// pooled_pairs.csv.
func WritePairsTable(path string, pairs []PairTest) error {
	return runfolder.WriteCSV(path, pairsHeader, func(cw *csv.Writer) error {
		for _, pt := range pairs {
			if err := cw.Write([]string{pt.Metric, pt.A, pt.B, runfolder.FormatScore(pt.ShareA), runfolder.FormatScore(pt.W), runfolder.FormatScore(pt.P), strconv.Itoa(pt.N), strconv.Itoa(pt.Dropped), pt.Method, strconv.Itoa(pt.Kept), pt.KeptBy}); err != nil {
				return err
			}
		}
		return nil
	})
}

// ReadPairsTable reads model_pairs.csv or pooled_pairs.csv.
func ReadPairsTable(path string) ([]PairTest, error) {
	tb, err := runfolder.ReadColumns(path)
	if err != nil {
		return nil, err
	}
	k, err := tb.Cols(pairsHeader...)
	if err != nil {
		return nil, err
	}
	out := make([]PairTest, len(tb.Rows))
	for i, r := range tb.Rows {
		pt := PairTest{Metric: r[k[0]], A: r[k[1]], B: r[k[2]]}
		pt.Method = r[k[8]]
		for q, dst := range []*float64{&pt.ShareA, &pt.W, &pt.P} {
			if *dst, err = tb.Float(i, k[3+q]); err != nil {
				return nil, err
			}
		}
		if pt.N, err = tb.Int(i, k[6]); err != nil {
			return nil, err
		}
		if pt.Dropped, err = tb.Int(i, k[7]); err != nil {
			return nil, err
		}
		if pt.Kept, err = tb.Int(i, k[9]); err != nil {
			return nil, err
		}
		pt.KeptBy = r[k[10]]
		out[i] = pt
	}
	return out, nil
}

// ReadComparisonInfo reads comparison.json.
func ReadComparisonInfo(dir string) (*ComparisonInfo, error) {
	path := filepath.Join(dir, FileComparison)
	var ci ComparisonInfo
	if err := runfolder.ReadJSON(path, &ci); err != nil {
		return nil, err
	}
	if len(ci.Models) == 0 {
		return nil, fmt.Errorf("%s: no models", path)
	}
	if ci.Neurons < 1 {
		return nil, fmt.Errorf("%s: neurons %d", path, ci.Neurons)
	}
	return &ci, nil
}

// ReadCurves reads one array of tuning_curves/ (a model's fold-averaged
// curves, or CurveDataMean, CurveDataSEM): bins x neurons.
func ReadCurves(dir, name string, nb, n int) ([]float64, error) {
	path := filepath.Join(dir, DirCurves, FileName(name)+".npy")
	shape, v, err := format.ReadArray(path)
	if err != nil {
		return nil, err
	}
	if len(shape) != 2 || shape[0] != nb || shape[1] != n {
		return nil, fmt.Errorf("%s: shape %v, want [%d %d] (bins x neurons)", path, shape, nb, n)
	}
	return v, nil
}

// ReadComparison reads the whole comparison folder of one recording.
func ReadComparison(dir string) (*ComparisonFolder, error) {
	ci, err := ReadComparisonInfo(dir)
	if err != nil {
		return nil, err
	}
	n, nb := ci.Neurons, ci.Axis.Bins
	c := &ComparisonFolder{Info: *ci, Curves: map[string][]float64{}}
	if c.Settings, err = runfolder.ReadSettings(dir); err != nil {
		return nil, err
	}
	avg, err := ReadFoldAverages(dir, ci.Models, n)
	if err != nil {
		return nil, err
	}
	c.Result = &Comparison{Models: ci.Models, Folds: ci.Folds, Neurons: n, Excluded: len(ci.Excluded), PerNeuron: avg.Scores, Summary: ci.Summary, Winner: ci.Winner,
		Ceiling: avg.Ceiling, UsableFolds: avg.UsableFolds, FoldCeilings: ci.FoldCeilings, SplitHalfAll: avg.SplitHalfAll, MinReliability: ci.MinReliability,
		Cautions: ci.Cautions, Warnings: ci.Warnings}
	for _, p := range ci.Pairs {
		c.Result.Pairs = append(c.Result.Pairs, PairTest{Metric: p.Metric, A: p.A, B: p.B, ShareA: float64(p.ShareA),
			Wilcoxon: eval.Wilcoxon{W: float64(p.W), P: float64(p.P), N: p.N, Dropped: p.Dropped, Method: p.Method}, Kept: p.Kept, KeptBy: p.KeptBy})
	}
	if c.FoldScores, c.Excluded, err = readFoldScores(filepath.Join(dir, FileFoldScores), n); err != nil {
		return nil, err
	}
	for _, name := range curveNames(ci.Models) {
		if c.Curves[name], err = ReadCurves(dir, name, nb, n); err != nil {
			return nil, err
		}
	}
	if c.Descriptors, err = readDescriptors(filepath.Join(dir, FileDescriptors)); err != nil {
		return nil, err
	}
	return c, nil
}

// readFoldScores reads fold_scores.csv: the tables in file order and
// every neuron's exclusion reason.
func readFoldScores(path string, n int) ([]FoldScores, []string, error) {
	tb, err := runfolder.ReadColumns(path)
	if err != nil {
		return nil, nil, err
	}
	fixed, err := tb.Cols("model", "fold", "neuron", "excluded", runfolder.ColCeiling)
	if err != nil {
		return nil, nil, err
	}
	kc, err := tb.Cols(runfolder.ScoreColumns...)
	if err != nil {
		return nil, nil, err
	}
	if len(tb.Rows)%n != 0 {
		return nil, nil, fmt.Errorf("%s: %d rows, not a whole number of folds of %d neurons", path, len(tb.Rows), n)
	}
	excluded := make([]string, n)
	var out []FoldScores
	for i, r := range tb.Rows {
		j := i % n
		if j == 0 {
			fold, err := tb.Int(i, fixed[1])
			if err != nil {
				return nil, nil, err
			}
			fs := FoldScores{Model: r[fixed[0]], Fold: fold - 1, Cols: make([][]float64, len(runfolder.ScoreColumns)), Ceiling: make([]string, n)}
			for k := range fs.Cols {
				fs.Cols[k] = make([]float64, n)
			}
			out = append(out, fs)
		}
		fs := &out[len(out)-1]
		nj, err := tb.Int(i, fixed[2])
		if err != nil {
			return nil, nil, err
		}
		if nj != j || r[fixed[0]] != fs.Model || r[fixed[1]] != strconv.Itoa(fs.Fold+1) {
			return nil, nil, fmt.Errorf("%s: line %d: want model %q, fold %d, neuron %d (rows grouped by model and fold, neurons in order)", path, i+2, fs.Model, fs.Fold+1, j)
		}
		excluded[j] = r[fixed[3]]
		if fs.Ceiling[j], err = runfolder.CeilingCode(tb, i, fixed[4]); err != nil {
			return nil, nil, err
		}
		for q, k := range kc {
			if fs.Cols[q][j], err = tb.Float(i, k); err != nil {
				return nil, nil, err
			}
		}
	}
	return out, excluded, nil
}

func readDescriptors(path string) ([]Descriptor, error) {
	tb, err := runfolder.ReadColumns(path)
	if err != nil {
		return nil, err
	}
	k, err := tb.Cols(descriptorHeader...)
	if err != nil {
		return nil, err
	}
	out := make([]Descriptor, len(tb.Rows))
	for i, r := range tb.Rows {
		d := Descriptor{Source: r[k[0]]}
		if d.Neuron, err = tb.Int(i, k[1]); err != nil {
			return nil, err
		}
		for q, dst := range []*float64{&d.Preferred, &d.Peak, &d.OneMinusCV, &d.DirVector, &d.OSI, &d.DSI} {
			if *dst, err = tb.Float(i, k[2+q]); err != nil {
				return nil, err
			}
		}
		out[i] = d
	}
	return out, nil
}

// Across is what the top of a comparison over several recordings holds
// beside the recordings' folders.
type Across struct {
	// PerRecording (per_recording.csv) has every recording's spreads, then
	// rows "median of recordings": per model and metric the median and
	// quartiles over recordings of the recordings' medians (each recording
	// counts once).
	PerRecording []SpreadRow
	// Pooled (pooled_summary.csv) and PooledPairs (pooled_pairs.csv) are
	// the spreads and pairwise tests of the neurons of all recordings
	// pooled.
	Pooled      []SpreadRow
	PooledPairs []PairTest
}

// NewAcross builds the tables across recordings from every recording's
// comparison and the pooled one.
func NewAcross(cmps []*Comparison, pooled *Comparison) *Across {
	a := &Across{Pooled: summaryRows(pooled), PooledPairs: pooled.Pairs}
	for _, c := range cmps {
		for _, r := range summaryRows(c) {
			r.Recording = c.Recording
			a.PerRecording = append(a.PerRecording, r)
		}
	}
	for _, m := range pooled.Models {
		for _, k := range CompareMetrics {
			med := make([]float64, len(cmps))
			for i, c := range cmps {
				med[i] = float64(c.Summary[m][k].Median)
			}
			sp := runfolder.SpreadOf(eval.Summarize(med), 0)
			sp.KeptBy = "recordings"
			a.PerRecording = append(a.PerRecording, SpreadRow{Recording: recordingsRows, Model: m, Metric: k, Spread: sp})
		}
	}
	return a
}

// WriteAcross writes the tables across recordings into dir.
func WriteAcross(dir string, a *Across) error {
	if err := WriteSpreadTable(filepath.Join(dir, FilePerRecording), a.PerRecording, true); err != nil {
		return err
	}
	if err := WriteSpreadTable(filepath.Join(dir, FilePooledSummary), a.Pooled, false); err != nil {
		return err
	}
	return WritePairsTable(filepath.Join(dir, FilePooledPairs), a.PooledPairs)
}

// ReadAcross reads the tables across recordings of dir.
func ReadAcross(dir string) (*Across, error) {
	var a Across
	var err error
	if a.PerRecording, err = ReadSpreadTable(filepath.Join(dir, FilePerRecording)); err != nil {
		return nil, err
	}
	if a.Pooled, err = ReadSpreadTable(filepath.Join(dir, FilePooledSummary)); err != nil {
		return nil, err
	}
	if a.PooledPairs, err = ReadPairsTable(filepath.Join(dir, FilePooledPairs)); err != nil {
		return nil, err
	}
	return &a, nil
}

// RecordingFolders lists the per-recording comparison folders of a
// comparison over several recordings, in name order.
func RecordingFolders(dir string) ([]string, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, err
	}
	var out []string
	for _, e := range ents {
		if e.IsDir() && e.Name() != DirFoldResults && e.Name() != runfolder.DirFigures {
			if _, err := os.Stat(filepath.Join(dir, e.Name(), FileComparison)); err == nil {
				out = append(out, filepath.Join(dir, e.Name()))
			}
		}
	}
	sort.Strings(out)
	if len(out) == 0 {
		return nil, fmt.Errorf("%s: %s is there but no recording folder with %s", dir, FilePerRecording, FileComparison)
	}
	return out, nil
}

// FoldResult is what one unit of a comparison (a model on a fold of a
// recording) writes under fold_results/.
type FoldResult struct {
	ID     string
	Model  string
	Fold   int
	Scores []eval.Scores
	Curves []float64
	Epochs int
	// Fingerprint is what the numbers depend on (empty in results of an
	// older stria).
	Fingerprint runfolder.Fingerprint
}

// FoldResultPath is where the unit with the given id (recording/model/
// fold<k>, slash-separated) keeps its result.
func FoldResultPath(dir, id string) string {
	return filepath.Join(dir, DirFoldResults, filepath.FromSlash(id)+".gob")
}

// HasFoldResult reports whether a unit's result is on disk.
func HasFoldResult(dir, id string) bool {
	_, err := os.Stat(FoldResultPath(dir, id))
	return err == nil
}

// WriteFoldResult writes a unit's result atomically. Scores of -0 are set
// to 0 in r first (see foldResultFile), so that r then equals what
// ReadFoldResult reads back.
func WriteFoldResult(dir string, r *FoldResult) error {
	zeroNegativeZeros(r.Scores)
	path := FoldResultPath(dir, r.ID)
	if err := runfolder.MakeFolder(filepath.Dir(path)); err != nil {
		return err
	}
	return runfolder.WriteFile(path, func(w io.Writer) error { return gob.NewEncoder(w).Encode(packFoldResult(r)) })
}

// RemoveFoldResultTemps removes the temporary files a killed write of
// this unit's result left (only the process running a unit writes it, so
// an array task may call this for its own units while other tasks run).
func RemoveFoldResultTemps(dir, id string) error {
	path := FoldResultPath(dir, id)
	tmps, err := filepath.Glob(filepath.Join(filepath.Dir(path), "."+filepath.Base(path)+".tmp*"))
	if err != nil {
		return err
	}
	for _, t := range tmps {
		if err := os.Remove(t); err != nil && !errors.Is(err, os.ErrNotExist) {
			return err
		}
	}
	return nil
}

// ReadFoldResult reads a unit's result.
func ReadFoldResult(dir, id string) (*FoldResult, error) {
	path := FoldResultPath(dir, id)
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var ff foldResultFile
	if err := gob.NewDecoder(bufio.NewReaderSize(f, 1<<20)).Decode(&ff); err != nil {
		return nil, fmt.Errorf("%s: %w (delete it and run its array task again)", path, err)
	}
	r, err := ff.unpack()
	if err != nil {
		return nil, fmt.Errorf("%s: %w (delete it and run its array task again)", path, err)
	}
	return r, nil
}
