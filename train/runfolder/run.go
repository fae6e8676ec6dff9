package runfolder

import (
	"encoding/csv"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"sync"
	"time"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/nn"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/projection"
	"github.com/strialab/stria/train/settings"
)

// Run folder file names.
const (
	FileSettings     = "settings.yaml"        // the resolved settings (also in comparison folders)
	FileManifest     = "model.json"           // Manifest
	FileFilters      = "filters.npy"          // first-layer filters, channels x taps
	FileNeuronScores = "neuron_scores.csv"    // one row per neuron
	FileSummary      = "summary.json"         // Summary
	FileHistory      = "training_history.csv" // one row per epoch
	FileSplit        = "split.json"           // SplitInfo
	FileResume       = "resume_state.gob"     // train.Checkpoint of an unfinished fit
	DirParameters    = "parameters"           // one .npy per parameter array
	DirFigures       = "figures"              // figures and their arrays (stria export)
	FileReport       = "report.html"          // stria report
)

// Array names an .npy file of the run folder and its shape.
type Array struct {
	File  string `json:"file"`
	Shape []int  `json:"shape"`
}

// LayerInfo describes one conv layer in the manifest.
type LayerInfo struct {
	Channels int       `json:"channels"`
	Kernel   int       `json:"kernel"`
	Stride   int       `json:"stride"`
	Border   nn.Border `json:"border"`
	OutLen   int       `json:"out_len"`
}

// Manifest is model.json: what is needed to rebuild the model and read its
// arrays. Created is the only time field.
type Manifest struct {
	Format   string            `json:"format"`
	Stria    string            `json:"stria_version"`
	Go       string            `json:"go_version"`
	Created  string            `json:"created"`
	Seed     uint64            `json:"seed"`
	Axis     AxisInfo          `json:"axis"`
	Layers   []LayerInfo       `json:"layers"`
	Output   nn.Activation     `json:"output"`
	Loss     settings.Loss     `json:"loss"`
	Neurons  int               `json:"neurons"`
	Features int               `json:"features"`
	Arrays   map[string]Array  `json:"arrays"`
	ZScore   bool              `json:"zscore"`
	Names    []string          `json:"neuron_names,omitempty"`
	Trials   map[string]int    `json:"trials"`
	Sources  map[string]string `json:"sources"`
}

// AxisInfo is the stimulus axis as recorded in a run or comparison.
type AxisInfo struct {
	Name     string            `json:"name"`
	Unit     string            `json:"unit"`
	Min      float64           `json:"min"`
	Max      float64           `json:"max"`
	Periodic bool              `json:"periodic"`
	Bins     int               `json:"bins"`
	Encoding settings.Encoding `json:"encoding"`
	Edges    []float64         `json:"bin_edges"`
	Centers  []float64         `json:"bin_centers"`
	// Values is the stimulus value of each condition (train.Prepared.Values):
	// the bin centres on an axis centred on a discrete stimulus, the trials'
	// mean values where bins pool several values. Absent in folders of
	// earlier versions: use ConditionValues.
	Values []float64 `json:"condition_values,omitempty"`
}

// ConditionValues returns Values, or the bin centres when the folder has
// none.
func (a AxisInfo) ConditionValues() []float64 {
	if len(a.Values) == a.Bins && a.Bins > 0 {
		return a.Values
	}
	return a.Centers
}

// DataAxis is the axis as a data.Axis.
func (a AxisInfo) DataAxis() data.Axis {
	return data.Axis{Name: a.Name, Unit: a.Unit, Min: a.Min, Max: a.Max, Periodic: a.Periodic, Bins: a.Bins}
}

// AxisOf records the axis of a prepared recording.
func AxisOf(p *train.Prepared) AxisInfo {
	return AxisInfo{Name: p.Axis.Name, Unit: p.Axis.Unit, Min: p.Axis.Min, Max: p.Axis.Max, Periodic: p.Axis.Periodic,
		Bins: p.NBins, Encoding: p.Cfg.Axis.Encoding, Edges: p.Axis.Edges(), Centers: p.Axis.Centers(), Values: p.Values}
}

// SplitInfo is split.json: the trial indices (0-based) of each part and
// every trial's condition (bin).
type SplitInfo struct {
	Train []int `json:"train"`
	Val   []int `json:"validation"`
	Test  []int `json:"test"`
	Cond  []int `json:"condition"`
}

