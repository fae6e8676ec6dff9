package main

import (
	"encoding/csv"
	"fmt"
	"io"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train/runfolder"
)

func predictCommand() *cli.Command {
	return &cli.Command{
		Name:      "predict",
		Usage:     "predict every neuron's response to new stimulus values from a run folder",
		ArgsUsage: "RUN_FOLDER",
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "stimulus", Usage: "stimulus values `FILE` (.npy, .npz, .csv or .tsv), in axis units (required)"},
			&cli.StringFlag{Name: "column", Usage: "column (CSV/TSV) or array (.npz) `NAME` holding the values"},
			&cli.StringFlag{Name: "out", Usage: "predictions `FILE` (required): .npy (values x neurons, float32) or .csv (a stimulus column, then a column per neuron, headed by its name)"},
		},
		Action: func(c *cli.Context) error {
			// The folder first: an option after it is the usual slip, and
			// its hint says more than "flag not set" would.
			if err := oneFolderArg(c); err != nil {
				return err
			}
			for _, f := range []string{"stimulus", "out"} {
				if c.String(f) == "" {
					return fmt.Errorf("predict: give --%s (stria predict --stimulus FILE --out FILE RUN_FOLDER)", f)
				}
			}
			out := c.String("out")
			ext := strings.ToLower(filepath.Ext(out))
			if ext != ".npy" && ext != ".csv" {
				return fmt.Errorf("predict: --out %s: write .npy or .csv (the file's extension says which)", out)
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
			if ext == ".csv" {
				err = writePredictionsCSV(out, stim, pred, m.Manifest.Names)
			} else {
				err = format.WriteNPY(out, []int{pred.Rows, pred.Cols}, pred.Data)
			}
			if err != nil {
				return err
			}
			fmt.Fprintf(c.App.Writer, "wrote %s: %d stimulus values x %d neurons\n", out, pred.Rows, pred.Cols)
			if !m.Soft {
				fmt.Fprintf(c.App.Writer, "note: this model was trained with one-hot input (axis.encoding: onehot), so it predicts one value per bin: as a function of the stimulus its prediction is a staircase that steps at the bin edges (%d bins of %g %s), the same for every value inside a bin. For predictions that vary smoothly between bin centres, fit with axis.encoding: soft (stria help config; slower: the fast projected solver needs one-hot input).\n",
					m.Manifest.Axis.Bins, (m.Manifest.Axis.Max-m.Manifest.Axis.Min)/float64(m.Manifest.Axis.Bins), m.Manifest.Axis.Unit)
			}
			return nil
		},
	}
}

// writePredictionsCSV writes the predictions as CSV, atomically: a header
// "stimulus" and the neuron names (neuron_<j> where the run has none),
// then a row per stimulus value.
func writePredictionsCSV(path string, stim []float64, pred *data.Matrix, names []string) error {
	header := make([]string, pred.Cols+1)
	header[0] = "stimulus"
	for j := 0; j < pred.Cols; j++ {
		if j < len(names) && names[j] != "" {
			header[j+1] = names[j]
		} else {
			header[j+1] = "neuron_" + strconv.Itoa(j)
		}
	}
	return runfolder.WriteFile(path, func(w io.Writer) error {
		cw := csv.NewWriter(w)
		if err := cw.Write(header); err != nil {
			return err
		}
		row := make([]string, len(header))
		for i := 0; i < pred.Rows; i++ {
			row[0] = strconv.FormatFloat(stim[i], 'g', -1, 64)
			for j, v := range pred.Row(i) {
				row[j+1] = strconv.FormatFloat(float64(v), 'g', -1, 32)
			}
			if err := cw.Write(row); err != nil {
				return err
			}
		}
		cw.Flush()
		return cw.Error()
	})
}
