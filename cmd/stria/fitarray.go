package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/projection"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/settings"
)

// A fit spread over a job array has two stages (stria help large):
//
//  1. stria fit --array-task I --array-task-count N: each array task passes
//     once over its range of neurons (train.NeuronRange) of the .npy
//     responses and writes their statistics, with the fingerprint of its
//     settings and data, into the run folder (runfolder.WriteArrayStats).
//  2. stria gather FOLDER: checks that every task finished with the same
//     settings and data, joins the statistics neuron range by neuron range
//     (bitwise those of one pass over all neurons), fits the filters and
//     the readouts and writes the run folder exactly as stria fit on one
//     machine does, then removes the tasks' statistics and writes
//     complete.json last.

// checkArrayFit refuses a config whose fit cannot be spread over array
// tasks: a model that needs every trial, or responses that are not .npy.
func checkArrayFit(cfg *settings.Config) error {
	if why := train.Streamable(cfg); why != "" {
		return fmt.Errorf("fit: array tasks fit from statistics per condition, but %s; run stria fit without array tasks", why)
	}
	if !strings.EqualFold(filepath.Ext(cfg.Data.Responses), ".npy") {
		return fmt.Errorf("fit: array tasks read ranges of neurons of a .npy responses file; %s is not one (convert it, or run stria fit without array tasks)", cfg.Data.Responses)
	}
	return nil
}

// checkArrayFolder refuses an output folder that another stria is
// writing, that holds a finished run, or that holds anything but the
// array tasks' statistics.
func checkArrayFolder(dir string) error {
	if err := runfolder.CheckUnlocked(dir); err != nil {
		return err
	}
	ents, err := os.ReadDir(dir)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil
		}
		return err
	}
	var other []string
	for _, e := range ents {
		if name := e.Name(); name != runfolder.DirArrayTasks && !strings.HasPrefix(name, runfolder.FileLock) {
			other = append(other, name)
		}
	}
	if len(other) > 0 {
		return fmt.Errorf("output folder %s holds %s besides the array tasks' statistics (%s): a fit spread over array tasks writes into a new or empty folder; give another --out", dir, strings.Join(other, ", "), runfolder.DirArrayTasks)
	}
	return nil
}

// runFitArrayTask runs array task i of n of a fit: one pass over its range
// of neurons, the statistics written into the run folder.
func runFitArrayTask(cfg *settings.Config, i, n int, stdout io.Writer) error {
	if err := checkArrayFit(cfg); err != nil {
		return err
	}
	dir := cfg.Output
	cfgYAML, err := cfg.Marshal()
	if err != nil {
		return err
	}
	if err := runfolder.CheckWritable(dir); err != nil {
		return err
	}
	if err := checkArrayFolder(dir); err != nil {
		return err
	}
	rec, s, err := data.LoadStream(cfg.Source())
	if err != nil {
		return err
	}
	defer s.Close()
	p, plan, err := train.PlanParts(cfg, rec, s.Rows())
	if err != nil {
		return err
	}
	n0, n1 := train.NeuronRange(i, n, s.Cols())
	parts, err := condstats.AccumulateParts(s.Columns(n0, n1), plan, condstats.StreamOptions{})
	if err != nil {
		return err
	}
	if err := rec.Unchanged(); err != nil {
		return err
	}
	a := runfolder.ArrayStats{Task: i, Tasks: n, Neurons: [2]int{n0, n1}, TotalNeurons: s.Cols(), Trials: s.Rows(),
		Fingerprint: runfolder.Fingerprint{Settings: cfgYAML, Files: rec.Files()}, Blocks: rangeBlocks(n0, n1)}
	// The block sums come after the statistics are written: they take
	// over the training and validation sums.
	sums := func() ([]projection.BlockSums, error) {
		if err := p.SetParts(parts); err != nil {
			return nil, err
		}
		return train.RangeSums(p)
	}
	if err := runfolder.WriteArrayStats(dir, a, parts, sums); err != nil {
		return err
	}
	if stdout != nil {
		what := rangeText(n0, n1, n, s.Cols())
		if n1 > n0 {
			what += " read"
		}
		fmt.Fprintf(stdout, "array task %d of %d: %s; statistics in %s\nwhen every task has run: stria gather %s (or, in stages: stria gather --filters %s, then this command with --readouts, then stria gather %s)\n",
			i, n, what, runfolder.ArrayTaskDir(dir, i, n), dir, dir, dir)
	}
	return nil
}

