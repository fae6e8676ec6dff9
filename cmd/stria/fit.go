package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"strings"
	"syscall"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
)

func fitCommand() *cli.Command {
	return &cli.Command{
		Name:      "fit",
		Usage:     "train the shared-filter encoder from a YAML config and write a run folder",
		ArgsUsage: " ",
		Flags: append(dataFlags(),
			&cli.BoolFlag{Name: "resume", Usage: "continue from the checkpoint in the run folder"},
			&cli.BoolFlag{Name: "quiet", Aliases: []string{"q"}, Usage: "no progress display"},
			&cli.BoolFlag{Name: "timings", Usage: "print the wall time of each phase to stderr"},
		),
		Action: func(c *cli.Context) error {
			cfg, err := loadConfig(c)
			if err != nil {
				return err
			}
			ctx, stop := signal.NotifyContext(c.Context, os.Interrupt, syscall.SIGTERM)
			defer stop()
			_, err = runFit(ctx, cfg, fitOptions{resume: c.Bool("resume"), quiet: c.Bool("quiet"), timings: c.Bool("timings"), stdout: c.App.Writer, stderr: c.App.ErrWriter})
			return err
		},
	}
}

type fitOptions struct {
	resume  bool
	quiet   bool
	timings bool
	stdout  io.Writer
	stderr  io.Writer
}

// runFit loads, trains, scores and writes the run folder.
func runFit(ctx context.Context, cfg *train.Config, o fitOptions) (*runfolder.Summary, error) {
	if o.stderr == nil {
		o.stderr = os.Stderr
	}
	start := time.Now()
	dir := cfg.Output
	cfgYAML, err := cfg.Marshal()
	if err != nil {
		return nil, err
	}
	var resume *train.Checkpoint
	if o.resume {
		resume, err = runfolder.LoadResumeState(dir)
		if err != nil {
			return nil, fmt.Errorf("--resume: %w", err)
		}
		if !bytes.Equal(resume.Config, cfgYAML) {
			return nil, fmt.Errorf("--resume: the checkpoint in %s was written with another config; refusing to mix them", dir)
		}
	}
	last := start
	phase := func(name string) {
		if o.timings {
			now := time.Now()
			fmt.Fprintf(o.stderr, "timing: %-34s %7.3f s\n", name, now.Sub(last).Seconds())
			last = now
		}
	}
	rec, err := data.Load(cfg.Source())
	if err != nil {
		return nil, err
	}
	phase("load")
	p, err := train.PrepareRecording(cfg, rec)
	if err != nil {
		return nil, err
	}
	phase("bin, check, split, normalise")
	// The data are good: an earlier fit's completion marker goes before
	// anything is written, so the folder reads as incomplete until this
	// fit finishes.
	if err := runfolder.Begin(dir); err != nil {
		return nil, err
	}
	for _, w := range p.Report.Warnings {
		fmt.Fprintln(o.stderr, "warning:", w)
	}
	hooks := train.Hooks{
		Checkpoint: func(c *train.Checkpoint) error {
			c.Config = cfgYAML
			return runfolder.SaveResumeState(dir, c)
		},
	}
	var bar *progressbar.ProgressBar
	if !o.quiet && isTerminal(o.stderr) {
		bar = progressbar.NewOptions(cfg.Train.MaxEpochs,
			progressbar.OptionSetWriter(o.stderr),
			progressbar.OptionSetDescription("epoch"),
			progressbar.OptionShowCount(),
			progressbar.OptionSetPredictTime(true),
			progressbar.OptionSetElapsedTime(true),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionSetWidth(24),
			progressbar.OptionClearOnFinish(),
		)
		hooks.OnEpoch = func(e train.EpochLog) {
			bar.Describe(fmt.Sprintf("loss %.4g  val %.4g  val R2 %.3f", e.TrainLoss, e.ValLoss, e.ValR2))
			bar.Set(e.Epoch)
		}
	}
	fitted, err := train.Fit(ctx, p, hooks, resume)
	if bar != nil {
		bar.Finish()
	}
	if errors.Is(err, train.ErrInterrupted) {
		return nil, fmt.Errorf("%w; checkpoint saved in %s: continue with --resume", err, filepath.Join(dir, runfolder.FileResume))
	}
	if err != nil {
		return nil, err
	}
	phase(fmt.Sprintf("fit (%d epochs)", len(fitted.Log)))
	// The weights are written while the test trials are scored.
	written := make(chan error, 1)
	go func() { written <- runfolder.WriteModel(dir, p, fitted) }()
	scores := train.ScoreFitted(p, fitted)
	phase("score the test trials")
	if err := <-written; err != nil {
		return nil, err
	}
	sum, err := runfolder.WriteResults(dir, p, fitted, scores, time.Since(start))
	if err != nil {
		return nil, err
	}
	if err := runfolder.RemoveResumeState(dir); err != nil {
		return nil, err
	}
	// Last: the marker that tells readers the run folder is complete.
	if err := runfolder.Finish(dir, runfolder.FormatRun); err != nil {
		return nil, err
	}
	phase("write the run folder (the rest)")
	if o.stdout != nil {
		printSummary(o.stdout, dir, sum)
	}
	return sum, nil
}

