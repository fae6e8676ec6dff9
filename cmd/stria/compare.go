package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"strings"
	"syscall"
	"time"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/train/compare"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
	"github.com/strialab/stria/train/settings"
)

func compareCommand() *cli.Command {
	return &cli.Command{
		Name:      "compare",
		Usage:     "cross-validate encoder settings and per-neuron baselines on the same folds",
		ArgsUsage: " ",
		Flags: append(dataFlags(),
			&cli.IntFlag{Name: "array-task", Usage: "run only array task `I` (1-based) of --array-task-count, then stop; when every task has run: stria gather FOLDER"},
			&cli.IntFlag{Name: "array-task-count", Usage: "the number `N` of array tasks the units are dealt to (each task runs a run of consecutive units: a few recordings, fold by fold)"},
			&cli.IntFlag{Name: "workers", Usage: "units run at once (0: one per core)"},
			&cli.IntFlag{Name: "slurm-script", Usage: "print a Slurm job-array script for `N` array tasks and exit"},
			&cli.BoolFlag{Name: "overwrite", Usage: "start the comparison folder afresh: its files, finished units included, are deleted first"},
			&cli.BoolFlag{Name: "quiet", Aliases: []string{"q"}, Usage: "no progress lines"},
			&cli.BoolFlag{Name: "timings", Usage: "print the wall time of each phase to stderr at the end"},
		),
		Action: func(c *cli.Context) error {
			if err := noArgs(c); err != nil {
				return err
			}
			cfg, err := loadConfig(c)
			if err != nil {
				return err
			}
			if v := c.String("out"); v != "" {
				cfg.Compare.Output = cfg.Output
			}
			if n := c.Int("slurm-script"); n > 0 {
				return printSlurmScript(c.App.Writer, c.String("config"), cfg.Compare.Output, n)
			}
			o := compareOptions{workers: c.Int("workers"), quiet: c.Bool("quiet"), overwrite: c.Bool("overwrite"), timings: c.Bool("timings")}
			if o.task, o.tasks, err = arrayTask(c, os.Getenv); err != nil {
				return err
			}
			if o.overwrite && o.tasks > 0 {
				return fmt.Errorf("compare: --overwrite would delete the other array tasks' results: empty the folder once before the array runs (or use a new --out)")
			}
			ctx, stop := signal.NotifyContext(c.Context, os.Interrupt, syscall.SIGTERM)
			defer stop()
			_, err = runCompare(ctx, cfg, c.App.Writer, c.App.ErrWriter, o)
			return err
		},
	}
}

// arrayTask reads --array-task and --array-task-count of compare or fit,
// or, when neither is given, Slurm's job-array environment (and says so on
// stderr). 0, 0: not an array task (run every unit, or every neuron).
func arrayTask(c *cli.Context, getenv func(string) string) (i, n int, err error) {
	given, count := c.IsSet("array-task"), c.IsSet("array-task-count")
	if given != count {
		return 0, 0, fmt.Errorf("%s: give both --array-task and --array-task-count (or neither)", c.Command.Name)
	}
	if given {
		i, n = c.Int("array-task"), c.Int("array-task-count")
		return i, n, compare.CheckArrayTask(i, n)
	}
	i, n, ok, err := compare.ArrayTaskFromEnv(getenv)
	if err != nil || !ok {
		return 0, 0, err
	}
	fmt.Fprintf(c.App.ErrWriter, "%s: array task %d of %d, from %s=%s, %s=%s and %s=%s (give --array-task and --array-task-count to override)\n",
		c.Command.Name, i, n, compare.EnvTaskID, getenv(compare.EnvTaskID), compare.EnvTaskMin, getenv(compare.EnvTaskMin), compare.EnvTaskCount, getenv(compare.EnvTaskCount))
	return i, n, nil
}

