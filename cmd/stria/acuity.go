package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"strings"
	"syscall"
	"time"

	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/acuityfolder"
	"github.com/strialab/stria/train/settings"
)

func acuityCommand() *cli.Command {
	return &cli.Command{
		Name:      "acuity",
		Usage:     "how finely the population carries the stimulus: Fisher information, thresholds, decoding",
		ArgsUsage: " ",
		Description: "Bias-corrected linear Fisher information between neighbouring conditions (with and without noise\n" +
			"correlations) and the threshold at d' = 1; information against the number of neurons with a\n" +
			"saturation fit; cross-validated decoding on the folds of stria compare (shrinkage LDA, and the\n" +
			"likelihood of an encoder fitted per fold). Settings: the acuity section (stria help config).\n" +
			"Writes an acuity folder (default stria-out/acuity); then: stria report FOLDER.\n" +
			"24,000 neurons x 4,600 trials with the defaults: 32 s on two cores (27 s of CPU time), 1.1 GB.",
		Flags: append(dataFlags(),
			&cli.BoolFlag{Name: "quiet", Aliases: []string{"q"}, Usage: "no progress lines"},
			&cli.BoolFlag{Name: "overwrite", Usage: "replace the acuity folder of an earlier run: its files are deleted first"},
		),
		Action: func(c *cli.Context) error {
			cfg, err := loadConfig(c)
			if err != nil {
				return err
			}
			if c.String("out") != "" {
				cfg.Acuity.Output = cfg.Output
			}
			ctx, stop := signal.NotifyContext(c.Context, os.Interrupt, syscall.SIGTERM)
			defer stop()
			_, err = runAcuity(ctx, cfg, c.App.Writer, c.App.ErrWriter, c.Bool("quiet"), c.Bool("overwrite"))
			return err
		},
	}
}

// runAcuity prepares the recording, computes everything, writes the
// acuity folder (complete.json last) and prints the results and cautions.
//
// The output folder is checked before the work starts: a folder of
// another kind or of other files is refused, an earlier acuity folder
// only replaced with overwrite; the folder is locked while it is written.
func runAcuity(ctx context.Context, cfg *settings.Config, stdout, stderr io.Writer, quiet, overwrite bool) (*acuityfolder.AcuityFolder, error) {
	start := time.Now()
	out := cfg.Acuity.Output
	if err := runfolder.CheckWritable(out); err != nil {
		return nil, err
	}
	if err := checkAcuityFolder(out, overwrite); err != nil {
		return nil, err
	}
	p, err := train.Prepare(cfg)
	if err != nil {
		return nil, err
	}
	var enc *train.AcuityEncoder
	if dir := cfg.Acuity.Encoder; dir != "" {
		if enc, err = acuityfolder.AcuityEncoder(dir, p); err != nil {
			return nil, err
		}
	}
	settings, err := cfg.Marshal()
	if err != nil {
		return nil, err
	}
	lock, note, err := runfolder.AcquireLock(out, strings.Join(os.Args, " "))
	if err != nil {
		return nil, err
	}
	defer lock.Release()
	if note != "" {
		fmt.Fprintln(stderr, "note:", note)
	}
	if err := checkAcuityFolder(out, overwrite); err != nil { // again, under the lock
		return nil, err
	}
	if overwrite {
		if err := runfolder.Empty(out); err != nil {
			return nil, err
		}
	}
	if _, err := runfolder.RemoveStaleTemps(out); err != nil {
		return nil, err
	}
	if err := acuityfolder.BeginAcuity(out, settings); err != nil {
		return nil, err
	}
	progress := func(s string) {
		if !quiet {
			fmt.Fprintln(stderr, "  "+s)
		}
	}
	if !quiet {
		fmt.Fprintf(stderr, "  loaded %d trials x %d neurons, %d conditions (%.1f s)\n", len(p.Cond), p.Neurons(), p.NBins, time.Since(start).Seconds())
	}
	r, err := train.Acuity(ctx, p, enc, progress)
	if err != nil {
		return nil, err
	}
	f := acuityfolder.NewAcuityFolder(p, r)
	f.Info.Seconds["total"] = time.Since(start).Seconds()
	if err := acuityfolder.WriteAcuity(out, f); err != nil {
		return nil, err
	}
	printAcuity(stdout, out, f)
	return f, nil
}

// checkAcuityFolder refuses an output folder another stria is writing, a
// folder of another kind or of files stria did not write, and an earlier
// acuity folder unless overwrite.
func checkAcuityFolder(dir string, overwrite bool) error {
	if err := runfolder.CheckUnlocked(dir); err != nil {
		return err
	}
	what, err := runfolder.Holds(dir)
	if err != nil || what == "" {
		return err
	}
	if kind, _ := runfolder.Kind(dir); kind != "" && kind != runfolder.KindAcuity {
		return fmt.Errorf("output folder %s holds %s; stria acuity needs its own folder (acuity.output or --out)", dir, what)
	}
	if err := runfolder.CheckEmptiable(dir); err != nil {
		return err
	}
	if overwrite {
		return nil
	}
	return fmt.Errorf("output folder %s holds %s: give --overwrite to replace it (its files are deleted first), or another --out", dir, what)
}

// printAcuity prints the headline numbers of an acuity folder and its
// cautions.
func printAcuity(w io.Writer, dir string, f *acuityfolder.AcuityFolder) {
	info := f.Info
	unit := info.Axis.Unit
	fmt.Fprintf(w, "acuity folder: %s\n", dir)
	if len(f.Pairs) > 0 {
		lo, hi := f.Pairs[0], f.Pairs[0]
		mean := 0.0
		for _, p := range f.Pairs {
			if p.Info < lo.Info {
				lo = p
			}
			if p.Info > hi.Info {
				hi = p
			}
			mean += p.Info / float64(len(f.Pairs))
		}
		fmt.Fprintf(w, "linear Fisher information, %d-neuron subsets (mean of %d): mean over %d pairs %.4g /%s^2; highest %.4g at %g %s (threshold %.3g %s), lowest %.4g at %g %s\n",
			lo.Size, info.Repeats, len(f.Pairs), mean, unit, hi.Info, hi.Stim, unit, hi.Threshold, unit, lo.Info, lo.Stim, unit)
	}
	s := info.Saturation
	switch {
	case s.Error != "":
		fmt.Fprintf(w, "saturation fit: none (%s)\n", s.Error)
	case math.IsInf(float64(s.Asymptote), 1):
		fmt.Fprintf(w, "saturation fit: a = %.4g per neuron, eps = 0: no saturation detected within the sizes measured (1/eps infinite; 95%% bootstrap interval %.4g to %.4g)\n",
			float64(s.A), float64(s.Lo), float64(s.Hi))
	default:
		fmt.Fprintf(w, "saturation fit: a = %.4g per neuron, eps = %.4g; 1/eps = %.4g /%s^2 (extrapolation; 95%% bootstrap interval %.4g to %.4g)\n",
			float64(s.A), float64(s.Eps), float64(s.Asymptote), unit, float64(s.Lo), float64(s.Hi))
	}
	for _, d := range info.Decoders {
		fmt.Fprintf(w, "decoder %-15s %d held-out trials: accuracy %.3f, mean absolute error %.3g %s (s.e.m. %.2g), rms %.3g %s\n",
			d.Name, d.Trials, float64(d.Accuracy), float64(d.MAE), unit, float64(d.SEM), float64(d.RMSE), unit)
	}
	fmt.Fprintf(w, "total %.1f s; report: stria report %s\n", info.Seconds["total"], dir)
	for _, c := range info.Cautions {
		fmt.Fprintln(w, "note:", c)
	}
}
