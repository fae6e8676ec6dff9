package main

import (
	"fmt"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/train/runfolder"
)

func predictCommand() *cli.Command {
	return &cli.Command{
		Name:      "predict",
		Usage:     "predict every neuron's response to new stimulus values from a run folder",
		ArgsUsage: "RUN_FOLDER",
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "stimulus", Required: true, Usage: "stimulus values `FILE` (.npy, .npz, .csv or .tsv), in axis units"},
			&cli.StringFlag{Name: "column", Usage: "column (CSV/TSV) or array (.npz) `NAME` holding the values"},
			&cli.StringFlag{Name: "out", Required: true, Usage: "predictions `FILE` (.npy, values x neurons, float32)"},
		},
		Action: func(c *cli.Context) error {
			if err := oneFolderArg(c); err != nil {
				return err
			}
			m, err := runfolder.LoadModel(c.Args().First())
			if err != nil {
				return err
			}
			stim, err := data.ReadVector(c.String("stimulus"), c.String("column"))
			if err != nil {
				return err
			}
			pred, err := m.Predict(stim)
			if err != nil {
				return fmt.Errorf("%s: %w", c.String("stimulus"), err)
			}
			if err := data.WriteNPY(c.String("out"), []int{pred.Rows, pred.Cols}, pred.Data); err != nil {
				return err
			}
			fmt.Fprintf(c.App.Writer, "wrote %s: %d stimulus values x %d neurons\n", c.String("out"), pred.Rows, pred.Cols)
			if !m.Soft {
				fmt.Fprintf(c.App.Writer, "note: this model was trained with one-hot input (axis.encoding: onehot), so it predicts one value per bin: as a function of the stimulus its prediction is a staircase that steps at the bin edges (%d bins of %g %s), the same for every value inside a bin. For predictions that vary smoothly between bin centres, fit with axis.encoding: soft (stria help config; slower: the fast projected solver needs one-hot input).\n",
					m.Manifest.Axis.Bins, (m.Manifest.Axis.Max-m.Manifest.Axis.Min)/float64(m.Manifest.Axis.Bins), m.Manifest.Axis.Unit)
			}
			return nil
		},
	}
}