// Spread is the median and quartiles of a per-neuron column over the
// neurons kept for it; NaN counts the kept neurons where the column is
// undefined, so N + NaN = Kept. KeptBy says which neurons were kept:
// KeptScored ("scored": every neuron not excluded) for the trial-level
// scores and the ceilings, ReliableRule(min) for the ratio scores.
type Spread struct {
	Median Num    `json:"median"`
	Q1     Num    `json:"q1"`
	Q3     Num    `json:"q3"`
	N      int    `json:"n"`
	NaN    int    `json:"nan"`
	Kept   int    `json:"neurons_kept"`
	KeptBy string `json:"kept_by"`
}

// KeptScored is Spread.KeptBy of a summary over every scored neuron.
const KeptScored = "scored"

// ReliableRule is Spread.KeptBy of a summary over the neurons whose
// split-half reliability over all trials is at least min:
// "split_half_all >= 0.3"; KeptScored when min <= -1 (see IsReliable).
func ReliableRule(min float64) string {
	if min <= -1 {
		return KeptScored
	}
	return "split_half_all >= " + strconv.FormatFloat(min, 'g', -1, 64)
}

// IsReliable reports whether a neuron with split-half reliability r (over
// all trials) enters the ratio summaries at threshold min: r >= min, and
// every neuron, NaN included, when min <= -1 (scores.min_reliability: -1
// keeps every neuron; Spearman-Brown steps a negative correlation below -1,
// so r >= -1 alone would not).
func IsReliable(r, min float64) bool { return min <= -1 || r >= min }

// RatioColumns are the score columns divided by a noise-ceiling estimate.
// Their summaries, pair tests and figures use only the reliable neurons
// (split_half_all >= scores.min_reliability); the other columns use every
// scored neuron.
var RatioColumns = []string{"fev", "cc_norm", "spe"}

// IsRatio reports whether a score column is in RatioColumns.
func IsRatio(col string) bool {
	for _, c := range RatioColumns {
		if c == col {
			return true
		}
	}
	return false
}

// SpreadOf converts eval's summary of kept neurons; nanOffset is
// subtracted from its NaN count (neurons excluded from every score are not
// undefined scores).
func SpreadOf(s eval.Summary, nanOffset int) Spread {
	return Spread{Median: Num(s.Median), Q1: Num(s.Q1), Q3: Num(s.Q3), N: s.N, NaN: s.NaN - nanOffset, Kept: s.N + s.NaN - nanOffset}
}

// SpreadOver summarises v over the neurons where keep is true (all when
// keep is nil), recording keptBy.
func SpreadOver(v []float64, keep []bool, keptBy string) Spread {
	sel := v
	if keep != nil {
		sel = make([]float64, 0, len(v))
		for j, x := range v {
			if keep[j] {
				sel = append(sel, x)
			}
		}
	}
	sp := SpreadOf(eval.Summarize(sel), 0)
	sp.KeptBy = keptBy
	return sp
}

// Summary is summary.json.
type Summary struct {
	Neurons  int `json:"neurons"`
	Scored   int `json:"neurons_scored"`
	Excluded int `json:"neurons_excluded"`
	// Ceilings counts the scored neurons by noise-ceiling verdict
	// (eval.Ceiling codes: usable, no_repeats, no_signal_power,
	// signal_not_significant); only "usable" ones have ratio scores.
	Ceilings map[string]int `json:"ceiling_verdicts"`
	// Reliable counts the scored neurons with split_half_all >=
	// MinReliability: the neurons of the ratio scores' summaries.
	Reliable       int               `json:"neurons_reliable"`
	MinReliability float64           `json:"min_reliability"`
	Medians        map[string]Num    `json:"medians"`
	Spread         map[string]Spread `json:"spread"`
	TestTrials     int               `json:"test_trials"`
	BestEpoch      int               `json:"best_epoch"`
	Epochs         int               `json:"epochs"`
	Stop           string            `json:"stop"`
	WallSeconds    float64           `json:"wall_seconds"`
	// Solver is the solver that ran (auto resolved).
	Solver string `json:"solver"`
	// ReadoutL2 is the readout penalty: the config's number, or the one
	// chosen from the data (its spread over neurons when chosen per
	// neuron; the values are in parameters/readout_l2.npy).
	ReadoutL2 PenaltyInfo `json:"readout_l2"`
	Cautions  []string    `json:"cautions"`
	Warnings  []string    `json:"warnings"`
	// Responses says how the fit read the responses: "streamed" (one
	// pass over the .npy file, statistics per condition kept), "loaded"
	// (held in memory, fitted from their statistics per condition) or
	// "trials" (every trial's responses held in memory). See
	// train.Streamable.
	Responses string `json:"responses,omitempty"`
	// State is the state terms' block (state.go); nil without them.
	State *StateSummary `json:"state,omitempty"`
}