func printSummary(w io.Writer, dir string, s *runfolder.Summary) {
	fmt.Fprintf(w, "run folder: %s\n", dir)
	fmt.Fprintf(w, "trained %d epochs (best %d, stopped by %s) in %.1f s\n", s.Epochs, s.BestEpoch, s.Stop, s.WallSeconds)
	fmt.Fprintf(w, "held-out trials: %d; neurons scored: %d of %d", s.TestTrials, s.Scored, s.Neurons)
	if s.Excluded > 0 {
		fmt.Fprintf(w, " (%d excluded, reasons in %s)", s.Excluded, runfolder.FileNeuronScores)
	}
	fmt.Fprintln(w)
	if s.Ceilings != nil {
		fmt.Fprintf(w, "noise ceilings on the test trials: %s\n", ceilingCounts(s.Ceilings))
	}
	if s.MinReliability > -1 {
		fmt.Fprintf(w, "neurons with split-half reliability (all trials) >= %g: %d of %d scored\n", s.MinReliability, s.Reliable, s.Scored)
	}
	if s.Solver != "" {
		fmt.Fprintf(w, "solver: %s; readout penalty (model.readout_l2: %s): %s\n", s.Solver, s.ReadoutL2.Setting, penaltyText(s.ReadoutL2))
	}
	fmt.Fprintln(w, "median over neurons [interquartile range]:")
	for _, k := range []string{"test_r2", "test_r", "explainable_fraction", "fev", "cc_norm"} {
		sp := s.Spread[k]
		fmt.Fprintf(w, "  %-21s %7.3f  [%.3f, %.3f]  %d neurons (%s", k, sp.Median, sp.Q1, sp.Q3, sp.Kept, sp.KeptBy)
		if sp.NaN > 0 {
			fmt.Fprintf(w, "; %d NaN", sp.NaN)
		}
		fmt.Fprintln(w, ")")
	}
	for _, c := range s.Cautions {
		fmt.Fprintln(w, "note:", c)
	}
}

// ceilingCounts lists the verdict counts of summary.json in code order:
// "450 usable, 38 signal_not_significant (fev, cc_norm and spe NaN)".
func ceilingCounts(m map[string]int) string {
	var parts []string
	bad := false
	for c := eval.CeilingUsable; c <= eval.CeilingNotSignificant; c++ {
		if k := m[c.String()]; k > 0 || c == eval.CeilingUsable {
			parts = append(parts, fmt.Sprintf("%d %s", k, c))
			bad = bad || (k > 0 && c != eval.CeilingUsable)
		}
	}
	s := strings.Join(parts, ", ")
	if bad {
		s += " (where not usable, fev, cc_norm and spe are NaN; reasons: stria help metrics)"
	}
	return s
}

// penaltyText describes the readout penalty used: one value, or the
// median and quartiles of the per-neuron choices.
func penaltyText(p runfolder.PenaltyInfo) string {
	if p.Q1 == p.Q3 {
		return fmt.Sprintf("%.3g", float64(p.Chosen))
	}
	return fmt.Sprintf("%.3g per neuron (median; quartiles %.3g, %.3g)", float64(p.Chosen), float64(p.Q1), float64(p.Q3))
}
