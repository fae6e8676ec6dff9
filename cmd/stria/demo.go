package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"path/filepath"
	"syscall"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/train/export"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/settings"
)

func demoCommand() *cli.Command {
	return &cli.Command{
		Name:  "demo",
		Usage: "write a synthetic heading-tuned recording with a ready config, and run stria on it",
		Description: "The demo population is made up: head-direction-like cells of a rodent running in a virtual\n" +
			"arena, a mix of one- and two-peaked tuning and untuned cells, a shared gain fluctuation and\n" +
			"trial-to-trial noise. The ground truth is written beside the data.",
		ArgsUsage: " ",
		Flags: []cli.Flag{
			&cli.StringFlag{Name: "out", Value: "stria-demo", Usage: "demo `FOLDER`"},
			&cli.IntFlag{Name: "neurons", Value: 400, Usage: "neurons in the synthetic population"},
			&cli.IntFlag{Name: "trials", Value: 1200, Usage: "trials"},
			&cli.Uint64Flag{Name: "seed", Value: 7, Usage: "seed of the synthetic data and of the fit"},
			&cli.BoolFlag{Name: "quiet", Aliases: []string{"q"}, Usage: "no progress display"},
		},
		Action: func(c *cli.Context) error {
			if err := noArgs(c); err != nil {
				return err
			}
			ctx, stop := signal.NotifyContext(c.Context, os.Interrupt, syscall.SIGTERM)
			defer stop()
			return runDemo(ctx, c.App.Writer, c.App.ErrWriter, demoOptions{
				dir: c.String("out"), neurons: c.Int("neurons"), trials: c.Int("trials"),
				seed: c.Uint64("seed"), quiet: c.Bool("quiet"),
			})
		},
	}
}

type demoOptions struct {
	dir             string
	neurons, trials int
	seed            uint64
	quiet           bool
}

// demoConfig is the config the demo writes beside its data.
const demoConfig = `# stria demo: a synthetic population of heading-tuned cells.
seed: %d
data:
  responses: responses.npy   # trials x neurons, float32
  stimulus: heading.npy      # one heading per trial, degrees
  block: blocks.npy          # block id per trial (10 blocks in time order)
  covariates: running.npy    # running speed per trial, cm/s (it follows the shared gain)
  covariate_columns: [running_speed]
axis:
  name: heading
  unit: deg
  min: 0
  max: 360
  periodic: true
  bin_width: 6               # 60 bins
split:
  test_fraction: 0.2
  validation_fraction: 0.1
  folds: 5
  keep_blocks: false
  zscore: true               # per neuron, from the training trials only
model:
  layers:
    - channels: 8
      kernel: 9
      stride: 1
      border: circular
  output: identity
  loss: mse
train:
  optimizer: adam
  learning_rate: 0.01
  max_epochs: 3000
  patience: 100
compare:
  # the encoder above, one with half the channels, and the default baselines
  encoders:
    - name: encoder
    - name: encoder-4ch
      layers:
        - channels: 4
          kernel: 9
  starts: 8
  output: compare
acuity:
  # information against the number of neurons: automatic sizes up to half
  # of what the bias correction allows, 20 random subsets of each
  repeats: 20
  bootstrap: 1000
  decoders: [lda, model]     # diagonal LDA, and the encoder's likelihood
  shrinkage: 1
  decode_repeats: 3
  output: acuity
state:
  # a gain and an offset per neuron on its tuning, from running speed, and a
  # shared gain read from the other half of the neurons
  tuning: fixed              # the default; refit trains the encoder again on the targets
  population_gain: true
output: run
`

