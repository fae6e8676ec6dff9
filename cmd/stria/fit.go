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
	"runtime"
	"strings"
	"syscall"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/urfave/cli/v2"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/settings"
)

func fitCommand() *cli.Command {
	return &cli.Command{
		Name:      "fit",
		Usage:     "train the shared-filter encoder from a YAML config and write a run folder",
		ArgsUsage: " ",
		Flags: append(dataFlags(),
			&cli.BoolFlag{Name: "resume", Usage: "continue from the checkpoint in the run folder"},
			&cli.BoolFlag{Name: "overwrite", Usage: "replace the run folder of an earlier fit: its files are deleted first"},
			&cli.BoolFlag{Name: "quiet", Aliases: []string{"q"}, Usage: "no progress display"},
			&cli.BoolFlag{Name: "timings", Usage: "print the wall time of each phase to stderr"},
			&cli.BoolFlag{Name: "in-memory", Usage: "hold every trial's responses in memory even where one pass over them would do (for checks; see stria help large)"},
			&cli.IntFlag{Name: "array-task", Usage: "pass over the neurons of array task `I` (1-based) of --array-task-count only and write their statistics; when every task has run: stria gather FOLDER"},
			&cli.IntFlag{Name: "array-task-count", Usage: "the number `N` of array tasks the neurons are split into"},
			&cli.BoolFlag{Name: "readouts", Usage: "with --array-task: the readout pass of the task's neurons (after stria gather --filters FOLDER): their readouts and scores from the task's statistics and the trained filters"},
			&cli.IntFlag{Name: "slurm-script", Usage: "print a script that submits the fit in four jobs (a Slurm job array of `N` tasks for the statistics, the reduce that trains the filters, the array again for the readouts, the gather job), and exit"},
		),
		Action: func(c *cli.Context) error {
			if err := noArgs(c); err != nil {
				return err
			}
			cfg, err := loadConfig(c)
			if err != nil {
				return err
			}
			if c.Bool("resume") && c.Bool("overwrite") {
				return fmt.Errorf("fit: --resume continues the fit in the folder and --overwrite deletes it: give one of them")
			}
			if n := c.Int("slurm-script"); n > 0 {
				if err := checkArrayFit(cfg); err != nil {
					return err
				}
				if _, st, err := data.LoadStream(cfg.Source()); err == nil {
					st.Close()
					if note := taskCountNote(n, st.Cols()); note != "" {
						fmt.Fprintln(c.App.ErrWriter, "note: "+note)
					}
				}
				return printFitSlurmScript(c.App.Writer, c.String("config"), cfg.Output, n)
			}
			task, tasks, err := arrayTask(c, os.Getenv)
			if err != nil {
				return err
			}
			if tasks > 0 {
				if c.Bool("resume") || c.Bool("overwrite") || c.Bool("in-memory") {
					return fmt.Errorf("fit: an array task writes only the statistics of its neurons: --resume, --overwrite and --in-memory do not apply (empty the folder once before the array runs, or use a new --out)")
				}
				var out io.Writer
				if !c.Bool("quiet") {
					out = c.App.Writer
				}
				if c.Bool("readouts") {
					return runFitReadouts(cfg, task, tasks, out)
				}
				return runFitArrayTask(cfg, task, tasks, out)
			}
			if c.Bool("readouts") {
				return fmt.Errorf("fit: --readouts is the readout pass of an array task: give --array-task I --array-task-count N (or run inside a Slurm array task)")
			}
			ctx, stop := signal.NotifyContext(c.Context, os.Interrupt, syscall.SIGTERM)
			defer stop()
			_, err = runFit(ctx, cfg, fitOptions{resume: c.Bool("resume"), overwrite: c.Bool("overwrite"), quiet: c.Bool("quiet"), timings: c.Bool("timings"), inMemory: c.Bool("in-memory"), stdout: c.App.Writer, stderr: c.App.ErrWriter})
			return err
		},
	}
}

type fitOptions struct {
	resume bool
	// overwrite empties a folder holding an earlier run before the fit
	// writes into it; without it such a folder is refused.
	overwrite bool
	quiet     bool
	timings   bool
	// inMemory holds the trials' responses in memory even when the model
	// could be fitted from one pass over them (train.Streamable).
	inMemory bool
	// gather, when not nil, fits from the statistics array tasks wrote
	// into the folder (stria gather).
	gather *arrayGather
	stdout io.Writer
	stderr io.Writer
	// afterFit, when set, runs after training and before scoring (tests
	// change the data there).
	afterFit func()
}