// ResponsesPath is Summary.Responses of a prepared recording.
func ResponsesPath(p *train.Prepared) string {
	switch {
	case p.Parts != nil && p.Rec.Y == nil:
		return "streamed"
	case p.Parts != nil:
		return "loaded"
	}
	return "trials"
}

// ScoreColumns are the per-neuron score columns of neuron_scores.csv and
// fold_scores.csv, in order. split_half_test is the split-half reliability
// of the scored (test) trials; the reliability over all trials is the
// separate column split_half_all.
var ScoreColumns = []string{"test_r2", "test_r", "explainable_fraction", "fev", "cc_abs", "cc_max", "cc_norm", "spe", "split_half_test"}

// ScoreValues returns s's values in the order of ScoreColumns.
func ScoreValues(s eval.Scores) []float64 {
	return []float64{s.TestR2, s.TestR, s.ExplainableFraction, s.FEV, s.CCAbs, s.CCMax, s.CCNorm, s.SPE, s.SplitHalf}
}

// CeilingCounts counts verdicts by code over the neurons not excluded
// (every code present, 0 when none).
func CeilingCounts(verdicts []eval.Ceiling, excluded func(j int) bool) map[string]int {
	m := map[string]int{}
	for c := eval.CeilingUsable; c <= eval.CeilingNotSignificant; c++ {
		m[c.String()] = 0
	}
	for j, c := range verdicts {
		if excluded == nil || !excluded(j) {
			m[c.String()]++
		}
	}
	return m
}

// NewSummary builds the summary of per-neuron scores: excluded neurons are
// left out of every summary; the ratio columns (RatioColumns) are
// summarised over the scored neurons with reliability >= minRel only, the
// other columns over every scored neuron. verdicts (the ceilings of
// scores) and reliability (split_half_all) have one value per neuron;
// reliability nil keeps every scored neuron. The caller sets Cautions
// (train.CautionsFor of the scored trials) and the fit's fields.
func NewSummary(scores []eval.Scores, excluded map[int]string, verdicts []eval.Ceiling, reliability []float64, minRel float64) Summary {
	n := len(scores)
	s := Summary{Neurons: n, Excluded: len(excluded), Medians: map[string]Num{}, Spread: map[string]Spread{}, MinReliability: minRel}
	isEx := func(j int) bool { _, ok := excluded[j]; return ok }
	if verdicts != nil {
		s.Ceilings = CeilingCounts(verdicts, isEx)
	}
	scored := make([]bool, n)
	reliable := make([]bool, n)
	for j := range scores {
		if isEx(j) {
			continue
		}
		scored[j] = true
		s.Scored++
		reliable[j] = reliability == nil || IsReliable(reliability[j], minRel)
		if reliable[j] {
			s.Reliable++
		}
	}
	cols := make([][]float64, len(ScoreColumns))
	for k := range cols {
		cols[k] = make([]float64, n)
	}
	for j, sc := range scores {
		for k, v := range ScoreValues(sc) {
			cols[k][j] = v
		}
	}
	// One sort per column (a million values at a million neurons), the
	// columns on all cores; each spread goes to its own place.
	spreads := make([]Spread, len(ScoreColumns)+1)
	var wg sync.WaitGroup
	sem := make(chan struct{}, runtime.GOMAXPROCS(0))
	for k := range spreads {
		if k == len(ScoreColumns) && reliability == nil {
			continue
		}
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer func() { <-sem; wg.Done() }()
			switch {
			case k == len(ScoreColumns):
				spreads[k] = SpreadOver(reliability, scored, KeptScored)
			case IsRatio(ScoreColumns[k]):
				spreads[k] = SpreadOver(cols[k], reliable, ReliableRule(minRel))
			default:
				spreads[k] = SpreadOver(cols[k], scored, KeptScored)
			}
		}()
	}
	wg.Wait()
	for k, name := range ScoreColumns {
		s.Medians[name] = spreads[k].Median
		s.Spread[name] = spreads[k]
	}
	if reliability != nil {
		sp := spreads[len(ScoreColumns)]
		s.Medians[ColSplitHalfAll] = sp.Median
		s.Spread[ColSplitHalfAll] = sp
	}
	return s
}

