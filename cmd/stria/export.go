package main

import (
	"fmt"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/train/export"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/acuityfolder"
)

func exportCommand() *cli.Command {
	return &cli.Command{
		Name:      "export",
		Usage:     "write figures (SVG, PNG) and the arrays they are drawn from, for a run, comparison or acuity folder",
		ArgsUsage: "FOLDER",
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "out", Usage: "output `FOLDER` (default: FOLDER/" + runfolder.DirFigures + ")"},
			&cli.StringFlag{Name: "neurons", Usage: "neurons with a tuning figure: indices \"3,17,42\" (0-based), \"best K\", \"worst K\", \"random K\" by test_r2, combined with commas (default \"" + export.DefaultNeurons + "\")"},
			&cli.StringFlag{Name: "compare", Usage: "comparison `FOLDER` of the same recording: draw its baselines' curves in the tuning figures"},
		},
		Action: func(c *cli.Context) error {
			if err := oneFolderArg(c); err != nil {
				return err
			}
			lock, err := lockFolder(c, c.Args().First())
			if err != nil {
				return err
			}
			defer lock.Release()
			opt := exportOptions(c)
			opt.Out = c.String("out")
			var ex *export.Exported
			if dir := c.Args().First(); acuityfolder.IsAcuity(dir) {
				if opt.Neurons != "" || opt.Compare != "" {
					return fmt.Errorf("export: %s is an acuity folder; --neurons and --compare apply to run folders only", dir)
				}
				ex, _, err = export.AcuityFigures(dir, opt.Out)
			} else {
				ex, err = export.Folder(dir, opt)
			}
			if err != nil {
				return err
			}
			for _, n := range ex.Notes {
				fmt.Fprintln(c.App.Writer, "note:", n)
			}
			fmt.Fprintf(c.App.Writer, "exported %d figures of the %s folder to %s\n", len(ex.Figures), ex.Kind, ex.Dir)
			return nil
		},
	}
}

// exportOptions reads the options shared by export and report.
func exportOptions(c *cli.Context) export.Options {
	return export.Options{Neurons: c.String("neurons"), Compare: c.String("compare")}
}