// runFit loads, trains, scores and writes the run folder.
//
// Nothing is written until the config, the output folder and the data
// have been checked. The folder is then locked (one writer at a time; see
// runfolder.AcquireLock), emptied with overwrite, cleared of temporary
// files a killed fit left, and its completion marker removed; the marker
// is written again last.
func runFit(ctx context.Context, cfg *settings.Config, o fitOptions) (*runfolder.Summary, error) {
	if o.stderr == nil {
		o.stderr = os.Stderr
	}
	start := time.Now()
	dir := cfg.Output
	cfgYAML, err := cfg.Marshal()
	if err != nil {
		return nil, err
	}
	if err := runfolder.CheckWritable(dir); err != nil {
		return nil, err
	}
	if err := checkFitFolder(dir, o); err != nil {
		return nil, err
	}
	var resume *train.Checkpoint
	if o.resume {
		resume, err = runfolder.LoadResumeState(dir)
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("--resume: %s holds no checkpoint (%s) to continue from", dir, runfolder.FileResume)
		}
		if err != nil {
			return nil, fmt.Errorf("--resume: %w", err)
		}
		if !bytes.Equal(resume.Config, cfgYAML) {
			diff, _ := settings.DiffSettings(resume.Config, cfgYAML)
			return nil, fmt.Errorf("--resume: the checkpoint in %s was written with another config; refusing to mix them:\n  %s", dir, strings.Join(diff, "\n  "))
		}
	}
	last := start
	phase := func(name string) {
		if o.timings {
			now := time.Now()
			fmt.Fprintf(o.stderr, "timing: %-48s %7.3f s\n", name, now.Sub(last).Seconds())
			last = now
		}
	}
	var rec *data.Recording
	var p *train.Prepared
	var merged *train.Fitted
	var mergedScores []eval.Scores
	switch {
	case o.gather != nil && o.gather.merge != nil:
		rec, p, merged, mergedScores, err = prepareMerged(cfg, o.gather, phase)
		defer func() {
			if o.gather.closeRows != nil {
				o.gather.closeRows()
			}
		}()
	case o.gather != nil:
		rec, p, err = prepareGathered(cfg, o.gather, phase)
	default:
		rec, p, err = prepareFit(cfg, o, phase)
	}
	if err != nil {
		return nil, err
	}
	if err := train.CheckState(p); err != nil {
		return nil, err
	}
	// A recording read in one pass has no content hashes (they would cost
	// a second read of the file): its checkpoints record the files' size
	// and modification time, which decide alone when a hash is missing.
	files := rec.Files()
	if resume != nil && resume.Files == nil {
		return nil, fmt.Errorf("--resume: the checkpoint in %s does not record the data it was written on, so it cannot be checked; fit again without --resume (with --overwrite)", dir)
	}
	if resume != nil {
		if diff := runfolder.FilesMismatch(resume.Files, files); len(diff) > 0 {
			return nil, fmt.Errorf("--resume: the checkpoint in %s was written on other data; refusing to mix them:\n  %s\nfit again without --resume (with --overwrite)", dir, strings.Join(diff, "\n  "))
		}
	}
	// The data are good: lock the folder, then clear what an earlier fit
	// left; an earlier fit's completion marker goes before anything is
	// written, so the folder reads as incomplete until this fit finishes.
	lock, note, err := runfolder.AcquireLock(dir, strings.Join(os.Args, " "))
	if err != nil {
		return nil, err
	}
	defer lock.Release()
	if note != "" {
		fmt.Fprintln(o.stderr, "note:", note)
	}
	if err := checkFitFolder(dir, o); err != nil { // again, under the lock
		return nil, err
	}
	if o.overwrite {
		if err := runfolder.Empty(dir); err != nil {
			return nil, err
		}
	}
	if _, err := runfolder.RemoveStaleTemps(dir); err != nil {
		return nil, err
	}
	if err := runfolder.Begin(dir); err != nil {
		return nil, err
	}
	for _, w := range p.Report.Warnings {
		fmt.Fprintln(o.stderr, "warning:", w)
	}
	hooks := train.Hooks{
		Checkpoint: func(c *train.Checkpoint) error {
			c.Config = cfgYAML
			c.Files = files
			return runfolder.SaveResumeState(dir, c)
		},
		TempDir: dir,
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
	fitted := merged
	if merged == nil {
		fitted, err = train.Fit(ctx, p, hooks, resume)
	}
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
	if p.Parts != nil {
		// What the solver no longer needs (B x N values each) goes before
		// the scores allocate theirs.
		runtime.GC()
	}
	if o.afterFit != nil {
		o.afterFit()
	}
	// The weights are written while the test trials are scored.
	written := make(chan error, 1)
	go func() { written <- runfolder.WriteModel(dir, p, fitted) }()
	scores := mergedScores
	var gerr error
	if merged == nil {
		gerr = format.Guard(func() { scores = train.ScoreFitted(p, fitted) })
	}
	phase("score the test trials")
	if gerr != nil {
		<-written
		return nil, gerr
	}
	// The data must not have changed while the fit read them.
	if err := rec.Unchanged(); err != nil {
		<-written
		return nil, err
	}
	// The scores are written while the model still is.
	sum, err := runfolder.WriteResults(dir, p, fitted, scores, time.Since(start))
	if werr := <-written; werr != nil {
		return nil, werr
	}
	if o.gather != nil && o.gather.readErr != nil {
		return nil, o.gather.readErr
	}
	if err != nil {
		return nil, err
	}
	phase("write the model and the scores")
	if p.Cfg.StateActive() {
		if err := fitState(ctx, dir, p, fitted, sum, o.stderr); err != nil {
			return nil, err
		}
		phase("state terms")
	}
	if err := runfolder.RemoveResumeState(dir); err != nil {
		return nil, err
	}
	if o.gather != nil {
		if err := runfolder.RemoveArrayTasks(dir); err != nil {
			return nil, err
		}
	}
	// Last: the marker that tells readers the run folder is complete.
	if err := runfolder.Finish(dir, runfolder.FormatRun); err != nil {
		return nil, err
	}
	phase("finish the run folder")
	if o.stdout != nil {
		printSummary(o.stdout, dir, sum)
	}
	return sum, nil
}