// rangeText describes the neurons [n0, n1) of one of n array tasks over N
// neurons, saying why a task has none.
func rangeText(n0, n1, n, N int) string {
	if n1 > n0 {
		return fmt.Sprintf("neurons %d-%d of %d (0-based)", n0, n1-1, N)
	}
	return "no neurons (" + taskCountNote(n, N) + ")"
}

// taskCountNote says, when n array tasks are more than the blocks of
// projection.SumBlock neurons that N neurons make, that some tasks will
// have nothing to do; "" otherwise.
func taskCountNote(n, N int) string {
	k := (N + projection.SumBlock - 1) / projection.SumBlock
	if n <= k {
		return ""
	}
	get, enough := "get no neurons and finish", fmt.Sprintf("%d tasks are", k)
	if n-k == 1 {
		get = "gets no neurons and finishes"
	}
	if k == 1 {
		enough = "1 task is"
	}
	return fmt.Sprintf("the tasks share out blocks of %d neurons, and %d neurons make %d; with %d tasks, %d of them %s at once: %s enough", projection.SumBlock, N, k, n, n-k, get, enough)
}

// rangeBlocks returns the blocks of projection.SumBlock neurons [first,
// last+1) of the neurons [n0, n1) (n0 at a block boundary).
func rangeBlocks(n0, n1 int) [2]int {
	const b = projection.SumBlock
	return [2]int{n0 / b, (n1 + b - 1) / b}
}

// isFitArrayFolder reports whether dir holds array tasks of a fit.
func isFitArrayFolder(dir string) bool {
	m, err := runfolder.ArrayTasks(dir)
	return err == nil && len(m) > 0
}

// arrayTaskCount checks that every array task of a fit in dir has
// written its statistics and returns their number.
func arrayTaskCount(dir, cmd string) (int, error) {
	m, err := runfolder.ArrayTasks(dir)
	if err != nil {
		return 0, err
	}
	if len(m) > 1 {
		var counts []string
		for n := range m {
			counts = append(counts, fmt.Sprint(n))
		}
		slices.Sort(counts)
		return 0, fmt.Errorf("%s: %s holds array tasks of %s tasks in all: the tasks of one fit share --array-task-count; remove the folders under %s of the runs you do not want", cmd, dir, strings.Join(counts, " and "), runfolder.DirArrayTasks)
	}
	var n int
	for k := range m {
		n = k
	}
	var missing []string
	for i := 1; i <= n; i++ {
		if !slices.Contains(m[n], i) {
			missing = append(missing, fmt.Sprint(i))
		}
	}
	if len(missing) > 0 {
		return 0, fmt.Errorf("%s: array task(s) %s of %d have not finished (no %s in their folders under %s): run them again (with Slurm: sbatch --array=%s ...), then %s",
			cmd, strings.Join(missing, ", "), n, runfolder.FileArrayStats, filepath.Join(dir, runfolder.DirArrayTasks), strings.Join(missing, ","), cmd)
	}
	return n, nil
}

// arrayConfig returns the settings array task 1 of n ran with, for the
// run folder dir.
func arrayConfig(dir string, n int) (*settings.Config, *runfolder.ArrayStats, error) {
	a1, _, err := runfolder.ReadArrayStats(dir, 1, n, -1)
	if err != nil {
		return nil, nil, err
	}
	cfg, err := settings.ParseConfig(a1.Fingerprint.Settings, filepath.Join(runfolder.ArrayTaskDir(dir, 1, n), runfolder.FileArrayStats)+" (settings)")
	if err != nil {
		return nil, nil, err
	}
	if err := cfg.Validate(); err != nil {
		return nil, nil, err
	}
	if cfg.Output, err = filepath.Abs(dir); err != nil {
		return nil, nil, err
	}
	return cfg, a1, nil
}