// Columns of neuron_scores.csv (and fold tables) beside ScoreColumns.
const (
	// ColCeiling is the noise-ceiling verdict on the scored trials, an
	// eval.Ceiling code ("" for an excluded neuron).
	ColCeiling = "ceiling"
	// ColSplitHalfAll is the split-half reliability over all trials of the
	// recording (train.Reliability).
	ColSplitHalfAll = "split_half_all"
)

// NeuronScores is neuron_scores.csv: one row per neuron with its name
// (empty when the recording names none), its scores (NaN for an excluded
// neuron), its noise-ceiling verdict, its split-half reliability over all
// trials and the reason it was excluded (empty when scored).
type NeuronScores struct {
	Names []string
	// Cols[k][j] is column ScoreColumns[k] of neuron j.
	Cols [][]float64
	// Ceiling[j] is neuron j's eval.Ceiling code ("" when excluded).
	Ceiling []string
	// SplitHalfAll[j] is neuron j's reliability over all trials.
	SplitHalfAll []float64
	Excluded     []string
}

// Col returns the column called name, or nil.
func (t *NeuronScores) Col(name string) []float64 {
	if name == ColSplitHalfAll {
		return t.SplitHalfAll
	}
	for k, c := range ScoreColumns {
		if c == name {
			return t.Cols[k]
		}
	}
	return nil
}

// Reliable marks the scored neurons that IsReliable at min and returns
// how many.
func (t *NeuronScores) Reliable(min float64) ([]bool, int) {
	keep := make([]bool, len(t.SplitHalfAll))
	n := 0
	for j, r := range t.SplitHalfAll {
		keep[j] = t.Excluded[j] == "" && IsReliable(r, min)
		if keep[j] {
			n++
		}
	}
	return keep, n
}

// NewNeuronScores builds the table of a fit's scores; verdicts and
// reliability have one value per neuron (nil: "" and NaN).
func NewNeuronScores(names []string, scores []eval.Scores, excluded map[int]string, verdicts []eval.Ceiling, reliability []float64) *NeuronScores {
	n := len(scores)
	t := &NeuronScores{Names: make([]string, n), Cols: make([][]float64, len(ScoreColumns)), Ceiling: make([]string, n), SplitHalfAll: make([]float64, n), Excluded: make([]string, n)}
	for k := range t.Cols {
		t.Cols[k] = make([]float64, n)
	}
	for j, sc := range scores {
		if names != nil {
			t.Names[j] = names[j]
		}
		why, ex := excluded[j]
		t.Excluded[j] = why
		for k, v := range ScoreValues(sc) {
			if ex {
				v = math.NaN()
			}
			t.Cols[k][j] = v
		}
		t.SplitHalfAll[j] = math.NaN()
		if reliability != nil && !ex {
			t.SplitHalfAll[j] = reliability[j]
		}
		if verdicts != nil && !ex {
			t.Ceiling[j] = verdicts[j].String()
		}
	}
	return t
}

// WriteNeuronScores writes neuron_scores.csv into dir (by blocks of rows
// on all cores: WriteCSVRows).
func WriteNeuronScores(dir string, t *NeuronScores) error {
	header := append(append([]string{"neuron", "name"}, ScoreColumns...), ColCeiling, ColSplitHalfAll, "excluded")
	return WriteCSVRows(filepath.Join(dir, FileNeuronScores), header, len(t.Names), func(row []string, j int) {
		row[0], row[1] = strconv.Itoa(j), t.Names[j]
		for k := range ScoreColumns {
			row[2+k] = FormatScore(t.Cols[k][j])
		}
		row[len(row)-3], row[len(row)-2] = t.Ceiling[j], FormatScore(t.SplitHalfAll[j])
		row[len(row)-1] = t.Excluded[j]
	})
}

