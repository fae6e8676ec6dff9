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
)

func compareCommand() *cli.Command {
	return &cli.Command{
		Name:      "compare",
		Usage:     "cross-validate encoder settings and per-neuron baselines on the same folds",
		ArgsUsage: " ",
		Flags: append(dataFlags(),
			&cli.StringFlag{Name: "shard", Usage: "run only shard `I/N` of the units (1-based), then stop; merge with stria merge"},
			&cli.IntFlag{Name: "workers", Usage: "units run at once (0: one per core)"},
			&cli.IntFlag{Name: "print-array-script", Usage: "print a Slurm job-array script for `N` shards and exit"},
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
			if n := c.Int("print-array-script"); n > 0 {
				return printArrayScript(c.App.Writer, c.String("config"), cfg.Compare.Output, n)
			}
			ctx, stop := signal.NotifyContext(c.Context, os.Interrupt, syscall.SIGTERM)
			defer stop()
			o := compareOptions{shard: c.String("shard"), workers: c.Int("workers"), quiet: c.Bool("quiet")}
			_, err = runCompare(ctx, cfg, c.App.Writer, c.App.ErrWriter, o)
			return err
		},
	}
}

func mergeCommand() *cli.Command {
	return &cli.Command{
		Name:      "merge",
		Usage:     "check that every unit of a sharded comparison is done and write its outputs",
		ArgsUsage: "COMPARE_FOLDER",
		Action: func(c *cli.Context) error {
			if err := oneFolderArg(c); err != nil {
				return err
			}
			dir := c.Args().First()
			cfg, err := train.LoadConfig(filepath.Join(dir, train.FileConfig))
			if err != nil {
				return fmt.Errorf("merge: %s is not a comparison folder: %w", dir, err)
			}
			if cfg.Compare.Output, err = filepath.Abs(dir); err != nil {
				return err
			}
			plan, err := train.NewPlan(cfg)
			if err != nil {
				return err
			}
			return mergePlan(c.App.Writer, plan)
		},
	}
}

type compareOptions struct {
	shard   string
	workers int
	quiet   bool
}

// runCompare runs the units of a comparison (all of them, or one shard)
// and, when it ran all of them, merges the results.
func runCompare(ctx context.Context, cfg *train.Config, stdout, stderr io.Writer, o compareOptions) ([]*train.Comparison, error) {
	plan, err := train.NewPlan(cfg)
	if err != nil {
		return nil, err
	}
	units := plan.Units
	if o.shard != "" {
		i, n, err := train.ParseShard(o.shard)
		if err != nil {
			return nil, err
		}
		units = plan.Shard(i, n)
	}
	// The resolved config goes into the folder first: shards and merge
	// read the plan from it.
	out := cfg.Compare.Output
	if err := os.MkdirAll(out, 0o755); err != nil {
		return nil, err
	}
	b, err := cfg.Marshal()
	if err != nil {
		return nil, err
	}
	if err := train.WriteAtomic(filepath.Join(out, train.FileConfig), func(w io.Writer) error { _, err := w.Write(b); return err }); err != nil {
		return nil, err
	}
	done := 0
	progress := func(u train.Unit, skipped bool) {
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
	if o.shard != "" {
		fmt.Fprintf(stdout, "shard %s: %d units done in %s; when every shard has run: stria merge %s\n", o.shard, len(units), filepath.Join(out, train.UnitsDir), out)
		return nil, nil
	}
	return nil, mergePlan(stdout, plan)
}

// mergePlan merges the units of a plan and prints the results.
func mergePlan(w io.Writer, plan *train.Plan) error {
	cmps, err := plan.Merge()
	if err != nil {
		return err
	}
	out := plan.Cfg.Compare.Output
	fmt.Fprintf(w, "comparison folder: %s\n", out)
	for _, c := range cmps {
		if c.Recording != "" {
			fmt.Fprintf(w, "\n-- recording %s (folder %s)\n", c.Recording, filepath.Join(out, c.Recording))
		}
		train.PrintComparison(w, c)
	}
	if len(cmps) > 1 {
		fmt.Fprintf(w, "\n-- all %d recordings, neurons pooled (also %s: every recording's medians)\n", len(cmps), train.FileRecordings)
		train.PrintComparison(w, train.Pool(cmps))
	}
	for _, c := range train.Cautions {
		fmt.Fprintln(w, "note:", c)
	}
	return nil
}

// printArrayScript prints a Slurm job-array script that runs one shard per
// array task.
func printArrayScript(w io.Writer, config, out string, n int) error {
	cfgAbs, err := filepath.Abs(config)
	if err != nil {
		return err
	}
	exe, err := os.Executable()
	if err != nil {
		exe = "stria"
	}
	_, err = fmt.Fprintf(w, arrayScript, n, n, exe, cfgAbs, out, n, out)
	return err
}

const arrayScript = `#!/bin/bash
# stria comparison as a Slurm job array: one shard per array task.
# Submit:  sbatch this-script.sh
# Then, when every task has finished:  stria merge COMPARE_FOLDER
# A failed or killed task can be rerun alone (sbatch --array=K this-script.sh);
# units it finished before are not redone.
#SBATCH --job-name=stria-compare
#SBATCH --array=1-%d
#SBATCH --cpus-per-task=2
#SBATCH --mem=8G
#SBATCH --time=04:00:00
#SBATCH --output=stria-shard-%%a-of-%d.log
set -euo pipefail
STRIA=${STRIA:-%s}
"$STRIA" compare --config %q --out %q --shard "${SLURM_ARRAY_TASK_ID}/%d" --quiet
# merge afterwards: "$STRIA" merge %q
`
