package train

import (
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/strialab/stria/eval/report"
)

// KindMany is a comparison folder over several recordings: a comparison
// folder per recording and the tables across them.
const KindMany = "comparison over recordings"

// recordingFolders lists the per-recording comparison folders of a
// comparison over several recordings, in name order.
func recordingFolders(dir string) ([]string, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, err
	}
	var out []string
	for _, e := range ents {
		if e.IsDir() && e.Name() != UnitsDir && e.Name() != DirExport {
			if _, err := os.Stat(filepath.Join(dir, e.Name(), FileComparison)); err == nil {
				out = append(out, filepath.Join(dir, e.Name()))
			}
		}
	}
	slices.Sort(out)
	if len(out) == 0 {
		return nil, fmt.Errorf("%s: %s is there but no recording folder with %s", dir, FileRecordings, FileComparison)
	}
	return out, nil
}

// csvTable reads a CSV file written by stria as a report table, keeping
// the rows that keep accepts (all when nil).
func csvTable(path, caption string, keep func(row []string) bool) (report.Table, error) {
	head, rows, err := readCSV(path)
	if err != nil {
		return report.Table{}, err
	}
	t := report.Table{Caption: caption, Header: head, Numeric: make([]bool, len(head))}
	for i, h := range head {
		t.Numeric[i] = slices.Contains([]string{"median", "q1", "q3", "neurons", "nan", "share_a_higher", "w", "p", "n", "dropped"}, h)
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

// manyReport exports every recording of a comparison over recordings and
// builds one report: the tables across recordings, then each recording's
// summary and figures.
func manyReport(dir string) (*report.Report, error) {
	subs, err := recordingFolders(dir)
	if err != nil {
		return nil, err
	}
	r := &report.Report{Title: "stria comparison over " + fmt.Sprint(len(subs)) + " recordings", Subtitle: subtitle(dir), Cautions: Cautions}
	byRec, err := csvTable(filepath.Join(dir, FileRecordings),
		"Every recording's median and quartiles over its neurons (recordings.csv); the last rows give the median over recordings of the recording medians.", nil)
	if err != nil {
		return nil, err
	}
	pooled, err := csvTable(filepath.Join(dir, FilePooled), "All neurons of all recordings pooled (pooled.csv): median and quartiles of the fold-averaged scores.", nil)
	if err != nil {
		return nil, err
	}
	pairs, err := csvTable(filepath.Join(dir, FilePooledPairs), "Pooled neurons, cc_norm: share of neurons where model A scores higher, and the Wilcoxon test (pooled_pairs.csv has every metric).",
		func(row []string) bool { return row[0] == "cc_norm" })
	if err != nil {
		return nil, err
	}
	r.Sections = append(r.Sections,
		report.Section{ID: "pooled", Heading: "Across recordings",
			Paragraphs: []string{"Pooled neurons answer \"for a neuron in these data\" (large recordings weigh more); the median of recording medians answers \"for a recording\" (each counts once).",
				"p-values: " + WilcoxonNote},
			Notes: Cautions, Tables: []report.Table{pooled, pairs}},
		report.Section{ID: "recordings", Heading: "Recording by recording", Tables: []report.Table{byRec}})
	for _, sub := range subs {
		ex, err := ExportFolder(sub, ExportOptions{})
		if err != nil {
			return nil, err
		}
		figs, err := reportFigures(ex, func(n string) bool {
			return n == "hist_cc_norm_models" || strings.HasPrefix(n, "noise_ceiling_") || strings.HasPrefix(n, "scatter_") && strings.Contains(n, "cc_norm")
		})
		if err != nil {
			return nil, err
		}
		name := filepath.Base(sub)
		r.Sections = append(r.Sections, report.Section{ID: "rec-" + name, Heading: "Recording " + name,
			Paragraphs: []string{"Folder " + sub + "; its own report: stria report " + sub + "."},
			Tables:     ex.Tables, Figures: figs})
	}
	cfgYAML, err := os.ReadFile(filepath.Join(dir, FileConfig))
	if err != nil {
		return nil, err
	}
	r.Sections = append(r.Sections, report.Section{ID: "config", Heading: "Resolved config", Code: string(cfgYAML)})
	return r, nil
}
