package export

import (
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/figure"
	"github.com/strialab/stria/eval/report"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// WriteReport exports the folder (into opt.Out, default FOLDER/figures,
// with Folder) and writes one self-contained HTML report of it to out
// (default FOLDER/report.html). It returns the report's path.
func WriteReport(dir, out string, opt Options) (string, error) {
	if out == "" {
		out = filepath.Join(dir, runfolder.FileReport)
	}
	kind, err := runfolder.Open(dir)
	if err != nil {
		return "", err
	}
	if kind == runfolder.KindMany {
		r, err := manyReport(dir)
		if err != nil {
			return "", err
		}
		return out, writeReport(out, r)
	}
	ex, err := Folder(dir, opt)
	if err != nil {
		return "", err
	}
	var r *report.Report
	if ex.Kind == runfolder.KindRun {
		r, err = runReport(ex)
	} else {
		r, err = comparisonReport(ex)
	}
	if err != nil {
		return "", err
	}
	if err := writeReport(out, r); err != nil {
		return "", err
	}
	return out, nil
}

// writeReport renders r into path atomically (nothing is written when r
// cannot be rendered).
func writeReport(path string, r *report.Report) error {
	b, err := report.Render(r)
	if err != nil {
		return err
	}
	return runfolder.WriteBytes(path, b)
}

// reportFigures returns the figures of ex that keep accepts, with the SVG
// bytes that were rendered for them.
func reportFigures(ex *Exported, keep func(name string) bool) []report.Figure {
	var figs []report.Figure
	for _, f := range ex.Figures {
		if keep(f.Name) {
			figs = append(figs, report.Figure{Caption: f.Caption + " Arrays: " + strings.Join(f.Arrays, ", ") + ".", SVG: f.SVG})
		}
	}
	return figs
}

func subtitle(dir string) string {
	abs, err := filepath.Abs(dir)
	if err != nil {
		abs = dir
	}
	return abs + " — " + time.Now().Format("2006-01-02 15:04")
}

// runReport builds the report of an exported run folder.
func runReport(ex *Exported) (*report.Report, error) {
	dir := ex.Folder
	mf, err := runfolder.ReadManifest(dir)
	if err != nil {
		return nil, err
	}
	sum, err := runfolder.ReadSummary(dir)
	if err != nil {
		return nil, err
	}
	cfgYAML, err := runfolder.ReadSettings(dir)
	if err != nil {
		return nil, err
	}
	cautions := sum.Cautions
	r := &report.Report{Title: "stria run " + filepath.Base(filepath.Clean(dir)), Subtitle: subtitle(dir), Cautions: cautions}

	// Scores.
	scores := report.Table{Caption: fmt.Sprintf("Per-neuron scores on the %d held-out test trials: median and quartiles over the neurons kept for each metric: every scored neuron (%d), or, for the ratios by the noise ceiling (fev, cc_norm, spe), the %d with split-half reliability (all trials) >= %g ("+runfolder.FileNeuronScores+" has every neuron).",
		sum.TestTrials, sum.Scored, sum.Reliable, sum.MinReliability),
		Header: []string{"metric", "median", "q1", "q3", "neurons", "undefined", "kept by"}, Numeric: []bool{false, true, true, true, true, true, false}}
	for _, k := range append(append([]string(nil), runfolder.ScoreColumns...), runfolder.ColSplitHalfAll) {
		s, ok := sum.Spread[k]
		if !ok {
			continue
		}
		scores.Rows = append(scores.Rows, []string{k, f3(s.Median), f3(s.Q1), f3(s.Q3), strconv.Itoa(s.N), strconv.Itoa(s.NaN), s.KeptBy})
	}
	r.Sections = append(r.Sections, report.Section{ID: "scores", Heading: "Held-out scores",
		Paragraphs: []string{fmt.Sprintf("Encoder: %s, output %s, loss %s, %d neurons, seed %d, stria %s, created %s.", layerText(mf.Layers), mf.Output, mf.Loss, mf.Neurons, mf.Seed, mf.Stria, mf.Created)},
		Tables:     []report.Table{scores}})

	// Data.
	parts := report.Table{Caption: "Trials in each part of the split (split.json).", Header: []string{"part", "trials"}, Numeric: []bool{false, true}}
	for _, p := range []string{"train", "validation", "test"} {
		parts.Rows = append(parts.Rows, []string{p, strconv.Itoa(mf.Trials[p])})
	}
	dataSec := report.Section{ID: "data", Heading: "Data",
		Paragraphs: []string{
			fmt.Sprintf("Recording: %s (stimulus: %s).", mf.Sources["responses"], mf.Sources["stimulus"]),
			fmt.Sprintf("Axis: %s in %s, %g to %g%s, %d bins, %s encoding.", mf.Axis.Name, mf.Axis.Unit, mf.Axis.Min, mf.Axis.Max, periodicText(mf.Axis), mf.Axis.Bins, mf.Axis.Encoding),
			fmt.Sprintf("Neurons: %d in the recording, %d scored, %d excluded. Noise ceilings on the test trials: %s; where the ceiling is not usable, fev, cc_norm and spe are undefined (column ceiling of %s gives the reason). %d scored neurons have a split-half reliability over all trials of at least %g (scores.min_reliability) and enter the summaries and figures of those ratios.",
				sum.Neurons, sum.Scored, sum.Excluded, verdictText(sum.Ceilings), runfolder.FileNeuronScores, sum.Reliable, sum.MinReliability),
		},
		Tables: []report.Table{parts}}
	for _, w := range sum.Warnings {
		dataSec.Notes = append(dataSec.Notes, "Warning: "+w)
	}
	dataSec.Notes = append(dataSec.Notes, ex.Notes...)
	r.Sections = append(r.Sections, dataSec)

	// Training.
	trainSec := report.Section{ID: "training", Heading: "Training",
		Paragraphs: []string{fmt.Sprintf("%d epochs, best epoch %d (its weights are kept), stopped by %s, %.1f s.", sum.Epochs, sum.BestEpoch, sum.Stop, sum.WallSeconds)}}
	log, err := runfolder.ReadHistory(dir)
	if err != nil {
		trainSec.Notes = append(trainSec.Notes, err.Error())
	} else if len(log) > 0 {
		ep, tr, va := make([]float64, len(log)), make([]float64, len(log)), make([]float64, len(log))
		for i, e := range log {
			ep[i], tr[i], va[i] = float64(e.Epoch), e.TrainLoss, e.ValLoss
		}
		im, err := figure.Loss(ep, tr, va)
		if err := ex.add("loss", im, err, "Training and validation loss per epoch ("+runfolder.FileHistory+"; loss in z-scored units when the run z-scores). Validation trials are carved from the training part; the test trials are never used."); err != nil {
			return nil, err
		}
		f := ex.Figures[len(ex.Figures)-1]
		trainSec.Figures = append(trainSec.Figures, report.Figure{SVG: f.SVG, Caption: f.Caption})
		tab := report.Table{Caption: "First, best and last epochs (" + runfolder.FileHistory + ").", Header: []string{"epoch", "", "train_loss", "val_loss", "val_r2"}, Numeric: []bool{true, false, true, true, true}}
		pick := func(e train.EpochLog, what string) {
			tab.Rows = append(tab.Rows, []string{strconv.Itoa(e.Epoch), what, g4(e.TrainLoss), g4(e.ValLoss), f3(runfolder.Num(e.ValR2))})
		}
		pick(log[0], "first")
		for _, e := range log {
			if e.Epoch == sum.BestEpoch {
				pick(e, "best")
			}
		}
		pick(log[len(log)-1], "last")
		trainSec.Tables = append(trainSec.Tables, tab)
	}
	r.Sections = append(r.Sections, trainSec)

	// Figures of export.
	figs := func(keep func(string) bool) []report.Figure { return reportFigures(ex, keep) }
	r.Sections = append(r.Sections,
		report.Section{ID: "filters", Heading: "Filters", Figures: figs(func(n string) bool { return n == "filters" }),
			Paragraphs: []string{"The readout weights (neurons x channels x positions) are in readout_weights.npy."}},
		report.Section{ID: "tuning", Heading: "Tuning of selected neurons", Figures: figs(func(n string) bool { return strings.HasPrefix(n, "tuning_") }), Notes: ex.Notes},
		report.Section{ID: "population", Heading: "Scores and preferred stimuli across neurons",
			Figures: figs(func(n string) bool { return strings.HasPrefix(n, "hist_") || n == "preferred" })},
	)
	if sec := stateSection(ex, sum); sec != nil {
		r.Sections = append(r.Sections, *sec)
	}
	r.Sections = append(r.Sections,
		report.Section{ID: "config", Heading: "Resolved config", Paragraphs: []string{runfolder.FileSettings + " of the run: refitting it gives the same numbers."}, Code: string(cfgYAML)},
	)
	return r, nil
}

// comparisonReport builds the report of an exported comparison folder.
func comparisonReport(ex *Exported) (*report.Report, error) {
	dir := ex.Folder
	cj, err := comparefolder.ReadComparisonInfo(dir)
	if err != nil {
		return nil, err
	}
	cfgYAML, err := runfolder.ReadSettings(dir)
	if err != nil {
		return nil, err
	}
	cautions := cj.Cautions
	r := &report.Report{Title: "stria comparison " + filepath.Base(filepath.Clean(dir)), Subtitle: subtitle(dir), Cautions: cautions}
	var win []string
	for _, k := range comparefolder.CompareMetrics {
		win = append(win, fmt.Sprintf("%s: %s", k, cj.Winner[k]))
	}
	r.Sections = append(r.Sections, report.Section{ID: "summary", Heading: "Summary",
		Paragraphs: []string{
			fmt.Sprintf("%d models, %d-fold cross-validation, %d neurons. Each neuron's score is averaged over the folds; fev and cc_norm over the folds where its noise ceiling is usable (by neuron: %s). The table gives the median over neurons and the interquartile range: test_r2 and test_r over the %d scored neurons, fev and cc_norm over the %d with split-half reliability (all trials) >= %g; the pairwise tests use the same neurons.",
				len(cj.Models), cj.Folds, cj.Neurons, verdictText(cj.Ceilings), cj.Neurons-len(cj.Excluded), cj.Reliable, cj.MinReliability),
			"Highest median — " + strings.Join(win, "; ") + ".",
		},
		Tables: ex.Tables})

	pairs := report.Table{Caption: "Pairwise comparisons across neurons (" + comparefolder.FileModelPairs + "): share of neurons where model A scores higher, Wilcoxon statistic W, p-value, neurons used and zero differences dropped, of the neurons kept for the metric.",
		Header: []string{"metric", "model A", "model B", "A higher", "W", "p", "n", "dropped", "method", "kept", "kept by"}, Numeric: []bool{false, false, false, true, true, true, true, true, false, true, false}}
	for _, p := range cj.Pairs {
		pairs.Rows = append(pairs.Rows, []string{p.Metric, p.A, p.B, fmt.Sprintf("%.1f %%", 100*float64(p.ShareA)), g4(float64(p.W)), fmt.Sprintf("%.3g", float64(p.P)), strconv.Itoa(p.N), strconv.Itoa(p.Dropped), p.Method, strconv.Itoa(p.Kept), p.KeptBy})
	}
	method := cj.PValues
	if method == "" {
		method = comparefolder.WilcoxonNote
	}
	r.Sections = append(r.Sections, report.Section{ID: "pairs", Heading: "Pairwise tests",
		Paragraphs: []string{"p-values: " + method}, Tables: []report.Table{pairs}})

	figs := reportFigures(ex, func(n string) bool { return strings.HasPrefix(n, "scatter_") })
	r.Sections = append(r.Sections, report.Section{ID: "scatter", Heading: "Model against model, per neuron", Figures: figs})
	figs = reportFigures(ex, func(n string) bool { return n == "hist_cc_norm_models" || strings.HasPrefix(n, "noise_ceiling_") })
	r.Sections = append(r.Sections, report.Section{ID: "distributions", Heading: "Distributions and noise ceiling", Figures: figs})

	dataSec := report.Section{ID: "data", Heading: "Data",
		Paragraphs: []string{fmt.Sprintf("Recordings: %s.", strings.Join(cj.Recordings, ", ")),
			fmt.Sprintf("Axis: %s in %s, %g to %g%s, %d bins.", cj.Axis.Name, cj.Axis.Unit, cj.Axis.Min, cj.Axis.Max, periodicText(cj.Axis), cj.Axis.Bins),
			fmt.Sprintf("Neurons: %d, of which %d excluded from every score.", cj.Neurons, len(cj.Excluded))}}
	ids := make([]string, 0, len(cj.Excluded))
	for id := range cj.Excluded {
		ids = append(ids, id)
	}
	slices.Sort(ids)
	for _, id := range ids {
		dataSec.Notes = append(dataSec.Notes, fmt.Sprintf("Neuron %s (0-based) excluded: %s.", id, cj.Excluded[id]))
	}
	for _, w := range cj.Warnings {
		dataSec.Notes = append(dataSec.Notes, "Warning: "+w)
	}
	r.Sections = append(r.Sections, dataSec,
		report.Section{ID: "config", Heading: "Resolved config", Code: string(cfgYAML)})
	return r, nil
}

func f3(v runfolder.Num) string {
	if math.IsNaN(float64(v)) {
		return "NaN"
	}
	return strconv.FormatFloat(float64(v), 'f', 3, 64)
}

func g4(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }

func periodicText(a runfolder.AxisInfo) string {
	if a.Periodic {
		return fmt.Sprintf(", periodic (period %g %s)", a.Max-a.Min, a.Unit)
	}
	return ""
}

func layerText(ls []runfolder.LayerInfo) string {
	var parts []string
	for _, l := range ls {
		parts = append(parts, fmt.Sprintf("conv %d channels x kernel %d, stride %d, %s border", l.Channels, l.Kernel, l.Stride, l.Border))
	}
	return strings.Join(parts, "; ")
}

// csvTable reads a CSV file written by stria as a report table, keeping
// the rows that keep accepts (all when nil).
func csvTable(path, caption string, keep func(row []string) bool) (report.Table, error) {
	head, rows, err := runfolder.ReadTable(path)
	if err != nil {
		return report.Table{}, err
	}
	t := report.Table{Caption: caption, Header: head, Numeric: make([]bool, len(head))}
	for i, h := range head {
		t.Numeric[i] = slices.Contains([]string{"median", "q1", "q3", "neurons", "nan", "neurons_kept", "share_a_higher", "w", "p", "n", "dropped"}, h)
	}
	for _, r := range rows {
		if keep != nil && !keep(r) {
			continue
		}
		for i, v := range r {
			f, err := strconv.ParseFloat(v, 64)
			if err != nil || i >= len(head) {
				continue
			}
			switch head[i] {
			case "median", "q1", "q3":
				r[i] = strconv.FormatFloat(f, 'f', 3, 64)
			case "share_a_higher":
				r[i] = strconv.FormatFloat(100*f, 'f', 1, 64) + " %"
			case "p":
				r[i] = strconv.FormatFloat(f, 'g', 3, 64)
			}
		}
		t.Rows = append(t.Rows, r)
	}
	return t, nil
}

// ManyReportRecordings is the largest number of recordings whose figures
// the report of a comparison over recordings shows, each recording in a
// section of its own. With more, the report holds the tables across
// recordings only (each recording's own report has its figures): at 50
// recordings the sections made a 25 MB page and took minutes to export.
const ManyReportRecordings = 12

// manyReport builds one report of a comparison over recordings: the tables
// across recordings, then, for at most ManyReportRecordings recordings,
// each recording's summary and figures (exporting each).
func manyReport(dir string) (*report.Report, error) {
	subs, err := comparefolder.RecordingFolders(dir)
	if err != nil {
		return nil, err
	}
	// The cautions of every recording, once each.
	seen := map[string]bool{}
	var cautions []string
	for _, sub := range subs {
		ci, err := comparefolder.ReadComparisonInfo(sub)
		if err != nil {
			return nil, err
		}
		for _, c := range ci.Cautions {
			if !seen[c] {
				seen[c] = true
				cautions = append(cautions, c)
			}
		}
	}
	r := &report.Report{Title: "stria comparison over " + fmt.Sprint(len(subs)) + " recordings", Subtitle: subtitle(dir), Cautions: cautions}
	byRec, err := csvTable(filepath.Join(dir, runfolder.FilePerRecording),
		"Every recording's median and quartiles over its neurons ("+runfolder.FilePerRecording+"); the last rows give the median over recordings of the recording medians.", nil)
	if err != nil {
		return nil, err
	}
	pooled, err := csvTable(filepath.Join(dir, comparefolder.FilePooledSummary), "All neurons of all recordings pooled ("+comparefolder.FilePooledSummary+"): median and quartiles of the fold-averaged scores.", nil)
	if err != nil {
		return nil, err
	}
	pairs, err := csvTable(filepath.Join(dir, comparefolder.FilePooledPairs), "Pooled neurons, cc_norm, over the reliable neurons (kept_by): share of neurons where model A scores higher, and the Wilcoxon test ("+comparefolder.FilePooledPairs+" has every metric).",
		func(row []string) bool { return row[0] == "cc_norm" })
	if err != nil {
		return nil, err
	}
	byRecSec := report.Section{ID: "recordings", Heading: "Recording by recording", Tables: []report.Table{byRec}}
	if len(subs) > ManyReportRecordings {
		byRecSec.Paragraphs = []string{fmt.Sprintf("With %d recordings (more than %d), this report holds the tables only; each recording's figures are in its own report: stria report %s.",
			len(subs), ManyReportRecordings, filepath.Join(dir, "RECORDING"))}
	}
	r.Sections = append(r.Sections,
		report.Section{ID: "pooled", Heading: "Across recordings",
			Paragraphs: []string{"Pooled neurons answer \"for a neuron in these data\" (large recordings weigh more); the median of recording medians answers \"for a recording\" (each counts once).",
				"p-values: " + comparefolder.WilcoxonNote},
			Tables: []report.Table{pooled, pairs}},
		byRecSec)
	if len(subs) > ManyReportRecordings {
		subs = nil
	}
	for _, sub := range subs {
		ex, err := Folder(sub, Options{})
		if err != nil {
			return nil, err
		}
		figs := reportFigures(ex, func(n string) bool {
			return n == "hist_cc_norm_models" || strings.HasPrefix(n, "noise_ceiling_") || strings.HasPrefix(n, "scatter_") && strings.Contains(n, "cc_norm")
		})
		name := filepath.Base(sub)
		r.Sections = append(r.Sections, report.Section{ID: "rec-" + name, Heading: "Recording " + name,
			Paragraphs: []string{"Folder " + sub + "; its own report: stria report " + sub + "."},
			Tables:     ex.Tables, Figures: figs})
	}
	cfgYAML, err := runfolder.ReadSettings(dir)
	if err != nil {
		return nil, err
	}
	r.Sections = append(r.Sections, report.Section{ID: "config", Heading: "Resolved config", Code: string(cfgYAML)})
	return r, nil
}

// verdictText counts noise-ceiling verdicts in words: "usable 412,
// signal_not_significant 38, no_signal_power 2" (codes with a count of 0
// left out; "not recorded" for a folder without counts).
func verdictText(counts map[string]int) string {
	if counts == nil {
		return "not recorded"
	}
	var parts []string
	for c := eval.CeilingUsable; c <= eval.CeilingNotSignificant; c++ {
		if k := counts[c.String()]; k > 0 || c == eval.CeilingUsable {
			parts = append(parts, fmt.Sprintf("%s %d", c, k))
		}
	}
	return strings.Join(parts, ", ")
}
