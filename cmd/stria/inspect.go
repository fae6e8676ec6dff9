package main

import (
	"fmt"
	"io"
	"math"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train"
)

func inspectCommand() *cli.Command {
	return &cli.Command{
		Name:      "inspect",
		Usage:     "summarise a recording: trials, neurons, conditions, reliability, warnings",
		ArgsUsage: " ",
		Flags:     dataFlags()[:3],
		Action: func(c *cli.Context) error {
			if err := noArgs(c); err != nil {
				return err
			}
			cfg, err := loadConfig(c)
			if err != nil {
				return err
			}
			rec, err := data.Load(cfg.Source())
			if err != nil {
				return err
			}
			// A mapped recording truncated meanwhile: an error naming it.
			if gerr := data.Guard(func() { err = inspect(c.App.Writer, cfg, rec) }); gerr != nil {
				return gerr
			}
			return err
		},
	}
}

// inspect prints the summary of a recording. It fails on what Check
// finds fatal.
func inspect(w io.Writer, cfg *train.Config, rec *data.Recording) error {
	ax := cfg.DataAxis()
	nb := ax.NumBins()
	cond, err := ax.BinTrials(rec.Stim)
	if err != nil {
		return fmt.Errorf("stimulus %s: %w", rec.Source.Stimulus, err)
	}
	rep, err := data.CheckWith(rec, cond, data.CheckOptions{NBins: nb, Axis: &ax, Counts: cfg.Model.Loss == train.Poisson})
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "recording: %s\n", rec.Source.Responses)
	fmt.Fprintf(w, "trials: %d   neurons: %d\n", rec.Y.Rows, rec.Y.Cols)
	unit := ax.Unit
	period := ""
	if ax.Periodic {
		period = fmt.Sprintf(", periodic (period %g %s)", ax.Max-ax.Min, unit)
	}
	edges := ax.Edges()
	fmt.Fprintf(w, "axis: %s in %s, %g to %g%s; %d bins of %g %s\n", ax.Name, unit, ax.Min, ax.Max, period, nb, edges[1]-edges[0], unit)
	counts := make([]int, nb)
	for _, c := range cond {
		counts[c]++
	}
	lo, hi := counts[0], counts[0]
	for _, k := range counts {
		lo, hi = min(lo, k), max(hi, k)
	}
	fmt.Fprintf(w, "trials per condition: min %d, max %d\n", lo, hi)
	var sb strings.Builder
	for b, k := range counts {
		if b > 0 && b%10 == 0 {
			sb.WriteString("\n")
		}
		fmt.Fprintf(&sb, "  %7.4g:%-4d", ax.Centers()[b], k)
	}
	fmt.Fprintf(w, "condition (bin centre: trials):\n%s\n", sb.String())
	all := make([]int, rec.Y.Rows)
	for i := range all {
		all[i] = i
	}
	rel := eval.SplitHalf(rec.Y.Data, rec.Y.Cols, cond, all, nb)
	s := eval.Summarize(rel)
	fmt.Fprintf(w, "split-half reliability per neuron (Spearman-Brown corrected, alternate trials within each condition):\n")
	fmt.Fprintf(w, "  median %.3f, quartiles %.3f to %.3f", s.Median, s.Q1, s.Q3)
	if s.NaN > 0 {
		fmt.Fprintf(w, ", undefined for %d neurons", s.NaN)
	}
	fmt.Fprintln(w)
	fmt.Fprintf(w, "  %s\n", histLine(rel, []float64{-1, 0, 0.25, 0.5, 0.75, 0.9, 1.0001}))
	for _, m := range rep.Warnings {
		fmt.Fprintln(w, "warning:", m)
	}
	fmt.Fprintln(w, "note: reliability and noise-ceiling estimates are biased when conditions have few trials.")
	return nil
}

// histLine counts values between consecutive edges.
func histLine(x []float64, edges []float64) string {
	counts := make([]int, len(edges)-1)
	for _, v := range x {
		if math.IsNaN(v) {
			continue
		}
		for i := len(edges) - 2; i >= 0; i-- {
			if v >= edges[i] {
				if v < edges[i+1] {
					counts[i]++
				}
				break
			}
		}
	}
	var parts []string
	for i, k := range counts {
		lo := fmt.Sprintf("%.2f", edges[i])
		if i == 0 {
			lo = "<0"
			parts = append(parts, fmt.Sprintf("%s: %d", lo, k))
			continue
		}
		parts = append(parts, fmt.Sprintf("%s-%.2f: %d", lo, math.Min(edges[i+1], 1), k))
	}
	return strings.Join(parts, "  ")
}