func gatherCommand() *cli.Command {
	return &cli.Command{
		Name:      "gather",
		Usage:     "check that every array task of a comparison or a fit is done and write the results (a fit: join the statistics, fit and write the run folder; or in stages: --filters, then the tasks' --readouts, then gather)",
		ArgsUsage: "FOLDER",
		Flags: []cli.Flag{&cli.BoolFlag{Name: "timings", Usage: "print the wall time of each phase of a comparison's gather to stderr at the end"},
			&cli.BoolFlag{Name: "filters", Usage: "a fit over array tasks in stages: add the tasks' sums and train the filters only (then stria fit ... --array-task I --readouts, then stria gather FOLDER)"}},
		Action: func(c *cli.Context) error {
			if err := oneFolderArg(c); err != nil {
				return err
			}
			dir := c.Args().First()
			if isFitArrayFolder(dir) {
				ctx, stop := signal.NotifyContext(c.Context, os.Interrupt, syscall.SIGTERM)
				defer stop()
				if c.Bool("filters") {
					return reduceFit(ctx, dir, c.App.Writer)
				}
				return gatherFit(ctx, dir, fitOptions{quiet: true, stdout: c.App.Writer, stderr: c.App.ErrWriter})
			}
			if c.Bool("filters") {
				return fmt.Errorf("gather: --filters trains the filters of a fit over array tasks, but %s holds no array tasks of a fit", dir)
			}
			if k, err := runfolder.Kind(dir); err == nil && k == runfolder.KindRun {
				return fmt.Errorf("gather: %s is a run folder (written by stria fit); gather takes the folder of stria compare", dir)
			}
			cfg, err := runfolder.LoadSettings(dir)
			if err != nil {
				return fmt.Errorf("gather: %s is not a comparison folder: %w", dir, err)
			}
			if cfg.Compare.Output, err = filepath.Abs(dir); err != nil {
				return err
			}
			start := time.Now()
			plan, err := compare.NewPlan(cfg)
			if err != nil {
				return err
			}
			if c.Bool("timings") {
				plan.Timings = compare.NewTimings()
				defer func() {
					plan.Timings.Since("stria gather, wall time in all", start)
					plan.Timings.Write(c.App.ErrWriter)
				}()
			}
			lock, note, err := runfolder.AcquireLock(dir, strings.Join(os.Args, " "))
			if err != nil {
				return err
			}
			defer lock.Release()
			if note != "" {
				fmt.Fprintln(c.App.ErrWriter, "note:", note)
			}
			return gatherPlan(c.App.Writer, plan)
		},
	}
}

type compareOptions struct {
	// task and tasks select array task task of tasks (1-based); 0, 0:
	// every unit, then gather.
	task, tasks int
	workers     int
	quiet       bool
	// overwrite empties the comparison folder first (not with array
	// tasks); without it finished units are reused when their
	// fingerprints match.
	overwrite bool
	// timings prints the wall time of each phase to stderr at the end.
	timings bool
}

// runCompare runs the units of a comparison (all of them, or one array
// task's) and, when it ran all of them, gathers the results.
//
// Everything that can fail is checked before anything is written: the
// config, the output folder, every recording's data and folds, and the
// fingerprints of the units already finished (a unit computed with other
// settings or data is refused, not reused). An array task also refuses a
// folder whose settings.yaml holds other settings. The whole comparison
// (not an array task, which shares the folder with the others) locks the
// folder.
func runCompare(ctx context.Context, cfg *settings.Config, stdout, stderr io.Writer, o compareOptions) ([]*comparefolder.Comparison, error) {
	start := time.Now()
	plan, err := compare.NewPlan(cfg)
	if err != nil {
		return nil, err
	}
	if o.timings {
		plan.Timings = compare.NewTimings()
		defer func() {
			plan.Timings.Since("stria compare, wall time in all", start)
			plan.Timings.Write(stderr)
		}()
	}
	plan.Timings.Since("plan", start)
	// The settings as given, before preparing the data resolves the axis.
	settings, err := cfg.Marshal()
	if err != nil {
		return nil, err
	}
	units := plan.Units
	if o.tasks > 0 {
		units = plan.ArrayTask(o.task, o.tasks)
	} else {
		plan.KeepResults = true // this run gathers next
	}
	out := cfg.Compare.Output
	if err := checkCompareFolder(out, cfg, o); err != nil {
		return nil, err
	}
	check := func() error {
		if o.overwrite {
			return plan.CheckData(units)
		}
		return plan.Check(units)
	}
	phase := time.Now()
	if err := check(); err != nil {
		return nil, err
	}
	plan.Timings.Since("check (wall)", phase)
	if o.tasks == 0 {
		lock, note, err := runfolder.AcquireLock(out, strings.Join(os.Args, " "))
		if err != nil {
			return nil, err
		}
		defer lock.Release()
		if note != "" {
			fmt.Fprintln(stderr, "note:", note)
		}
		if o.overwrite {
			if err := runfolder.Empty(out); err != nil {
				return nil, err
			}
		}
		if _, err := runfolder.RemoveStaleTemps(out); err != nil {
			return nil, err
		}
	}
	// The resolved settings go into the folder first: array tasks and
	// gather read the plan from them. An earlier comparison's completion
	// marker goes: the folder is incomplete until gathered.
	if err := plan.Begin(); err != nil {
		return nil, err
	}
	if err := runfolder.WriteBytes(filepath.Join(out, runfolder.FileSettings), settings); err != nil {
		return nil, err
	}
	done := 0
	progress := func(u compare.Unit, skipped bool) {
		done++
		if o.quiet {
			return
		}
		what := "done"
		if skipped {
			what = "already done"
		}
		fmt.Fprintf(stderr, "  [%d/%d] %s %s\n", done, len(units), u.ID, what)
	}
	phase = time.Now()
	if err := plan.RunUnits(ctx, units, o.workers, progress); err != nil {
		return nil, err
	}
	phase = plan.Timings.Since("run units (wall)", phase)
	if o.tasks > 0 {
		fmt.Fprintf(stdout, "array task %d of %d: %d units done in %s; when every task has run: stria gather %s\n", o.task, o.tasks, len(units), filepath.Join(out, runfolder.DirFoldResults), out)
		return nil, nil
	}
	err = gatherPlan(stdout, plan)
	plan.Timings.Since("gather and print (wall)", phase)
	return nil, err
}