// ReadNeuronScores reads neuron_scores.csv of dir; n is the number of
// neurons expected (from model.json), or -1 for any.
func ReadNeuronScores(dir string, n int) (*NeuronScores, error) {
	path := filepath.Join(dir, FileNeuronScores)
	tb, err := ReadColumns(path)
	if err != nil {
		return nil, err
	}
	if n >= 0 && len(tb.Rows) != n {
		return nil, fmt.Errorf("%s: %d neuron rows, want %d (%s)", path, len(tb.Rows), n, FileManifest)
	}
	n = len(tb.Rows)
	kc, err := tb.Cols(ScoreColumns...)
	if err != nil {
		return nil, err
	}
	fixed, err := tb.Cols("neuron", "name", "excluded", ColCeiling, ColSplitHalfAll)
	if err != nil {
		return nil, err
	}
	t := &NeuronScores{Names: make([]string, n), Cols: make([][]float64, len(ScoreColumns)), Ceiling: make([]string, n), SplitHalfAll: make([]float64, n), Excluded: make([]string, n)}
	for k := range t.Cols {
		t.Cols[k] = make([]float64, n)
	}
	for i, r := range tb.Rows {
		j, err := tb.Int(i, fixed[0])
		if err != nil {
			return nil, err
		}
		if j != i {
			return nil, fmt.Errorf("%s: line %d: neuron %d, want %d (rows in neuron order)", path, i+2, j, i)
		}
		t.Names[i], t.Excluded[i] = r[fixed[1]], r[fixed[2]]
		if t.Ceiling[i], err = CeilingCode(tb, i, fixed[3]); err != nil {
			return nil, err
		}
		if t.SplitHalfAll[i], err = tb.Float(i, fixed[4]); err != nil {
			return nil, err
		}
		for q, k := range kc {
			if t.Cols[q][i], err = tb.Float(i, k); err != nil {
				return nil, err
			}
		}
	}
	return t, nil
}

// historyHeader is the header of training_history.csv.
var historyHeader = []string{"epoch", "train_loss", "val_loss", "val_r2", "seconds"}

// WriteHistory writes training_history.csv into dir, one row per epoch.
func WriteHistory(dir string, log []train.EpochLog) error {
	path := filepath.Join(dir, FileHistory)
	return WriteCSV(path, historyHeader, func(cw *csv.Writer) error {
		for _, e := range log {
			err := cw.Write([]string{strconv.Itoa(e.Epoch), strconv.FormatFloat(e.TrainLoss, 'g', 10, 64), strconv.FormatFloat(e.ValLoss, 'g', 10, 64),
				strconv.FormatFloat(e.ValR2, 'g', 6, 64), strconv.FormatFloat(e.Seconds, 'f', 4, 64)})
			if err != nil {
				return err
			}
		}
		return nil
	})
}

// ReadHistory reads training_history.csv of dir.
func ReadHistory(dir string) ([]train.EpochLog, error) {
	path := filepath.Join(dir, FileHistory)
	tb, err := ReadColumns(path)
	if err != nil {
		return nil, err
	}
	k, err := tb.Cols(historyHeader...)
	if err != nil {
		return nil, err
	}
	log := make([]train.EpochLog, len(tb.Rows))
	for i := range tb.Rows {
		var v [5]float64
		for q := 1; q < 5; q++ {
			if v[q], err = tb.Float(i, k[q]); err != nil {
				return nil, err
			}
		}
		ep, err := tb.Int(i, k[0])
		if err != nil {
			return nil, err
		}
		log[i] = train.EpochLog{Epoch: ep, TrainLoss: v[1], ValLoss: v[2], ValR2: v[3], Seconds: v[4]}
	}
	return log, nil
}

