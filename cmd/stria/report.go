package main

import (
	"fmt"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/train/export"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/acuityfolder"
)

func reportCommand() *cli.Command {
	return &cli.Command{
		Name:      "report",
		Usage:     "write one self-contained HTML report of a run, comparison or acuity folder (runs export first)",
		ArgsUsage: "FOLDER",
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "out", Usage: "report `FILE` (default: FOLDER/" + runfolder.FileReport + ")"},
			&cli.StringFlag{Name: "neurons", Usage: "run folders: neurons with a tuning figure, as for stria export (default \"" + export.DefaultNeurons + "\")"},
			&cli.StringFlag{Name: "compare", Usage: "run folders: comparison `FOLDER` whose baselines are drawn in the tuning figures"},
		},
		Action: func(c *cli.Context) error {
			if err := oneFolderArg(c); err != nil {
				return err
			}
			dir := c.Args().First()
			lock, err := lockFolder(c, dir)
			if err != nil {
				return err
			}
			defer lock.Release()
			if acuityfolder.IsAcuity(dir) {
				if c.String("neurons") != "" || c.String("compare") != "" {
					return fmt.Errorf("report: %s is an acuity folder; --neurons and --compare apply to run folders only", dir)
				}
				path, err := export.WriteAcuityReport(dir, c.String("out"))
				if err != nil {
					return err
				}
				fmt.Fprintln(c.App.Writer, path)
				return nil
			}
			path, err := export.WriteReport(dir, c.String("out"), exportOptions(c))
			if err != nil {
				return err
			}
			fmt.Fprintln(c.App.Writer, path)
			return nil
		},
	}
}