// checkCompareFolder refuses an output path that cannot be written, a run
// folder or a folder of other files; for an array task, a folder locked by
// a whole comparison or one whose settings.yaml holds other settings than
// cfg (the array tasks of one comparison must share them).
func checkCompareFolder(out string, cfg *settings.Config, o compareOptions) error {
	if err := runfolder.CheckWritable(out); err != nil {
		return err
	}
	if err := runfolder.CheckUnlocked(out); err != nil {
		return err
	}
	what, err := runfolder.Holds(out)
	if err != nil || what == "" {
		return err
	}
	kind, kerr := runfolder.Kind(out)
	if kerr != nil && !fileExists(filepath.Join(out, runfolder.FileSettings)) {
		return fmt.Errorf("output folder %s holds %s; choose an empty or new output folder (--out)", out, what)
	}
	if kind == runfolder.KindRun || kind == runfolder.KindAcuity {
		return fmt.Errorf("output folder %s holds %s; a comparison needs its own folder (--out)", out, what)
	}
	if o.overwrite {
		return runfolder.CheckEmptiable(out)
	}
	if o.tasks == 0 {
		return nil
	}
	if !fileExists(filepath.Join(out, runfolder.FileSettings)) {
		return nil
	}
	oldCfg, err := runfolder.LoadSettings(out)
	if err != nil {
		return err
	}
	a, err := oldCfg.NumericSettings()
	if err != nil {
		return err
	}
	b, err := cfg.NumericSettings()
	if err != nil {
		return err
	}
	if string(a) != string(b) {
		diff, _ := settings.DiffSettings(a, b)
		return fmt.Errorf("%s: its %s (written by an earlier comparison or array task) holds other settings; the array tasks of one comparison must share them:\n  %s\nuse a new output folder for these settings",
			out, runfolder.FileSettings, strings.Join(diff, "\n  "))
	}
	return nil
}

// gatherPlan gathers the units of a plan and prints the results.
func gatherPlan(w io.Writer, plan *compare.Plan) error {
	cmps, err := plan.Gather()
	if err != nil {
		return err
	}
	out := plan.Dir()
	fmt.Fprintf(w, "comparison folder: %s\n", out)
	var cautions []string
	for _, c := range cmps {
		if c.Recording != "" {
			fmt.Fprintf(w, "\n-- recording %s (folder %s)\n", c.Recording, filepath.Join(out, c.Recording))
		}
		for _, m := range c.Warnings {
			fmt.Fprintln(w, "warning:", m)
		}
		compare.PrintComparison(w, c)
		cautions = append(cautions, c.Cautions...)
	}
	if len(cmps) > 1 {
		fmt.Fprintf(w, "\n-- all %d recordings, neurons pooled (also %s: every recording's medians)\n", len(cmps), runfolder.FilePerRecording)
		compare.PrintComparison(w, compare.Pool(cmps))
	}
	for _, c := range compare.Dedup(cautions) {
		fmt.Fprintln(w, "note:", c)
	}
	return nil
}

// printSlurmScript prints a Slurm job-array script that runs one array
// task of the comparison per Slurm array task.
func printSlurmScript(w io.Writer, config, out string, n int) error {
	cfgAbs, err := filepath.Abs(config)
	if err != nil {
		return err
	}
	exe, err := os.Executable()
	if err != nil {
		exe = "stria"
	}
	_, err = fmt.Fprintf(w, slurmScript, n, n, exe, cfgAbs, out, n, out)
	return err
}

const slurmScript = `#!/bin/bash
# stria comparison as a Slurm job array: one array task per Slurm task.
# Submit:  sbatch this-script.sh
# Then, when every task has finished:  stria gather COMPARE_FOLDER
# A failed or killed task can be rerun alone (sbatch --array=K this-script.sh);
# units it finished before are not redone.
#SBATCH --job-name=stria-compare
#SBATCH --array=1-%d
#SBATCH --cpus-per-task=2
#SBATCH --mem=8G
#SBATCH --time=04:00:00
#SBATCH --output=stria-task-%%a-of-%d.log
set -euo pipefail
STRIA=${STRIA:-%s}
"$STRIA" compare --config %q --out %q --array-task "${SLURM_ARRAY_TASK_ID}" --array-task-count %d --quiet
# gather afterwards: "$STRIA" gather %q
`