// WriteModel writes the part of the run folder that does not depend on the
// scores: the resolved settings, the manifest, the parameters, the
// filters, the split and the training history. It reads nothing the
// scoring changes, so it may run while the test trials are scored.
func WriteModel(dir string, p *train.Prepared, f *train.Fitted) error {
	if err := mkdir(filepath.Join(dir, DirParameters)); err != nil {
		return err
	}
	cfgYAML, err := p.Cfg.Marshal()
	if err != nil {
		return err
	}
	if err := WriteBytes(filepath.Join(dir, FileSettings), cfgYAML); err != nil {
		return err
	}
	net := f.Net
	N := p.Neurons() // net has one neuron when f.Weights is set
	m := Manifest{
		Format: FormatRun, Stria: Version, Go: runtime.Version(), Created: time.Now().UTC().Format(time.RFC3339),
		Seed: p.Cfg.Seed, Output: p.Cfg.Model.Output, Loss: p.Cfg.Model.Loss,
		Neurons: N, Features: net.Features(), Arrays: map[string]Array{}, ZScore: p.Norm != nil,
		Names:   p.Rec.Neurons,
		Trials:  map[string]int{"train": len(p.Train), "validation": len(p.Val), "test": len(p.Test)},
		Sources: map[string]string{"responses": p.Rec.Source.Responses, "stimulus": p.Rec.Source.Stimulus},
		Axis:    AxisOf(p),
	}
	in := net.In
	for i, c := range net.Convs {
		m.Layers = append(m.Layers, LayerInfo{Channels: c.Out, Kernel: c.K, Stride: c.Stride, Border: c.Border, OutLen: net.OutLen(i)})
		if err := saveArray(dir, &m, fmt.Sprintf("conv%d_weight", i), []int{c.Out, in, c.K}, net.ConvW(i)); err != nil {
			return err
		}
		if err := saveArray(dir, &m, fmt.Sprintf("conv%d_bias", i), []int{c.Out}, net.ConvB(i)); err != nil {
			return err
		}
		in = c.Out
	}
	if err := saveReadout(dir, &m, N, f); err != nil {
		return err
	}
	if err := saveArray(dir, &m, "readout_bias", []int{N}, f.ReadoutBias()); err != nil {
		return err
	}
	if p.Norm != nil {
		if err := saveArray(dir, &m, "norm_mean", []int{N}, p.Norm.Mean); err != nil {
			return err
		}
		if err := saveArray(dir, &m, "norm_scale", []int{N}, p.Norm.Scale); err != nil {
			return err
		}
	}
	if f.ReadoutL2 != nil {
		if err := saveArray(dir, &m, "readout_l2", []int{N}, f.ReadoutL2); err != nil {
			return err
		}
	}
	c0 := net.Convs[0]
	if err := format.WriteNPY64(filepath.Join(dir, FileFilters), []int{c0.Out * net.In, c0.K}, net.ConvW(0)); err != nil {
		return err
	}
	if err := WriteJSON(filepath.Join(dir, FileManifest), m); err != nil {
		return err
	}
	if err := WriteJSON(filepath.Join(dir, FileSplit), SplitInfo{Train: p.Train, Val: p.Val, Test: p.Test, Cond: p.Cond}); err != nil {
		return err
	}
	return WriteHistory(dir, f.Log)
}

// saveReadout writes the readout weights of f's N neurons into
// parameters/: readout_weight.npy (N x features), or, for a readout in
// factored form (f.Readout), readout_coef.npy (N x rank) and
// readout_basis.npy (rank x features), whose product is the weights
// (LoadModel multiplies them out).
func saveReadout(dir string, m *Manifest, N int, f *train.Fitted) error {
	F := f.Net.Features()
	name, cols, rows := "readout_weight", F, f.ReadoutWeights
	if r := f.Readout; r != nil {
		if r.Features != F || len(r.Basis) != r.Rank*F {
			panic(fmt.Sprintf("runfolder: a readout of rank %d, %d features and %d basis values for a net of %d features", r.Rank, r.Features, len(r.Basis), F))
		}
		if err := saveArray(dir, m, "readout_basis", []int{r.Rank, F}, r.Basis); err != nil {
			return err
		}
		name, cols, rows = "readout_coef", r.Rank, r.Coef
	}
	rel := filepath.Join(DirParameters, name+".npy")
	m.Arrays[name] = Array{File: filepath.ToSlash(rel), Shape: []int{N, cols}}
	return format.WriteNPY64Rows(filepath.Join(dir, rel), N, cols, rows)
}