// gatherFit is stria gather of a fit spread over array tasks. With only
// the tasks' statistics it fits from their joined statistics and writes
// the run folder (runFit with the statistics read from the tasks). After
// the reduce (stria gather --filters) it needs every task's readouts and
// joins them into the run folder.
func gatherFit(ctx context.Context, dir string, o fitOptions) error {
	n, err := arrayTaskCount(dir, "stria gather "+dir)
	if err != nil {
		return err
	}
	cfg, a1, err := arrayConfig(dir, n)
	if err != nil {
		return err
	}
	o.gather = &arrayGather{tasks: n, settings: a1.Fingerprint.Settings}
	if _, err := os.Stat(filepath.Join(runfolder.ArrayFiltersDir(dir), runfolder.FileArrayFilters)); err == nil {
		if o.gather.merge, err = readMerge(cfg, dir, n); err != nil {
			return err
		}
	}
	_, err = runFit(ctx, cfg, o)
	return err
}

// arrayGather is what runFit needs to fit from array tasks' statistics.
type arrayGather struct {
	tasks    int
	settings []byte // the settings every task must have run with
	// merge, when not nil, holds the reduce's filters: runFit joins the
	// tasks' readouts instead of fitting.
	merge *runfolder.Filters
	// readErr is the first error reading the tasks' readout weights
	// while the run folder's are written.
	readErr error
	// closeRows closes the tasks' readout weight files (nil until open).
	closeRows func()
}

// prepareGathered prepares the recording from the array tasks'
// statistics: it plans the pass as each task did, checks every task's
// fingerprint, range and counts against it, and joins the statistics part
// by part (one part of every task in memory at a time).
func prepareGathered(cfg *settings.Config, g *arrayGather, phase func(string)) (*data.Recording, *train.Prepared, error) {
	dir := cfg.Output
	rec, s, err := data.LoadStream(cfg.Source())
	if err != nil {
		return nil, nil, err
	}
	s.Close()
	p, plan, err := train.PlanParts(cfg, rec, s.Rows())
	if err != nil {
		return nil, nil, err
	}
	want := runfolder.Fingerprint{Settings: g.settings, Files: rec.Files()}
	joined := make([]*condstats.PartStats, runfolder.ArrayParts)
	for k := range joined {
		ranges := make([]*condstats.PartStats, g.tasks)
		for i := 1; i <= g.tasks; i++ {
			a, ps, err := runfolder.ReadArrayStats(dir, i, g.tasks, k)
			if err != nil {
				return nil, nil, err
			}
			file := filepath.Join(runfolder.ArrayTaskDir(dir, i, g.tasks), runfolder.FileArrayStats)
			if k == 0 {
				if diff := want.Mismatch(a.Fingerprint, settings.DiffSettings); len(diff) > 0 {
					return nil, nil, fmt.Errorf("gather: %s was written with other settings or data than array task 1 and the files now; refusing to mix them (its value -> the value now):\n  %s\nrun that task again", file, strings.Join(diff, "\n  "))
				}
				n0, n1 := train.NeuronRange(i, g.tasks, s.Cols())
				if a.Neurons != [2]int{n0, n1} || a.TotalNeurons != s.Cols() || a.Trials != s.Rows() {
					return nil, nil, fmt.Errorf("gather: %s holds neurons %d-%d of %d and %d trials, want neurons %d-%d of %d and %d trials; run that task again",
						file, a.Neurons[0], a.Neurons[1]-1, a.TotalNeurons, a.Trials, n0, n1-1, s.Cols(), s.Rows())
				}
			}
			if !slices.Equal(ps.Count, planCounts(plan, k)) {
				return nil, nil, fmt.Errorf("gather: %s: the %s trials per condition differ from the split of these settings; run that task again", file, []string{"training", "validation", "test", "all"}[k])
			}
			ranges[i-1] = ps
		}
		if joined[k], err = condstats.JoinNeurons(ranges...); err != nil {
			return nil, nil, fmt.Errorf("gather: %s: %w", dir, err)
		}
		ranges = nil
		runtime.GC() // the ranges are joined: their memory serves the next part
	}
	phase(fmt.Sprintf("read and join the statistics of %d array tasks", g.tasks))
	if err := p.SetParts(joined); err != nil {
		return nil, nil, err
	}
	phase("bin, check, split, normalise")
	return rec, p, nil
}

