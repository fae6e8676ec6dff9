package train

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/tuning"
)

// Comparison folder file names.
const (
	FileScores      = "scores.csv"
	FileCmpSummary  = "summary.csv"
	FilePairs       = "pairs.csv"
	FileComparison  = "comparison.json"
	FileDescriptors = "descriptors.csv"
	DirCurves       = "curves"
)

// WilcoxonNote states how the p-values of pairs.csv are computed.
const WilcoxonNote = "Wilcoxon signed-rank test, two-sided, across neurons on fold-averaged scores; zero differences dropped; exact null distribution for n <= 50 without ties or zeros, otherwise the normal approximation with tie correction and no continuity correction (as scipy 1.10's defaults). Not corrected for multiple comparisons."

// FileName turns a model name into a file name.
func FileName(model string) string {
	r := strings.NewReplacer("[", "_", "]", "", ",", "_", "=", "-", "/", "_", " ", "_")
	return r.Replace(model)
}

// comparisonJSON is comparison.json.
type comparisonJSON struct {
	Models     []string                     `json:"models"`
	Folds      int                          `json:"folds"`
	Neurons    int                          `json:"neurons"`
	Excluded   map[string]string            `json:"excluded_neurons"`
	Summary    map[string]map[string]Spread `json:"summary"`
	Winner     map[string]string            `json:"winner"`
	Pairs      []pairJSON                   `json:"pairs"`
	PValues    string                       `json:"p_value_method"`
	Cautions   []string                     `json:"cautions"`
	Warnings   []string                     `json:"warnings"`
	Axis       AxisInfo                     `json:"axis"`
	Epochs     map[string][]int             `json:"encoder_epochs,omitempty"`
	Recordings []string                     `json:"recordings"`
}

type pairJSON struct {
	Metric  string `json:"metric"`
	A       string `json:"model_a"`
	B       string `json:"model_b"`
	ShareA  Num    `json:"share_a_higher"`
	W       Num    `json:"w"`
	P       Num    `json:"p"`
	N       int    `json:"n"`
	Dropped int    `json:"dropped"`
	Method  string `json:"method"`
}

func fmtNum(v float64) string {
	if math.IsNaN(v) {
		return "NaN"
	}
	return strconv.FormatFloat(v, 'g', 8, 64)
}

