package export

import (
	"fmt"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval/figure"
	"github.com/strialab/stria/eval/report"
	"github.com/strialab/stria/eval/tuning"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// Options are the settings of Folder.
type Options struct {
	// Out is the output folder; empty: FOLDER/figures.
	Out string
	// Neurons selects the neurons that get a tuning figure (run folders
	// only); see SelectNeurons. Empty: DefaultNeurons.
	Neurons string
	// Compare is a comparison folder of the same recording whose baseline
	// curves are drawn in the tuning figures (run folders only; optional).
	Compare string
}

// Figure is one figure written by Folder.
type Figure struct {
	Name    string   // file name without extension, inside the output folder
	Caption string   // what it shows, for the report
	Arrays  []string // files (inside the output folder, or the source folder) it is drawn from
	SVG     []byte   // the SVG written, for the report
}

// Exported lists what Folder wrote.
type Exported struct {
	Folder  string // the run or comparison folder
	Kind    string // runfolder.KindRun or runfolder.KindComparison
	Dir     string // the output folder
	Figures []Figure
	Tables  []report.Table // tables written (as CSV and markdown), for the report
	// Notes say what was skipped and why (e.g. the recording could not be
	// read, so the tuning figures are missing).
	Notes []string
}

// Folder writes the figures and arrays of a finished run or comparison
// folder into opt.Out (default FOLDER/figures). Everything is read and
// checked before the first file is written, so a refused folder leaves no
// output. Every figure is drawn only from arrays written next to it (or
// from a file of the source folder that its Figure names), and drawing is
// deterministic: the same folder, wherever it lies, gives byte-identical
// SVG files.
func Folder(dir string, opt Options) (*Exported, error) {
	kind, err := runfolder.Open(dir)
	if err != nil {
		return nil, err
	}
	out := opt.Out
	if out == "" {
		out = filepath.Join(dir, runfolder.DirFigures)
	}
	switch kind {
	case runfolder.KindMany:
		return nil, fmt.Errorf("%s: a comparison over several recordings: export each recording's folder inside it (or use stria report on it)", dir)
	case runfolder.KindComparison:
		if opt.Compare != "" {
			return nil, fmt.Errorf("%s: a comparison folder; --compare applies to run folders only", dir)
		}
		if opt.Neurons != "" {
			return nil, fmt.Errorf("%s: a comparison folder; --neurons applies to run folders only", dir)
		}
		return exportComparison(dir, out)
	}
	return exportRun(dir, out, opt)
}

// add writes a rendered figure as name.svg and name.png into ex.Dir and
// lists it.
func (ex *Exported) add(name string, im *figure.Image, err error, caption string, arrays ...string) error {
	if err != nil {
		return fmt.Errorf("%s: %w", filepath.Join(ex.Dir, name), err)
	}
	if err := runfolder.WriteBytes(filepath.Join(ex.Dir, name+".svg"), im.SVG); err != nil {
		return err
	}
	if err := runfolder.WriteBytes(filepath.Join(ex.Dir, name+".png"), im.PNG); err != nil {
		return err
	}
	ex.Figures = append(ex.Figures, Figure{Name: name, Caption: caption, Arrays: arrays, SVG: im.SVG})
	return nil
}

// figAxis is the figure package's description of a run's axis.
func figAxis(a runfolder.AxisInfo) figure.AxisLabels {
	return figure.AxisLabels{Label: a.Name, Unit: a.Unit, Periodic: a.Periodic, Period: a.Max - a.Min}
}

// condData is the recording's condition means and standard errors, B x N.
type condData struct {
	Mean, SEM []float64
	Trials    int
}

// loadCondData recomputes the condition means of the recording a run was
// fitted on, binned as split.json records. The error says why it failed.
func loadCondData(dir string, m *runfolder.Manifest) (*condData, error) {
	cfg, err := runfolder.LoadSettings(dir)
	if err != nil {
		return nil, err
	}
	rec, err := data.Load(cfg.Source())
	if err != nil {
		return nil, err
	}
	sp, err := runfolder.ReadSplit(dir)
	if err != nil {
		return nil, err
	}
	splitPath := filepath.Join(dir, runfolder.FileSplit)
	nb, n := m.Axis.Bins, m.Neurons
	if rec.Y.Cols != n {
		return nil, fmt.Errorf("%s: %d neurons, but the run has %d", rec.Source.Responses, rec.Y.Cols, n)
	}
	if len(sp.Cond) != rec.Y.Rows {
		return nil, fmt.Errorf("%s: %d trials, but %s bins %d", rec.Source.Responses, rec.Y.Rows, splitPath, len(sp.Cond))
	}
	for t, c := range sp.Cond {
		if c < 0 || c >= nb {
			return nil, fmt.Errorf("%s: condition[%d] = %d, want 0..%d", splitPath, t, c, nb-1)
		}
	}
	all := make([]int, rec.Y.Rows)
	for i := range all {
		all[i] = i
	}
	// Under the fault guard: a mapped recording truncated meanwhile gives
	// an error naming it.
	var st *condstats.Stats
	if err := format.Guard(func() { st = condstats.New(rec.Y, sp.Cond, all, nb) }); err != nil {
		return nil, err
	}
	cd := &condData{Mean: st.Mean(nil), SEM: st.Var(nil), Trials: rec.Y.Rows}
	for c := 0; c < nb; c++ {
		for j := 0; j < n; j++ {
			cd.SEM[c*n+j] = math.Sqrt(cd.SEM[c*n+j] / float64(st.Count[c]))
		}
	}
	return cd, nil
}

// baselineCurves reads the fold-averaged curves (B x N) of the baselines of
// a finished comparison folder, for a run with nb bins and n neurons.
func baselineCurves(cmp string, nb, n int) (names []string, curves [][]float64, err error) {
	kind, err := runfolder.Open(cmp)
	if err != nil {
		return nil, nil, err
	}
	if kind != runfolder.KindComparison {
		return nil, nil, fmt.Errorf("--compare %s: a %s folder, want the comparison folder of one recording", cmp, kind)
	}
	ci, err := comparefolder.ReadComparisonInfo(cmp)
	if err != nil {
		return nil, nil, err
	}
	if ci.Neurons != n || ci.Axis.Bins != nb {
		return nil, nil, fmt.Errorf("%s: %d neurons and %d bins, but the run has %d and %d", filepath.Join(cmp, runfolder.FileComparison), ci.Neurons, ci.Axis.Bins, n, nb)
	}
	enc := setOf(ci.Encoders)
	for _, m := range ci.Models {
		if enc[m] {
			continue
		}
		c, err := comparefolder.ReadCurves(cmp, m, nb, n)
		if err != nil {
			return nil, nil, err
		}
		names = append(names, m)
		curves = append(curves, c)
	}
	return names, curves, nil
}

func setOf(s []string) map[string]bool {
	m := map[string]bool{}
	for _, v := range s {
		m[v] = true
	}
	return m
}

// exportRun writes the figures and arrays of a run folder.
func exportRun(dir, out string, opt Options) (*Exported, error) {
	mod, err := runfolder.LoadModel(dir)
	if err != nil {
		return nil, err
	}
	mf := &mod.Manifest
	nb, n := mf.Axis.Bins, mf.Neurons
	if len(mf.Axis.Centers) != nb {
		return nil, fmt.Errorf("%s: %d bin centres, want %d", filepath.Join(dir, runfolder.FileManifest), len(mf.Axis.Centers), nb)
	}
	met, err := runfolder.ReadNeuronScores(dir, n)
	if err != nil {
		return nil, err
	}
	sum, err := runfolder.ReadSummary(dir)
	if err != nil {
		return nil, err
	}
	values := mf.Axis.ConditionValues()
	sel := opt.Neurons
	if sel == "" {
		sel = DefaultNeurons
	}
	chosen, err := SelectNeurons(sel, met.Col("test_r2"), mf.Seed)
	if err != nil {
		return nil, fmt.Errorf("--neurons: %w", err)
	}
	var blNames []string
	var blCurves [][]float64
	if opt.Compare != "" {
		if blNames, blCurves, err = baselineCurves(opt.Compare, nb, n); err != nil {
			return nil, err
		}
	}
	ex := &Exported{Folder: dir, Kind: runfolder.KindRun, Dir: out}
	cd, err := loadCondData(dir, mf)
	if err != nil {
		ex.Notes = append(ex.Notes, fmt.Sprintf("Tuning figures skipped: the recording could not be read (%v). Filters, score histograms and preferred stimuli do not need it.", err))
		cd = nil
	}
	pm, err := mod.Predict(values)
	if err != nil {
		return nil, fmt.Errorf("%s: predicting at the condition values: %w", dir, err)
	}
	pred := make([]float64, len(pm.Data)) // B x N, recording units
	for i, v := range pm.Data {
		pred[i] = float64(v)
	}

	// Everything is read: write.
	if err := runfolder.MakeFolder(out); err != nil {
		return nil, err
	}
	ax := figAxis(mf.Axis)
	unit := mf.Axis.Unit
	net := mod.Net
	c0 := net.Convs[0]
	chans, k := c0.Out*net.In, c0.K
	binW := (mf.Axis.Max - mf.Axis.Min) / float64(nb)
	filt := net.ConvW(0)
	offs := figure.TapOffsets(k, binW)
	hdr := []string{"offset"}
	if unit != "" {
		hdr[0] = "offset_" + unit
	}
	cols := [][]float64{offs}
	for c := 0; c < chans; c++ {
		hdr = append(hdr, "ch"+strconv.Itoa(c+1))
		cols = append(cols, filt[c*k:(c+1)*k])
	}
	if err := writeColumns(filepath.Join(out, "filters.csv"), hdr, cols); err != nil {
		return nil, err
	}
	if err := format.WriteNPY64(filepath.Join(out, "filters.npy"), []int{chans, k}, filt); err != nil {
		return nil, err
	}
	im, err := figure.Filters(filt, chans, k, binW, ax)
	if err := ex.add("filters", im, err, fmt.Sprintf("Learned first-layer filters: %d channels, %d taps, against the offset of the input bin each tap reads (%g %s bins; 0 is the output bin).", chans, k, binW, unit),
		"filters.csv", "filters.npy"); err != nil {
		return nil, err
	}

	last := len(net.Convs) - 1
	lc, lp := net.Convs[last].Out, net.OutLen(last)
	if err := format.WriteNPY64(filepath.Join(out, "readout_weights.npy"), []int{n, lc, lp}, net.ReadW()); err != nil {
		return nil, err
	}

	// Tuning of the chosen neurons.
	if cd != nil {
		for _, j := range chosen {
			mean, sem, enc := column(cd.Mean, nb, n, j), column(cd.SEM, nb, n, j), column(pred, nb, n, j)
			curves := []figure.Curve{{Name: "encoder", X: values, Y: enc}}
			h := []string{"value", "data_mean", "data_sem", "encoder"}
			cols := [][]float64{values, mean, sem, enc}
			for i, bn := range blNames {
				y := column(blCurves[i], nb, n, j)
				curves = append(curves, figure.Curve{Name: bn, X: values, Y: y})
				h = append(h, bn)
				cols = append(cols, y)
			}
			name := fmt.Sprintf("tuning_n%d", j)
			if err := writeColumns(filepath.Join(out, name+".csv"), h, cols); err != nil {
				return nil, err
			}
			what := "the encoder's prediction at each condition's stimulus value"
			if len(blNames) > 0 {
				what += " and the baselines' fold-averaged curves from " + opt.Compare
			}
			im, err := figure.Tuning(values, mean, sem, curves, ax, "response (recording units)")
			err = ex.add(name, im, err, fmt.Sprintf("Neuron %d (0-based; test_r2 %.3f, cc_norm %.3f): condition means of all %d trials ± standard error, with %s. The encoder was trained on most of these trials.",
				j, met.Col("test_r2")[j], met.Col("cc_norm")[j], cd.Trials, what), name+".csv")
			if err != nil {
				return nil, err
			}
		}
	}

	// Histograms of the ratio scores, over the reliable neurons, in a
	// fixed range.
	keep, kept := met.Reliable(sum.MinReliability)
	for _, col := range runfolder.RatioColumns {
		name := "hist_" + col
		v := met.Col(col)
		if err := writeColumns(filepath.Join(out, name+".csv"), []string{"neuron", col, runfolder.ColSplitHalfAll, "kept"}, [][]float64{seq(n), v, met.SplitHalfAll, boolCol(keep)}); err != nil {
			return nil, err
		}
		im, err := figure.HistogramIn(selected(v, keep), col, 0, figure.RatioRange)
		err = ex.add(name, im, err, fmt.Sprintf("Distribution of %s over the %d of %d neurons with split-half reliability (all trials) >= %g, on the held-out test trials (%s; column kept). Neurons where it is undefined (noise ceiling not usable: column ceiling of %s) are counted in the legend, as are values outside %g to %g.",
			col, kept, n, sum.MinReliability, name+".csv", runfolder.FileNeuronScores, figure.RatioRange.Lo, figure.RatioRange.Hi), name+".csv")
		if err != nil {
			return nil, err
		}
	}

	if err := exportState(dir, out, ex, sum, values, chosen, ax); err != nil {
		return nil, err
	}

	// Preferred stimuli from the noise-free encoder curves.
	period := 0.0
	if mf.Axis.Periodic {
		period = mf.Axis.Max - mf.Axis.Min
	}
	pref := make([]float64, n)
	r := make([]float64, nb)
	for j := 0; j < n; j++ {
		if met.Excluded[j] != "" {
			pref[j] = math.NaN() // not scored, not described
			continue
		}
		for b := 0; b < nb; b++ {
			r[b] = pred[b*n+j]
		}
		pref[j] = tuning.Describe(r, values, period).Preferred
	}
	if err := format.WriteNPY64(filepath.Join(out, "encoder_curves.npy"), []int{nb, n}, pred); err != nil {
		return nil, err
	}
	if err := writeColumns(filepath.Join(out, "preferred.csv"), []string{"neuron", "preferred"}, [][]float64{seq(n), pref}); err != nil {
		return nil, err
	}
	how := "the condition value of the peak"
	if period > 0 {
		how = "the vector average over the conditions' stimulus values"
	}
	im, err = figure.Preferred(pref, ax, 0)
	err = ex.add("preferred", im, err, fmt.Sprintf("Preferred stimuli of the population: for each neuron, %s of the encoder's noise-free curve (encoder_curves.npy, conditions x neurons). Excluded neurons and flat curves have none (NaN, counted in the legend).", how),
		"preferred.csv", "encoder_curves.npy")
	if err != nil {
		return nil, err
	}
	return ex, nil
}

// column returns neuron j's values of a B x N array.
func column(a []float64, nb, n, j int) []float64 {
	c := make([]float64, nb)
	for b := range c {
		c[b] = a[b*n+j]
	}
	return c
}

func seq(n int) []float64 {
	s := make([]float64, n)
	for i := range s {
		s[i] = float64(i)
	}
	return s
}

// writeColumns writes equally long columns of numbers under a header as a
// CSV table (shortest form that reads back exactly; NaN as NaN).
func writeColumns(path string, header []string, cols [][]float64) error {
	rows := make([][]string, len(cols[0]))
	for i := range rows {
		rows[i] = make([]string, len(cols))
		for k, c := range cols {
			rows[i][k] = strconv.FormatFloat(c[i], 'g', -1, 64)
		}
	}
	return runfolder.WriteTable(path, header, rows)
}

// exportComparison writes the figures and tables of a comparison folder.
func exportComparison(dir, out string) (*Exported, error) {
	ci, err := comparefolder.ReadComparisonInfo(dir)
	if err != nil {
		return nil, err
	}
	n := ci.Neurons
	metrics := []string{"cc_norm", "test_r2", "explainable_fraction", "cc_max"}
	fa, err := comparefolder.ReadFoldAverages(dir, ci.Models, n)
	if err != nil {
		return nil, err
	}
	avg := fa.Scores
	// The ratio metrics' figures show the reliable neurons only.
	keep, kept := make([]bool, n), 0
	for j, r := range fa.SplitHalfAll {
		keep[j] = fa.Ceiling[j] != "" && runfolder.IsReliable(r, ci.MinReliability)
		if keep[j] {
			kept++
		}
	}
	shown := func(m, met string) []float64 {
		if runfolder.IsRatio(met) {
			return masked(avg[m][met], keep)
		}
		return avg[m][met]
	}
	whom := func(met string) string {
		if runfolder.IsRatio(met) {
			return fmt.Sprintf(" Only the %d of %d neurons with split-half reliability (all trials) >= %g are drawn; each neuron's score averages the folds where its noise ceiling is usable (fold_averages.csv: ceiling, ceiling_folds).", kept, n, ci.MinReliability)
		}
		return ""
	}
	enc := setOf(ci.Encoders)
	var encoders, baselines []string
	plain, variants := stateVariants(ci.Models)
	for _, m := range plain {
		if enc[m] {
			encoders = append(encoders, m)
		} else {
			baselines = append(baselines, m)
		}
	}
	if len(encoders) == 0 || len(baselines) == 0 {
		// Without the split, compare every pair against the first model.
		encoders, baselines = plain[:1], plain[1:]
	}
	ex := &Exported{Folder: dir, Kind: runfolder.KindComparison, Dir: out}
	if err := runfolder.MakeFolder(out); err != nil {
		return nil, err
	}
	// Fold-averaged per-neuron scores, one file per metric.
	// kept: 1 for the neurons the metric's summary and tests use (the
	// reliable ones for a ratio metric, the scored ones otherwise).
	scoredCol := make([]float64, n)
	for j, v := range fa.Ceiling {
		if v != "" {
			scoredCol[j] = 1
		}
	}
	for _, met := range metrics {
		cols := [][]float64{seq(n)}
		for _, m := range ci.Models {
			cols = append(cols, avg[m][met])
		}
		k := scoredCol
		if runfolder.IsRatio(met) {
			k = boolCol(keep)
		}
		cols = append(cols, fa.SplitHalfAll, k)
		if err := writeColumns(filepath.Join(out, "foldavg_"+met+".csv"), append(append([]string{"neuron"}, ci.Models...), runfolder.ColSplitHalfAll, "kept"), cols); err != nil {
			return nil, err
		}
	}
	for _, met := range []string{"cc_norm", "test_r2"} {
		for _, e := range encoders {
			for _, b := range baselines {
				name := "scatter_" + met + "_" + comparefolder.FileName(b) + "_vs_" + comparefolder.FileName(e)
				im, err := figure.Scatter(shown(b, met), shown(e, met), b, e, met)
				err = ex.add(name, im, err, fmt.Sprintf("Per-neuron %s averaged over %d folds: %s (x) against %s (y). Points above the diagonal are neurons that %s predicts better.%s", met, ci.Folds, b, e, e, whom(met)),
					"foldavg_"+met+".csv")
				if err != nil {
					return nil, err
				}
			}
		}
	}
	for _, v := range variants {
		base, m := v[0], v[1]
		name := "scatter_test_r2_" + comparefolder.FileName(base) + "_vs_" + comparefolder.FileName(m)
		im, err := figure.Scatter(shown(base, "test_r2"), shown(m, "test_r2"), base, m, "test_r2")
		err = ex.add(name, im, err, fmt.Sprintf("Per-neuron test_r2 averaged over %d folds: %s (x) against %s (y), the same model with per-trial state terms. Points above the diagonal are neurons whose held-out R^2 the state terms raise. %s", ci.Folds, base, m, runfolder.StateCaution),
			"foldavg_test_r2.csv")
		if err != nil {
			return nil, err
		}
	}
	series := map[string][]float64{}
	for _, m := range ci.Models {
		series[m] = selected(avg[m]["cc_norm"], keep)
	}
	im, err := figure.HistogramsIn(series, ci.Models, "cc_norm", 0, figure.RatioRange)
	err = ex.add("hist_cc_norm_models", im, err, fmt.Sprintf("Distribution over neurons of the fold-averaged cc_norm, one outline per model (%d folds); values outside %g to %g are counted in the legend.%s", ci.Folds, figure.RatioRange.Lo, figure.RatioRange.Hi, whom("cc_norm")), "foldavg_cc_norm.csv")
	if err != nil {
		return nil, err
	}
	// The noise ceiling depends on the test trials of each fold, not on the
	// model: take the first model's copy.
	for _, met := range []string{"explainable_fraction", "cc_max"} {
		name := "noise_ceiling_" + met
		im, err := figure.Histogram(avg[ci.Models[0]][met], met, 0)
		err = ex.add(name, im, err, fmt.Sprintf("Noise ceiling: distribution over neurons of %s averaged over the %d test folds (the same for every model).", met, ci.Folds), "foldavg_"+met+".csv")
		if err != nil {
			return nil, err
		}
	}
	// The summary table, wide, as CSV and markdown.
	tab := report.Table{Caption: fmt.Sprintf("Median over neurons of the fold-averaged score [interquartile range], %d-fold cross-validation, %d neurons; test_r2 and test_r over the %d scored neurons, fev and cc_norm over the %d with split-half reliability (all trials) >= %g.",
		ci.Folds, n, n-len(ci.Excluded), ci.Reliable, ci.MinReliability),
		Header: []string{"model"}, Numeric: []bool{false}}
	for _, k := range comparefolder.CompareMetrics {
		tab.Header = append(tab.Header, k)
		tab.Numeric = append(tab.Numeric, true)
	}
	var csvRows [][]string
	csvHead := []string{"model"}
	for _, k := range comparefolder.CompareMetrics {
		csvHead = append(csvHead, k+"_median", k+"_q1", k+"_q3", k+"_neurons", k+"_nan", k+"_neurons_kept", k+"_kept_by")
	}
	for _, m := range ci.Models {
		row := []string{m}
		crow := []string{m}
		for _, k := range comparefolder.CompareMetrics {
			s := ci.Summary[m][k]
			row = append(row, fmt.Sprintf("%.3f [%.3f, %.3f]", float64(s.Median), float64(s.Q1), float64(s.Q3)))
			crow = append(crow, g8(float64(s.Median)), g8(float64(s.Q1)), g8(float64(s.Q3)), strconv.Itoa(s.N), strconv.Itoa(s.NaN), strconv.Itoa(s.Kept), s.KeptBy)
		}
		tab.Rows = append(tab.Rows, row)
		csvRows = append(csvRows, crow)
	}
	if err := runfolder.WriteTable(filepath.Join(out, "summary_table.csv"), csvHead, csvRows); err != nil {
		return nil, err
	}
	var md strings.Builder
	fmt.Fprintf(&md, "%s\n\n| %s |\n|%s\n", tab.Caption, strings.Join(tab.Header, " | "), strings.Repeat(" --- |", len(tab.Header)))
	for _, r := range tab.Rows {
		fmt.Fprintf(&md, "| %s |\n", strings.Join(r, " | "))
	}
	fmt.Fprintln(&md)
	for _, k := range comparefolder.CompareMetrics {
		fmt.Fprintf(&md, "Best median %s: %s\n", k, ci.Winner[k])
	}
	if err := runfolder.WriteBytes(filepath.Join(out, "summary_table.md"), []byte(md.String())); err != nil {
		return nil, err
	}
	ex.Tables = append(ex.Tables, tab)
	return ex, nil
}

// g8 formats a number with 8 significant digits (NaN as NaN).
func g8(v float64) string { return strconv.FormatFloat(v, 'g', 8, 64) }

// selected returns the values of v where keep is true.
func selected(v []float64, keep []bool) []float64 {
	out := make([]float64, 0, len(v))
	for j, x := range v {
		if keep[j] {
			out = append(out, x)
		}
	}
	return out
}

// masked returns v with NaN where keep is false (for paired figures,
// which need the neurons in place).
func masked(v []float64, keep []bool) []float64 {
	out := make([]float64, len(v))
	for j, x := range v {
		out[j] = math.NaN()
		if keep[j] {
			out[j] = x
		}
	}
	return out
}

// boolCol is keep as 1 and 0, for a CSV column.
func boolCol(keep []bool) []float64 {
	out := make([]float64, len(keep))
	for j, k := range keep {
		if k {
			out[j] = 1
		}
	}
	return out
}
