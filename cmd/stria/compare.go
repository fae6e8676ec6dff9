package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"syscall"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/compare"
	"github.com/strialab/stria/train/runfolder"
)

func compareCommand() *cli.Command {
	return &cli.Command{
		Name:      "compare",
		Usage:     "cross-validate encoder settings and per-neuron baselines on the same folds",
		ArgsUsage: " ",
		Flags: append(dataFlags(),
			&cli.IntFlag{Name: "array-task", Usage: "run only array task `I` (1-based) of --array-task-count, then stop; when every task has run: stria gather FOLDER"},
			&cli.IntFlag{Name: "array-task-count", Usage: "the number `N` of array tasks the units are dealt to (every N-th unit goes to one task)"},
			&cli.IntFlag{Name: "workers", Usage: "units run at once (0: one per core)"},
			&cli.IntFlag{Name: "slurm-script", Usage: "print a Slurm job-array script for `N` array tasks and exit"},
			&cli.BoolFlag{Name: "quiet", Aliases: []string{"q"}, Usage: "no progress lines"},
		),
		Action: func(c *cli.Context) error {
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
			o := compareOptions{workers: c.Int("workers"), quiet: c.Bool("quiet")}
			if o.task, o.tasks, err = arrayTask(c, os.Getenv); err != nil {
				return err
			}
			ctx, stop := signal.NotifyContext(c.Context, os.Interrupt, syscall.SIGTERM)
			defer stop()
			_, err = runCompare(ctx, cfg, c.App.Writer, c.App.ErrWriter, o)
			return err
		},
	}
}

// arrayTask reads --array-task and --array-task-count, or, when neither is
// given, Slurm's job-array environment (and says so on stderr). 0, 0: run
// every unit.
func arrayTask(c *cli.Context, getenv func(string) string) (i, n int, err error) {
	given, count := c.IsSet("array-task"), c.IsSet("array-task-count")
	if given != count {
		return 0, 0, fmt.Errorf("compare: give both --array-task and --array-task-count (or neither)")
	}
	if given {
		i, n = c.Int("array-task"), c.Int("array-task-count")
		return i, n, compare.CheckArrayTask(i, n)
	}
	i, n, ok, err := compare.ArrayTaskFromEnv(getenv)
	if err != nil || !ok {
		return 0, 0, err
	}
	fmt.Fprintf(c.App.ErrWriter, "compare: array task %d of %d, from %s=%s, %s=%s and %s=%s (give --array-task and --array-task-count to override)\n",
		i, n, compare.EnvTaskID, getenv(compare.EnvTaskID), compare.EnvTaskMin, getenv(compare.EnvTaskMin), compare.EnvTaskCount, getenv(compare.EnvTaskCount))
	return i, n, nil
}

func gatherCommand() *cli.Command {
	return &cli.Command{
		Name:      "gather",
		Usage:     "check that every unit of a comparison run as array tasks is done and write its outputs",
		ArgsUsage: "COMPARE_FOLDER",
		Action: func(c *cli.Context) error {
			if err := oneFolderArg(c); err != nil {
				return err
			}
			dir := c.Args().First()
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
			plan, err := compare.NewPlan(cfg)
			if err != nil {
				return err
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
}

// runCompare runs the units of a comparison (all of them, or one array
// task's) and, when it ran all of them, gathers the results.
func runCompare(ctx context.Context, cfg *train.Config, stdout, stderr io.Writer, o compareOptions) ([]*runfolder.Comparison, error) {
	plan, err := compare.NewPlan(cfg)
	if err != nil {
		return nil, err
	}
	units := plan.Units
	if o.tasks > 0 {
		units = plan.ArrayTask(o.task, o.tasks)
	}
	// The resolved settings go into the folder first: array tasks and
	// gather read the plan from them. An earlier comparison's completion
	// marker goes: the folder is incomplete until gathered.
	out := cfg.Compare.Output
	if err := plan.Begin(); err != nil {
		return nil, err
	}
	b, err := cfg.Marshal()
	if err != nil {
		return nil, err
	}
	if err := runfolder.WriteBytes(filepath.Join(out, runfolder.FileSettings), b); err != nil {
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
	if err := plan.RunUnits(ctx, units, o.workers, progress); err != nil {
		return nil, err
	}
	if o.tasks > 0 {
		fmt.Fprintf(stdout, "array task %d of %d: %d units done in %s; when every task has run: stria gather %s\n", o.task, o.tasks, len(units), filepath.Join(out, runfolder.DirFoldResults), out)
		return nil, nil
	}
	return nil, gatherPlan(stdout, plan)
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