// WriteResults writes neuron_scores.csv and summary.json from the scores of
// the test trials (gated by train.Ceilings, with every neuron's
// train.Reliability); wall is the time the fit took up to the scores. It
// does not finish the folder: call Finish after it.
func WriteResults(dir string, p *train.Prepared, f *train.Fitted, scores []eval.Scores, wall time.Duration) (*Summary, error) {
	ex := train.ExcludedNeurons(p)
	verdicts := train.Ceilings(p, scores)
	rel := train.Reliability(p)
	// The summary (sorts) is formed while the table is written; both only
	// read the scores.
	sums := make(chan Summary, 1)
	go func() { sums <- NewSummary(scores, ex, verdicts, rel, p.Cfg.Scores.MinReliability) }()
	err := WriteNeuronScores(dir, NewNeuronScores(p.Rec.Neurons, scores, ex, verdicts, rel))
	sum := <-sums
	if err != nil {
		return nil, err
	}
	sum.Cautions = train.CautionsFor(p.TrialsPerCondition(p.Test))
	sum.TestTrials = len(p.Test)
	sum.BestEpoch, sum.Epochs, sum.Stop = f.BestEpoch, len(f.Log), f.Stop
	sum.WallSeconds = wall.Seconds()
	sum.Solver = f.Solver.String()
	sum.ReadoutL2 = penaltyInfo(p.Cfg.Model.ReadoutL2, f.ReadoutL2)
	sum.Warnings = p.Report.Warnings
	sum.Responses = ResponsesPath(p)
	if err := WriteJSON(filepath.Join(dir, FileSummary), sum); err != nil {
		return nil, err
	}
	return &sum, nil
}

// PenaltyInfo records the readout penalty of a fit in summary.json.
type PenaltyInfo struct {
	// Setting is the config's model.readout_l2: auto or a number.
	Setting string `json:"setting"`
	// Chosen is the penalty used (the median over neurons when chosen per
	// neuron); Q1 and Q3 its quartiles over neurons.
	Chosen Num `json:"chosen"`
	Q1     Num `json:"q1"`
	Q3     Num `json:"q3"`
}

func penaltyInfo(setting settings.Penalty, chosen []float64) PenaltyInfo {
	pi := PenaltyInfo{Setting: setting.String(), Chosen: Num(setting.Value), Q1: Num(setting.Value), Q3: Num(setting.Value)}
	if chosen != nil {
		s := eval.Summarize(chosen)
		pi.Chosen, pi.Q1, pi.Q3 = Num(s.Median), Num(s.Q1), Num(s.Q3)
	}
	return pi
}

func saveArray(dir string, m *Manifest, name string, shape []int, v []float64) error {
	rel := filepath.Join(DirParameters, name+".npy")
	m.Arrays[name] = Array{File: filepath.ToSlash(rel), Shape: shape}
	return format.WriteNPY64(filepath.Join(dir, rel), shape, v)
}

// ReadManifest reads model.json.
func ReadManifest(dir string) (*Manifest, error) {
	path := filepath.Join(dir, FileManifest)
	var m Manifest
	if err := ReadJSON(path, &m); err != nil {
		if errNotExist(err) {
			return nil, fmt.Errorf("%s is not a stria run folder: %w", dir, err)
		}
		return nil, err
	}
	if m.Format != FormatRun {
		return nil, fmt.Errorf("%s: format %q, want %s", path, m.Format, FormatRun)
	}
	return &m, nil
}

// ReadSummary reads summary.json.
func ReadSummary(dir string) (*Summary, error) {
	var s Summary
	if err := ReadJSON(filepath.Join(dir, FileSummary), &s); err != nil {
		return nil, err
	}
	return &s, nil
}

// ReadSplit reads split.json.
func ReadSplit(dir string) (*SplitInfo, error) {
	var s SplitInfo
	if err := ReadJSON(filepath.Join(dir, FileSplit), &s); err != nil {
		return nil, err
	}
	return &s, nil
}

// ReadSettings returns the bytes of settings.yaml.
func ReadSettings(dir string) ([]byte, error) {
	return os.ReadFile(filepath.Join(dir, FileSettings))
}

// LoadSettings reads and checks settings.yaml of a run or comparison
// folder; relative data paths in it are relative to the folder.
func LoadSettings(dir string) (*settings.Config, error) {
	return settings.LoadConfig(filepath.Join(dir, FileSettings))
}

// Model is a trained encoder loaded back from a run folder, with its
// manifest.
type Model struct {
	Dir      string
	Manifest Manifest
	*train.Model
}