// planCounts returns the trials per condition of part k of plan (k ==
// len(plan.Specs): all its trials).
func planCounts(plan condstats.StreamPlan, k int) []int {
	c := make([]int, plan.NBins)
	for t, q := range plan.Part {
		if q != condstats.NoPart && (q == k || k == len(plan.Specs)) {
			c[plan.Cond[t]]++
		}
	}
	return c
}

// printFitSlurmScript prints a bash script that submits the fit as a Slurm
// job array of n tasks and the gather job after it (afterok).
func printFitSlurmScript(w io.Writer, config, out string, n int) error {
	cfgAbs, err := filepath.Abs(config)
	if err != nil {
		return err
	}
	exe, err := os.Executable()
	if err != nil {
		exe = "stria"
	}
	_, err = fmt.Fprintf(w, fitSlurmScript, n, shellQuote(exe), shellQuote(cfgAbs), shellQuote(out), n, n, n, n, n)
	return err
}

// shellQuote quotes s for a POSIX shell (single quotes).
func shellQuote(s string) string {
	return "'" + strings.ReplaceAll(s, "'", `'\''`) + "'"
}

const fitSlurmScript = `#!/bin/bash
# stria fit spread over a Slurm job array of %d tasks, in four jobs.
# Run this script with bash (not sbatch): it submits, each job after the
# one before has succeeded (afterok):
#   1. the job array: each task reads its range of neurons once and writes
#      their statistics and their sums for the filters into the run folder
#      (stria fit --array-task I ...);
#   2. the reduce: one job adds the tasks' sums and trains the filters
#      (stria gather --filters FOLDER; it reads no task's statistics);
#   3. the job array again: each task solves and scores the readouts of its
#      neurons at those filters (stria fit --array-task I ... --readouts);
#   4. one job that joins them into the run folder (stria gather FOLDER).
# Extra arguments go to sbatch for the last job (e.g. --wait).
# A failed task can be rerun alone: sbatch --array=K with the same command,
# then the next stages. All tasks must see the same files and folder.
# The logs go to the folder this script is run from.
# Edit the resources to suit: a task holds about 3 KB per neuron of its
# range; the reduce a few MB; the last job writes the run folder (about
# 0.6 KB per neuron) holding about 0.2 KB per neuron.
set -euo pipefail
STRIA=${STRIA:-%s}
CONFIG=%s
OUT=%s
q() { printf "'%%s'" "${1//\'/\'\\\'\'}"; }
task="$(q "$STRIA") fit --config $(q "$CONFIG") --out $(q "$OUT") --array-task \$SLURM_ARRAY_TASK_ID --array-task-count %d --quiet"
stats=$(sbatch --parsable --job-name=stria-fit-stats --array=1-%d \
	--cpus-per-task=2 --mem=8G --time=04:00:00 --output="stria-fit-task-%%a-of-%d.log" \
	--wrap "$task")
echo "submitted the statistics job array: $stats"
filters=$(sbatch --parsable --job-name=stria-fit-filters --dependency=afterok:"${stats%%%%;*}" --kill-on-invalid-dep=yes \
	--cpus-per-task=2 --mem=2G --time=04:00:00 --output=stria-fit-filters.log \
	--wrap "$(q "$STRIA") gather --filters $(q "$OUT")")
echo "submitted the reduce (filters): $filters"
readouts=$(sbatch --parsable --job-name=stria-fit-readouts --array=1-%d --dependency=afterok:"${filters%%%%;*}" --kill-on-invalid-dep=yes \
	--cpus-per-task=2 --mem=8G --time=04:00:00 --output="stria-fit-readouts-%%a-of-%d.log" \
	--wrap "$task --readouts")
echo "submitted the readout job array: $readouts"
gather=$(sbatch --parsable --job-name=stria-fit-gather --dependency=afterok:"${readouts%%%%;*}" --kill-on-invalid-dep=yes \
	--cpus-per-task=2 --mem=8G --time=04:00:00 --output=stria-fit-gather.log "$@" \
	--wrap "$(q "$STRIA") gather $(q "$OUT")")
echo "submitted the gather job: $gather (after the readouts succeed)"
`