// writeDemo writes the synthetic recording, its ground truth and a config.
func writeDemo(o demoOptions) (string, *synth.Truth, error) {
	if err := os.MkdirAll(o.dir, 0o755); err != nil {
		return "", nil, err
	}
	rec, ax, truth := synth.Population(synth.Config{
		Neurons: o.neurons, Trials: o.trials, Bins: 60,
		TwoPeakFrac: 0.25, UntunedFrac: 0.1, GainSD: 0.15, NoiseSD: 0.5, Seed: o.seed,
	})
	_ = ax
	path := func(name string) string { return filepath.Join(o.dir, name) }
	if err := format.WriteNPY(path("responses.npy"), []int{rec.Y.Rows, rec.Y.Cols}, rec.Y.Data); err != nil {
		return "", nil, err
	}
	if err := format.WriteNPY64(path("heading.npy"), []int{len(rec.Stim)}, rec.Stim); err != nil {
		return "", nil, err
	}
	blocks := make([]float64, len(rec.Block))
	for i, b := range rec.Block {
		blocks[i] = float64(b)
	}
	if err := format.WriteNPY64(path("blocks.npy"), []int{len(blocks)}, blocks); err != nil {
		return "", nil, err
	}
	if err := format.WriteNPY64(path("running.npy"), []int{len(truth.Gain)}, demoRunning(truth.Gain, o.seed)); err != nil {
		return "", nil, err
	}
	if err := format.WriteNPY64(path("truth_means.npy"), []int{len(truth.Mean) / o.neurons, o.neurons}, truth.Mean); err != nil {
		return "", nil, err
	}
	type neuronTruth struct {
		Kind      string   `json:"kind"`
		Preferred *float64 `json:"preferred_deg"`
		Kappa     *float64 `json:"kappa"`
		Amp       float64  `json:"amplitude"`
		Base      float64  `json:"baseline"`
		Ratio     float64  `json:"second_peak_ratio"`
	}
	num := func(v float64) *float64 {
		if math.IsNaN(v) {
			return nil
		}
		return &v
	}
	nt := make([]neuronTruth, len(truth.Kind))
	for j := range nt {
		nt[j] = neuronTruth{Kind: truth.Kind[j], Preferred: num(truth.Preferred[j]), Kappa: num(truth.Kappa[j]),
			Amp: truth.Amp[j], Base: truth.Base[j], Ratio: truth.Ratio[j]}
	}
	if err := runfolder.WriteJSON(path("truth.json"), nt); err != nil {
		return "", nil, err
	}
	cfgPath := path("demo.yaml")
	err := runfolder.WriteFile(cfgPath, func(w io.Writer) error {
		_, err := fmt.Fprintf(w, demoConfig, o.seed)
		return err
	})
	return cfgPath, truth, err
}

func runDemo(ctx context.Context, stdout, stderr io.Writer, o demoOptions) error {
	cfgPath, _, err := writeDemo(o)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "== synthetic recording and config written to %s\n", o.dir)
	cfg, err := settings.LoadConfig(cfgPath)
	if err != nil {
		return err
	}
	if err := cfg.Validate(); err != nil {
		return err
	}
	rec, err := data.Load(cfg.Source())
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "\n== stria inspect --config %s\n", cfgPath)
	if err := inspect(stdout, cfg, rec); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "\n== stria fit --config %s\n", cfgPath)
	if _, err := runFit(ctx, cfg, fitOptions{overwrite: true, quiet: o.quiet, stdout: stdout, stderr: stderr}); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "\n== stria compare --config %s\n", cfgPath)
	if _, err := runCompare(ctx, cfg, stdout, stderr, compareOptions{overwrite: true, quiet: o.quiet}); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "\n== stria report --compare %s %s\n", cfg.Compare.Output, cfg.Output)
	runReport, err := export.WriteReport(cfg.Output, "", export.Options{Compare: cfg.Compare.Output})
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "\n== stria report %s\n", cfg.Compare.Output)
	cmpReport, err := export.WriteReport(cfg.Compare.Output, "", export.Options{})
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "\n== stria acuity --config %s\n", cfgPath)
	if _, err := runAcuity(ctx, cfg, stdout, stderr, o.quiet, true); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "\n== stria report %s\n", cfg.Acuity.Output)
	acuityReport, err := export.WriteAcuityReport(cfg.Acuity.Output, "")
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "\nreports (open in a browser; they print to PDF):\n  %s\n  %s\n  %s\n", runReport, cmpReport, acuityReport)
	return nil
}