// LoadModel reads model.json and the parameters of a finished run folder.
// It refuses a folder without complete.json.
func LoadModel(dir string) (*Model, error) {
	mf, err := ReadManifest(dir)
	if err != nil {
		return nil, err
	}
	if err := CheckComplete(dir, KindRun); err != nil {
		return nil, err
	}
	path := filepath.Join(dir, FileManifest)
	shape := nn.Shape{In: 1, Length: mf.Axis.Bins, Neurons: mf.Neurons}
	// The words of borders, output and encoding were checked when
	// model.json was read (their UnmarshalText).
	for i, l := range mf.Layers {
		if l.Channels < 1 || l.Kernel < 1 || l.Stride < 1 {
			return nil, fmt.Errorf("%s: layers[%d] has a bad shape", path, i)
		}
		shape.Convs = append(shape.Convs, nn.ConvSpec{Out: l.Channels, K: l.Kernel, Stride: l.Stride, Border: l.Border})
	}
	shape.Output = mf.Output
	if len(shape.Convs) == 0 || mf.Axis.Bins < 1 || mf.Neurons < 1 {
		return nil, fmt.Errorf("%s: no layers, bins or neurons", path)
	}
	net := nn.NewNet(shape)
	m := &Model{Dir: dir, Manifest: *mf, Model: &train.Model{Net: net, Axis: mf.Axis.DataAxis(), Soft: mf.Axis.Encoding == settings.Soft}}
	read := func(name string, want int) ([]float64, error) {
		a, ok := mf.Arrays[name]
		if !ok {
			return nil, fmt.Errorf("%s: no array %q", path, name)
		}
		file := filepath.Join(dir, filepath.FromSlash(a.File))
		_, v, err := format.ReadArray(file)
		if err != nil {
			return nil, err
		}
		if len(v) != want {
			return nil, fmt.Errorf("%s: %d values, want %d", file, len(v), want)
		}
		return v, nil
	}
	// The parameters, layer by layer, into nn's flat layout.
	type part struct {
		name string
		dst  []float64
	}
	var parts []part
	for i := range net.Convs {
		parts = append(parts, part{fmt.Sprintf("conv%d_weight", i), net.ConvW(i)}, part{fmt.Sprintf("conv%d_bias", i), net.ConvB(i)})
	}
	parts = append(parts, part{"readout_bias", net.ReadB()})
	if _, ok := mf.Arrays["readout_coef"]; ok {
		// The factored readout (saveReadout), multiplied out.
		F := net.Features()
		rank := 0
		if b, ok := mf.Arrays["readout_basis"]; ok && len(b.Shape) == 2 && b.Shape[1] == F {
			rank = b.Shape[0]
		}
		if rank < 1 {
			return nil, fmt.Errorf("%s: readout_coef without a readout_basis of rank x %d", path, F)
		}
		basis, err := read("readout_basis", rank*F)
		if err != nil {
			return nil, err
		}
		coef, err := read("readout_coef", mf.Neurons*rank)
		if err != nil {
			return nil, err
		}
		projection.Expand(net.ReadW(), coef, basis, mf.Neurons, rank, F)
	} else {
		parts = append(parts, part{"readout_weight", net.ReadW()})
	}
	for _, pt := range parts {
		v, err := read(pt.name, len(pt.dst))
		if err != nil {
			return nil, err
		}
		copy(pt.dst, v)
	}
	if mf.ZScore {
		if m.Mean, err = read("norm_mean", mf.Neurons); err != nil {
			return nil, err
		}
		if m.Scale, err = read("norm_scale", mf.Neurons); err != nil {
			return nil, err
		}
	}
	return m, nil
}

// RemoveResumeState deletes resume_state.gob once the fit has finished.
func RemoveResumeState(dir string) error {
	err := os.Remove(filepath.Join(dir, FileResume))
	if err != nil && !errNotExist(err) {
		return err
	}
	return nil
}

// CeilingCode reads row i's column k as an eval.Ceiling code, or "".
func CeilingCode(tb *Table, i, k int) (string, error) {
	v := tb.Rows[i][k]
	if v == "" {
		return v, nil
	}
	for c := eval.CeilingUsable; c <= eval.CeilingNotSignificant; c++ {
		if v == c.String() {
			return v, nil
		}
	}
	return "", fmt.Errorf("%s: line %d, column %s: %q is not a noise-ceiling verdict (usable, no_repeats, no_signal_power, signal_not_significant)", tb.Path, i+2, tb.header[k], v)
}