// prepareFit loads and prepares the recording: in one pass over the
// responses when the model allows it (train.Streamable), streamed from a
// .npy file, else the trial-level path that holds them in memory. It says
// on stderr which ran and why.
func prepareFit(cfg *settings.Config, o fitOptions, phase func(string)) (*data.Recording, *train.Prepared, error) {
	why := train.Streamable(cfg)
	if o.inMemory && why == "" {
		why = "--in-memory"
	}
	if why != "" {
		rec, err := data.Load(cfg.Source())
		if err != nil {
			return nil, nil, err
		}
		phase("load")
		p, err := train.PrepareRecording(cfg, rec)
		if err != nil {
			return nil, nil, err
		}
		phase("bin, check, split, normalise")
		if why != "--in-memory" {
			fmt.Fprintf(o.stderr, "note: every trial's responses are held in memory: %s (stria help large)\n", why)
		}
		return rec, p, nil
	}
	if strings.EqualFold(filepath.Ext(cfg.Data.Responses), ".npy") {
		rec, s, err := data.LoadStream(cfg.Source())
		if err != nil {
			return nil, nil, err
		}
		defer s.Close()
		phase("open, read the stimulus")
		p, err := train.PrepareParts(cfg, rec, s)
		if err != nil {
			return nil, nil, err
		}
		runtime.GC() // the split-half sums of the pass are spent
		phase("bin, check, split; one pass over the responses")
		return rec, p, nil
	}
	rec, err := data.Load(cfg.Source())
	if err != nil {
		return nil, nil, err
	}
	phase("load")
	p, err := train.PrepareParts(cfg, rec, nil)
	if err != nil {
		return nil, nil, err
	}
	phase("bin, check, split; statistics per condition")
	return rec, p, nil
}

// checkFitFolder refuses an output folder that holds an earlier run (or
// anything else) unless the fit resumes it or overwrites it; overwrite
// empties only a folder stria wrote.
func checkFitFolder(dir string, o fitOptions) error {
	// Another stria writing the folder is the first thing to say.
	if err := runfolder.CheckUnlocked(dir); err != nil {
		return err
	}
	if o.resume {
		return nil
	}
	if o.gather != nil {
		return checkArrayFolder(dir)
	}
	what, err := runfolder.Holds(dir)
	if err != nil || what == "" {
		return err
	}
	if _, kerr := runfolder.Kind(dir); kerr != nil && !fileExists(filepath.Join(dir, runfolder.FileSettings)) {
		return fmt.Errorf("output folder %s holds %s; choose an empty or new output folder (--out)", dir, what)
	}
	if kind, _ := runfolder.Kind(dir); kind != "" && kind != runfolder.KindRun {
		return fmt.Errorf("output folder %s holds %s; a fit needs its own folder (--out)", dir, what)
	}
	if o.overwrite {
		return runfolder.CheckEmptiable(dir)
	}
	return fmt.Errorf("output folder %s holds %s: give --overwrite to replace it (its files are deleted first), --resume to continue an interrupted fit, or another --out", dir, what)
}

func fileExists(path string) bool {
	_, err := os.Stat(path)
	return err == nil
}

func printSummary(w io.Writer, dir string, s *runfolder.Summary) {
	fmt.Fprintf(w, "run folder: %s\n", dir)
	switch s.Responses {
	case "streamed":
		fmt.Fprintln(w, "responses: read once, in row blocks; fitted from their statistics per condition")
	case "loaded":
		fmt.Fprintln(w, "responses: loaded (only a .npy file is read in row blocks); fitted from their statistics per condition")
	case "trials":
		fmt.Fprintln(w, "responses: every trial held in memory")
	}
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
	printState(w, s.State)
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
