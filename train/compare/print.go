package compare

import (
	"fmt"
	"io"
	"strings"

	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// PrintComparison writes the summary table, the neurons each metric was
// summarised over, the noise-ceiling verdicts, the winners and the
// pairwise tests on cc_norm of a comparison.
func PrintComparison(w io.Writer, c *comparefolder.Comparison) {
	width := 10
	for _, m := range c.Models {
		width = max(width, len(m))
	}
	fmt.Fprintf(w, "%d-fold cross-validation, %d neurons; median over neurons of the fold-averaged score [interquartile range]\n", c.Folds, c.Neurons)
	fmt.Fprintf(w, "%-*s", width+2, "model")
	for _, k := range comparefolder.CompareMetrics {
		fmt.Fprintf(w, "  %-22s", k)
	}
	fmt.Fprintln(w)
	for _, m := range c.Models {
		fmt.Fprintf(w, "%-*s", width+2, m)
		for _, k := range comparefolder.CompareMetrics {
			s := c.Summary[m][k]
			cell := fmt.Sprintf("%.3f [%.3f, %.3f]", float64(s.Median), float64(s.Q1), float64(s.Q3))
			fmt.Fprintf(w, "  %-22s", cell)
		}
		fmt.Fprintln(w)
	}
	fmt.Fprintf(w, "%-*s", width+2, "neurons")
	for _, k := range comparefolder.CompareMetrics {
		keep, by := Kept(c, k)
		n := 0
		for _, ok := range keep {
			if ok {
				n++
			}
		}
		cell := fmt.Sprintf("%d (%s)", n, keptWord(by))
		fmt.Fprintf(w, "  %-22s", cell)
	}
	fmt.Fprintln(w)
	who := fmt.Sprintf("the %d neurons with split-half reliability (all trials) >= %g", Reliable(c), c.MinReliability)
	if c.MinReliability <= -1 {
		who = fmt.Sprintf("every scored neuron (%d; scores.min_reliability -1)", Reliable(c))
	}
	fmt.Fprintf(w, "fev and cc_norm: over %s, each averaged over the folds where its noise ceiling is usable (%s)\n", who, verdictLine(c))
	for _, k := range comparefolder.CompareMetrics {
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

func keptWord(by string) string {
	if by == runfolder.KeptScored {
		return "scored"
	}
	return "reliable"
}

// verdictLine counts the scored neurons by verdict over the folds:
// "usable on some fold: 412; no fold: 38 signal_not_significant, 2
// no_signal_power".
func verdictLine(c *comparefolder.Comparison) string {
	count := map[string]int{}
	for _, v := range c.Ceiling {
		if v != "" {
			count[v]++
		}
	}
	var none []string
	for v := eval.CeilingNoRepeats; v <= eval.CeilingNotSignificant; v++ {
		if k := count[v.String()]; k > 0 {
			none = append(none, fmt.Sprintf("%d %s", k, v))
		}
	}
	s := fmt.Sprintf("usable on some fold: %d", count[eval.CeilingUsable.String()])
	if len(none) > 0 {
		s += "; on no fold, so NaN: " + strings.Join(none, ", ")
	}
	return s
}
