package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"

	"github.com/urfave/cli/v2"

	"stria/train"
)

func compareCommand() *cli.Command {
	return &cli.Command{
		Name:      "compare",
		Usage:     "cross-validate encoder settings and per-neuron baselines on the same folds",
		ArgsUsage: " ",
		Flags: append(dataFlags(),
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
			ctx, stop := signal.NotifyContext(c.Context, os.Interrupt, syscall.SIGTERM)
			defer stop()
			_, err = runCompare(ctx, cfg, c.App.Writer, c.App.ErrWriter, c.Bool("quiet"))
			return err
		},
	}
}

// runCompare runs every model on every fold and writes the comparison
// folder.
func runCompare(ctx context.Context, cfg *train.Config, stdout, stderr io.Writer, quiet bool) (*train.Comparison, error) {
	specs, err := cfg.Specs()
	if err != nil {
		return nil, err
	}
	p, err := train.Prepare(cfg)
	if err != nil {
		return nil, err
	}
	folds, err := train.Folds(p)
	if err != nil {
		return nil, err
	}
	for _, w := range p.Report.Warnings {
		fmt.Fprintln(stderr, "warning:", w)
	}
	var results []*train.FoldResult
	names := make([]string, len(specs))
	for i, s := range specs {
		names[i] = s.Name
	}
	for _, s := range specs {
		for f, sets := range folds {
			if err := ctx.Err(); err != nil {
				return nil, fmt.Errorf("comparison interrupted: %w", err)
			}
			r, err := train.RunUnit(ctx, p, s, f, sets)
			if err != nil {
				return nil, err
			}
			if !quiet {
				fmt.Fprintf(stderr, "  %s, fold %d of %d done\n", s.Name, f+1, len(folds))
			}
			results = append(results, r)
		}
	}
	cmp := train.Summarise(names, len(folds), p.Neurons(), results, train.ExcludedNeurons(p))
	if err := train.WriteComparison(cfg.Compare.Output, p, specs, results, cmp); err != nil {
		return nil, err
	}
	fmt.Fprintf(stdout, "comparison folder: %s\n", cfg.Compare.Output)
	train.PrintComparison(stdout, cmp)
	for _, c := range train.Cautions {
		fmt.Fprintln(stdout, "note:", c)
	}
	return cmp, nil
}
