package compare

import (
	"fmt"
	"io"

	"github.com/strialab/stria/train/runfolder"
)

// PrintComparison writes the summary table, the winners and the pairwise
// tests on cc_norm of a comparison.
func PrintComparison(w io.Writer, c *runfolder.Comparison) {
	width := 10
	for _, m := range c.Models {
		width = max(width, len(m))
	}
	fmt.Fprintf(w, "%d-fold cross-validation, %d neurons; median over neurons of the fold-averaged score [interquartile range]\n", c.Folds, c.Neurons)
	fmt.Fprintf(w, "%-*s", width+2, "model")
	for _, k := range runfolder.CompareMetrics {
		fmt.Fprintf(w, "  %-22s", k)
	}
	fmt.Fprintln(w)
	for _, m := range c.Models {
		fmt.Fprintf(w, "%-*s", width+2, m)
		for _, k := range runfolder.CompareMetrics {
			s := c.Summary[m][k]
			cell := fmt.Sprintf("%.3f [%.3f, %.3f]", float64(s.Median), float64(s.Q1), float64(s.Q3))
			fmt.Fprintf(w, "  %-22s", cell)
		}
		fmt.Fprintln(w)
	}
	for _, k := range runfolder.CompareMetrics {
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