// WriteComparison writes the comparison folder.
func WriteComparison(dir string, p *Prepared, specs []ModelSpec, results []*FoldResult, c *Comparison) error {
	if err := os.MkdirAll(filepath.Join(dir, DirCurves), 0o755); err != nil {
		return err
	}
	ex := ExcludedNeurons(p)
	err := WriteAtomic(filepath.Join(dir, FileScores), func(w io.Writer) error {
		bw := w.(*bufio.Writer)
		bw.WriteString("model,fold,neuron," + strings.Join(metricColumns, ",") + ",excluded\n")
		for _, r := range results {
			for j, s := range r.Scores {
				bw.WriteString(csvField(r.Model) + "," + strconv.Itoa(r.Fold+1) + "," + strconv.Itoa(j))
				for _, v := range metricValues(s) {
					if _, bad := ex[j]; bad {
						v = math.NaN()
					}
					bw.WriteString("," + fmtNum(v))
				}
				bw.WriteString("," + csvField(ex[j]) + "\n")
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	if err := writeSummaryCSV(filepath.Join(dir, FileCmpSummary), c); err != nil {
		return err
	}
	if err := writePairsCSV(filepath.Join(dir, FilePairs), c); err != nil {
		return err
	}
	// Fold-averaged curves per model, and tuning descriptors.
	b, n := p.NBins, p.Neurons()
	avg := map[string][]float64{}
	for _, m := range c.Models {
		a := make([]float64, b*n)
		k := 0
		for _, r := range results {
			if r.Model == m && r.Curves != nil {
				for i, v := range r.Curves {
					a[i] += v
				}
				k++
			}
		}
		for i := range a {
			a[i] /= float64(max(k, 1))
		}
		avg[m] = a
		if err := data.WriteNPY64(filepath.Join(dir, DirCurves, FileName(m)+".npy"), []int{b, n}, a); err != nil {
			return err
		}
	}
	all := make([]int, p.Rec.Y.Rows)
	for i := range all {
		all[i] = i
	}
	st := data.NewCondStats(p.Rec.Y, p.Cond, all, b)
	means := st.Mean(nil)
	if err := data.WriteNPY64(filepath.Join(dir, DirCurves, "data_mean.npy"), []int{b, n}, means); err != nil {
		return err
	}
	sem := st.Var(nil)
	for c := 0; c < b; c++ {
		for j := 0; j < n; j++ {
			sem[c*n+j] = math.Sqrt(sem[c*n+j] / float64(st.Count[c]))
		}
	}
	if err := data.WriteNPY64(filepath.Join(dir, DirCurves, "data_sem.npy"), []int{b, n}, sem); err != nil {
		return err
	}
	centers := p.Axis.Centers()
	period := 0.0
	if p.Axis.Periodic {
		period = p.Axis.Max - p.Axis.Min
	}
	err = WriteAtomic(filepath.Join(dir, FileDescriptors), func(w io.Writer) error {
		fmt.Fprintln(w, "source,neuron,preferred,peak,one_minus_cv,direction_vector,osi,dsi")
		r := make([]float64, b)
		for _, src := range append([]string{"data"}, c.Models...) {
			curve := means
			if src != "data" {
				curve = avg[src]
			}
			for j := 0; j < n; j++ {
				for k := 0; k < b; k++ {
					r[k] = curve[k*n+j]
				}
				d := tuning.Describe(r, centers, period)
				fmt.Fprintf(w, "%s,%d,%s,%s,%s,%s,%s,%s\n", csvField(src), j, fmtNum(d.Preferred), fmtNum(d.Peak), fmtNum(d.OneMinusCV), fmtNum(d.DirVector), fmtNum(d.OSI), fmtNum(d.DSI))
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	js := comparisonJSON{Models: c.Models, Folds: c.Folds, Neurons: c.Neurons, Excluded: map[string]string{},
		Summary: c.Summary, Winner: c.Winner, PValues: WilcoxonNote, Cautions: Cautions, Warnings: p.Report.Warnings,
		Axis: AxisInfo{Name: p.Axis.Name, Unit: p.Axis.Unit, Min: p.Axis.Min, Max: p.Axis.Max, Periodic: p.Axis.Periodic,
			Bins: b, Encoding: p.Cfg.Axis.Encoding, Edges: p.Axis.Edges(), Centers: centers},
		Epochs: map[string][]int{}, Recordings: []string{p.Rec.Source.Responses}}
	for j, why := range ex {
		js.Excluded[strconv.Itoa(j)] = why
	}
	for _, r := range results {
		if r.Epochs > 0 {
			js.Epochs[r.Model] = append(js.Epochs[r.Model], r.Epochs)
		}
	}
	for _, pt := range c.Pairs {
		js.Pairs = append(js.Pairs, pairJSON{Metric: pt.Metric, A: pt.A, B: pt.B, ShareA: Num(pt.ShareA), W: Num(pt.W), P: Num(pt.P), N: pt.N, Dropped: pt.Dropped, Method: pt.Method})
	}
	cfgYAML, err := p.Cfg.Marshal()
	if err != nil {
		return err
	}
	if err := WriteAtomic(filepath.Join(dir, FileConfig), func(w io.Writer) error { _, err := w.Write(cfgYAML); return err }); err != nil {
		return err
	}
	return WriteJSON(filepath.Join(dir, FileComparison), js)
}

// PrintComparison writes the summary table, the pairwise tests of one
// metric and the winners.
func PrintComparison(w io.Writer, c *Comparison) {
	width := 10
	for _, m := range c.Models {
		width = max(width, len(m))
	}
	fmt.Fprintf(w, "%d-fold cross-validation, %d neurons; median over neurons of the fold-averaged score [interquartile range]\n", c.Folds, c.Neurons)
	fmt.Fprintf(w, "%-*s", width+2, "model")
	for _, k := range CompareMetrics {
		fmt.Fprintf(w, "  %-22s", k)
	}
	fmt.Fprintln(w)
	for _, m := range c.Models {
		fmt.Fprintf(w, "%-*s", width+2, m)
		for _, k := range CompareMetrics {
			s := c.Summary[m][k]
			cell := fmt.Sprintf("%.3f [%.3f, %.3f]", float64(s.Median), float64(s.Q1), float64(s.Q3))
			fmt.Fprintf(w, "  %-22s", cell)
		}
		fmt.Fprintln(w)
	}
	for _, k := range CompareMetrics {
		fmt.Fprintf(w, "best median %s: %s\n", k, c.Winner[k])
	}
	fmt.Fprintln(w, "pairs on cc_norm (share of neurons where the first scores higher; Wilcoxon p):")
	for _, pt := range c.Pairs {
		if pt.Metric != "cc_norm" {
			continue
		}
		fmt.Fprintf(w, "  %-*s vs %-*s  %5.1f %%  p = %.3g (%s, n = %d)\n", width, pt.A, width, pt.B, 100*pt.ShareA, pt.P, pt.Method, pt.N)
	}
}

// Files of a comparison across recordings.
const (
	FileRecordings  = "recordings.csv"
	FilePooled      = "pooled.csv"
	FilePooledPairs = "pooled_pairs.csv"
)

// writeAcross writes the tables across recordings: every recording's
// medians (and the median of the recording medians), and the summary and
// pairwise tests with neurons pooled.
func writeAcross(dir string, cmps []*Comparison) error {
	pooled := Pool(cmps)
	err := WriteAtomic(filepath.Join(dir, FileRecordings), func(w io.Writer) error {
		fmt.Fprintln(w, "recording,model,metric,median,q1,q3,neurons,nan")
		for _, c := range cmps {
			for _, m := range c.Models {
				for _, k := range CompareMetrics {
					s := c.Summary[m][k]
					fmt.Fprintf(w, "%s,%s,%s,%s,%s,%s,%d,%d\n", csvField(c.Recording), csvField(m), k, fmtNum(float64(s.Median)), fmtNum(float64(s.Q1)), fmtNum(float64(s.Q3)), s.N, s.NaN)
				}
			}
		}
		// The median over recordings of each recording's median.
		for _, m := range pooled.Models {
			for _, k := range CompareMetrics {
				var med []float64
				for _, c := range cmps {
					med = append(med, float64(c.Summary[m][k].Median))
				}
				s := eval.Summarize(med)
				fmt.Fprintf(w, "median of recordings,%s,%s,%s,%s,%s,%d,%d\n", csvField(m), k, fmtNum(s.Median), fmtNum(s.Q1), fmtNum(s.Q3), s.N, s.NaN)
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	if err := writeSummaryCSV(filepath.Join(dir, FilePooled), pooled); err != nil {
		return err
	}
	return writePairsCSV(filepath.Join(dir, FilePooledPairs), pooled)
}

// writeSummaryCSV writes the median and quartiles of every model and
// metric of a comparison.
func writeSummaryCSV(path string, c *Comparison) error {
	return WriteAtomic(path, func(w io.Writer) error {
		fmt.Fprintln(w, "model,metric,median,q1,q3,neurons,nan")
		for _, m := range c.Models {
			for _, k := range CompareMetrics {
				s := c.Summary[m][k]
				fmt.Fprintf(w, "%s,%s,%s,%s,%s,%d,%d\n", csvField(m), k, fmtNum(float64(s.Median)), fmtNum(float64(s.Q1)), fmtNum(float64(s.Q3)), s.N, s.NaN)
			}
		}
		return nil
	})
}

// writePairsCSV writes the pairwise tests of a comparison.
func writePairsCSV(path string, c *Comparison) error {
	return WriteAtomic(path, func(w io.Writer) error {
		fmt.Fprintln(w, "metric,model_a,model_b,share_a_higher,w,p,n,dropped,method")
		for _, pt := range c.Pairs {
			fmt.Fprintf(w, "%s,%s,%s,%s,%s,%s,%d,%d,%s\n", pt.Metric, csvField(pt.A), csvField(pt.B), fmtNum(pt.ShareA), fmtNum(pt.W), fmtNum(pt.P), pt.N, pt.Dropped, pt.Method)
		}
		return nil
	})
}
