package main

import (
	"fmt"
	"io"
	"math"
	"slices"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/settings"
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
			if gerr := format.Guard(func() { err = inspect(c.App.Writer, cfg, rec) }); gerr != nil {
				return gerr
			}
			return err
		},
	}
}

// inspect prints the summary of a recording: what it holds, the stimulus
// and its bins (centred on a discrete stimulus as stria fit centres them),
// the blocks, the split-half reliability over all trials and every data
// warning. A problem that would stop stria fit does not stop the summary:
// inspect prints what it can, lists the problem and then returns an error.
func inspect(w io.Writer, cfg *settings.Config, rec *data.Recording) error {
	var problems []string
	fmt.Fprintf(w, "recording: %s\n", rec.Source.Responses)
	fmt.Fprintf(w, "trials: %d   neurons: %d\n", rec.Y.Rows, rec.Y.Cols)
	ax := cfg.DataAxis()
	if err := ax.Validate(); err != nil {
		return err // the config was checked: not reached
	}
	printStimulus(w, ax, rec)
	printBlocks(w, cfg, rec)
	centred, note, err := ax.CenterOnStimulus(rec.Stim, rec.Cond)
	switch {
	case err != nil:
		problems = append(problems, fmt.Sprintf("stimulus %s: %v", rec.Source.Stimulus, err))
	case note != "":
		ax = centred
		fmt.Fprintln(w, "bins: centred on the stimulus values, as stria fit will centre them:", note)
	}
	hint := ax.RadiansHint(rec.Stim)
	nb := ax.NumBins()
	unit := ax.Unit
	period := ""
	if ax.Periodic {
		period = fmt.Sprintf(", periodic (period %g %s)", ax.Max-ax.Min, unit)
	}
	edges := ax.Edges()
	fmt.Fprintf(w, "axis: %s in %s, %g to %g%s; %d bins of %g %s\n", ax.Name, unit, ax.Min, ax.Max, period, nb, edges[1]-edges[0], unit)
	cond, err := ax.BinTrials(rec.Stim)
	if err != nil {
		problems = append(problems, fmt.Sprintf("stimulus %s: %v", rec.Source.Stimulus, err))
		return inspectProblems(w, problems, hint)
	}
	rep, err := data.CheckWith(rec, cond, data.CheckOptions{NBins: nb, Axis: &ax, Counts: cfg.Model.Loss == settings.Poisson})
	if err != nil {
		problems = append(problems, err.Error())
	}
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
	fmt.Fprintf(w, "split-half reliability (all trials) per neuron (Spearman-Brown corrected, alternate trials within each condition):\n")
	fmt.Fprintf(w, "  median %.3f, quartiles %.3f to %.3f", s.Median, s.Q1, s.Q3)
	if s.NaN > 0 {
		fmt.Fprintf(w, ", undefined for %d neurons", s.NaN)
	}
	fmt.Fprintln(w)
	fmt.Fprintf(w, "  %s\n", histLine(rel, []float64{-1, 0, 0.25, 0.5, 0.75, 0.9, 1.0001}))
	kept := 0
	for _, r := range rel {
		if runfolder.IsReliable(r, cfg.Scores.MinReliability) {
			kept++
		}
	}
	fmt.Fprintf(w, "  %d of %d neurons at or above scores.min_reliability = %g: the neurons of the fev, cc_norm and spe summaries\n", kept, rec.Y.Cols, cfg.Scores.MinReliability)
	problems = append(problems, printCovariates(w, cfg, rec, cond, nb)...)
	if rep != nil {
		for _, m := range rep.Warnings {
			fmt.Fprintln(w, "warning:", m)
		}
	}
	if lo < train.FewTrials {
		fmt.Fprintf(w, "note: some conditions have fewer than %d trials (all trials; a test split or fold holds a fraction of them): reliability and noise-ceiling estimates are biased and noisy with few trials per condition (stria help metrics).\n", train.FewTrials)
	}
	return inspectProblems(w, problems, hint)
}

// inspectProblems prints the radians hint (unless a problem says it
// already) and the problems that would stop stria fit, and returns an
// error when there are any.
func inspectProblems(w io.Writer, problems []string, hint string) error {
	if hint != "" && !slices.ContainsFunc(problems, func(p string) bool { return strings.Contains(p, "look like radians") }) {
		fmt.Fprintln(w, "hint:", hint)
	}
	for _, p := range problems {
		fmt.Fprintln(w, "problem:", p)
	}
	switch len(problems) {
	case 0:
		return nil
	case 1:
		// The error repeats it: scripts and logs that keep only the
		// error still see which file, trial or neuron is at fault.
		return fmt.Errorf("inspect: this would stop stria fit: %s", problems[0])
	}
	return fmt.Errorf("inspect: %d problems above would stop stria fit with this config; the first: %s", len(problems), problems[0])
}

// printStimulus prints the range of the stimulus values and, when they
// are few, the distinct values.
func printStimulus(w io.Writer, ax data.Axis, rec *data.Recording) {
	lo, hi := math.Inf(1), math.Inf(-1)
	bad := 0
	for _, x := range rec.Stim {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			bad++
			continue
		}
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	unit := ""
	if ax.Unit != "" {
		unit = " " + ax.Unit
	}
	if bad == len(rec.Stim) {
		fmt.Fprintf(w, "stimulus (%s): no finite value\n", ax.Name)
		return
	}
	fmt.Fprintf(w, "stimulus (%s): values from %.6g to %.6g%s", ax.Name, lo, hi, unit)
	if bad > 0 {
		fmt.Fprintf(w, ", %d not finite", bad)
	}
	vals := slices.Clone(rec.Stim)
	slices.Sort(vals)
	vals = slices.Compact(vals)
	const few = 24
	if len(vals) <= few {
		parts := make([]string, len(vals))
		for i, v := range vals {
			parts[i] = fmt.Sprintf("%.6g", v)
		}
		fmt.Fprintf(w, "; %d distinct: %s", len(vals), strings.Join(parts, ", "))
	} else {
		fmt.Fprintf(w, "; %d distinct values", len(vals))
	}
	fmt.Fprintln(w)
}

// printBlocks prints the blocks the splits keep together.
func printBlocks(w io.Writer, cfg *settings.Config, rec *data.Recording) {
	ids := rec.Block
	from := "block ids of " + rec.Source.Block
	if ids == nil && cfg.Split.BlockTrials > 0 {
		ids = make([]int, rec.Y.Rows)
		for t := range ids {
			ids[t] = t / cfg.Split.BlockTrials
		}
		from = fmt.Sprintf("runs of split.block_trials = %d consecutive trials", cfg.Split.BlockTrials)
	}
	if ids == nil {
		fmt.Fprintln(w, "blocks: none (no block ids, split.block_trials 0): splits deal single trials")
		return
	}
	size := map[int]int{}
	var order []int
	for _, b := range ids {
		if _, ok := size[b]; !ok {
			order = append(order, b)
		}
		size[b]++
	}
	n := make([]int, 0, len(size))
	for _, b := range order {
		n = append(n, size[b])
	}
	slices.Sort(n)
	kept := "kept together by every split"
	if !cfg.Split.KeepBlocks {
		kept = "not kept together (split.keep_blocks is false)"
	}
	fmt.Fprintf(w, "blocks: %d (%s), trials per block min %d, median %d, max %d; %s\n", len(n), from, n[0], n[len(n)/2], n[len(n)-1], kept)
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
