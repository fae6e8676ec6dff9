// Command striabench measures stria on a large synthetic recording: the
// .npy load rate, the wall time and peak memory of `stria fit` end to end
// (run as a child process, exactly as a user runs it), how both grow with
// the numbers of neurons and trials, and the held-out median R^2 of the
// projected solver against the mini-batch Adam path on the same split.
//
// Usage, from the repository root:
//
//	go run ./cmd/striabench [flags]
//
// The recording is made by synth.Population (the demo's heading-tuned population)
// and cached in -dir; the default size is 24,000 neurons x 4,600 trials,
// 60 bins of 6 degrees, one conv layer of 8 channels, kernel 9, circular
// border. Every figure is printed as it is measured.
package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"syscall"
	"time"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

type options struct {
	dir, stria         string
	neurons, trials    int
	seed               uint64
	repeats            int
	ladder, inproc     bool
	cpuprofile         string
	adamNeurons        int
	adamTrials         int
	adamBatch          int
	adamLR             float64
	adamPatience       int
	adamMaxEpochs      int
	adamTimeout        time.Duration
	skipAdam, skipLoad bool
	compare            bool
	acuity             bool
	keepRuns           bool
	projectedMaxEpochs int
	projectedPatience  int
	projectedLR        float64
	projectedReadoutL2 float64
	// run is the benchmark: run, or runMany with -many.
	run func(options) error
}

// runnerFlag starts striabench as a small runner that runs one child
// command and prints its wall time and peak RSS. Linux charges a child
// started by a big process (os/exec shares the parent's memory map until
// exec) with the parent's peak RSS; a child of the small runner reports
// its own.
const runnerFlag = "-run-child"

func main() {
	if len(os.Args) > 2 && os.Args[1] == runnerFlag {
		runChild(os.Args[2:])
		return
	}
	o := options{run: run}
	flag.StringVar(&o.dir, "dir", filepath.Join(os.TempDir(), "striabench"), "folder for the recordings, configs and run folders (recordings are reused when present)")
	flag.StringVar(&o.stria, "stria", "", "stria binary to time (default: build ./cmd/stria into -dir)")
	flag.IntVar(&o.neurons, "neurons", 24000, "neurons of the full-size recording")
	flag.IntVar(&o.trials, "trials", 4600, "trials of the full-size recording")
	flag.Uint64Var(&o.seed, "seed", 1, "seed of the synthetic recording and of the fits")
	flag.IntVar(&o.repeats, "repeats", 3, "runs of each timed fit (the median and the fastest are printed)")
	flag.BoolVar(&o.ladder, "ladder", true, "also time 1/4 and 1/2 of the neurons and of the trials")
	flag.BoolVar(&o.inproc, "phases", true, "also print the time of each phase of a full-size fit (stria fit --timings)")
	flag.StringVar(&o.cpuprofile, "cpuprofile", "", "write a CPU profile of the phases fit to this file (STRIA_CPUPROFILE)")
	flag.IntVar(&o.adamNeurons, "adam-neurons", 2000, "neurons for the mini-batch Adam comparison (the first ones of the full recording; all trials, so the split is the same)")
	flag.IntVar(&o.adamTrials, "adam-trials", 0, "trials for the Adam comparison (0: all)")
	flag.IntVar(&o.adamBatch, "adam-batch", 256, "train.batch_size of the Adam comparison")
	flag.Float64Var(&o.adamLR, "adam-lr", 1e-3, "train.learning_rate of the Adam comparison")
	flag.IntVar(&o.adamPatience, "adam-patience", 20, "train.patience of the Adam comparison")
	flag.IntVar(&o.adamMaxEpochs, "adam-max-epochs", 400, "train.max_epochs of the Adam comparison")
	flag.DurationVar(&o.adamTimeout, "adam-timeout", 20*time.Minute, "give up the Adam comparison after this long")
	flag.BoolVar(&o.skipAdam, "skip-adam", false, "skip the mini-batch Adam comparison")
	flag.BoolVar(&o.compare, "compare", true, "also time stria compare (5 folds: the projected encoder and the default baselines) on the full recording")
	flag.BoolVar(&o.acuity, "acuity", true, "also time stria acuity (default settings) on the full recording")
	flag.BoolVar(&o.skipLoad, "skip-load", false, "skip the .npy load measurement")
	flag.BoolVar(&o.keepRuns, "keep", true, "keep the run folders in -dir")
	flag.IntVar(&o.projectedMaxEpochs, "max-epochs", 3000, "train.max_epochs of the projected fits")
	flag.IntVar(&o.projectedPatience, "patience", 100, "train.patience of the projected fits")
	flag.Float64Var(&o.projectedLR, "lr", 1e-2, "train.learning_rate of the projected fits")
	flag.Float64Var(&o.projectedReadoutL2, "readout-l2", 1, "model.readout_l2 of every fit")
	var so streamOptions
	stream := flag.Bool("stream", false, "instead: time stria fit with the default config on a recording written to disk by synth.WriteNPY (-stream-neurons x -stream-trials), against cat FILE > /dev/null in the same run")
	flag.IntVar(&so.neurons, "stream-neurons", 1000000, "neurons of the -stream recording")
	flag.IntVar(&so.trials, "stream-trials", 4600, "trials of the -stream recording")
	flag.BoolVar(&so.keep, "stream-keep", false, "keep the -stream recording and run folder (a recording already in -dir is always kept)")
	flag.BoolVar(&so.inMemory, "stream-in-memory", false, "run the -stream fit with --in-memory (the trial-level path)")
	flag.BoolVar(&so.cold, "stream-cold", true, "evict the -stream recording from the page cache before each cat and each fit (Linux; only this file's pages), so both read it from the disk")
	benchPath := flag.String("benchfmt", "", "also append every measurement to this file in the Go benchmark format, for benchstat (cmd/striabench/benchfmt.go)")
	flag.Parse()
	if *benchPath != "" {
		b, closeBench, err := openBench(*benchPath)
		if err != nil {
			fmt.Fprintln(os.Stderr, "striabench:", err)
			os.Exit(1)
		}
		bench = b
		defer closeBench()
	}
	if *stream {
		if err := runStream(o, so); err != nil {
			fmt.Fprintln(os.Stderr, "striabench:", err)
			os.Exit(1)
		}
		return
	}
	if *manyCount > 0 {
		o.run = runMany // the many-recordings benchmark (many.go)
	}
	if err := o.run(o); err != nil {
		fmt.Fprintln(os.Stderr, "striabench:", err)
		os.Exit(1)
	}
}

func run(o options) error {
	if err := os.MkdirAll(o.dir, 0o755); err != nil {
		return err
	}
	fmt.Printf("striabench %s, %s/%s, GOMAXPROCS %d, %d CPUs\n", time.Now().Format("2006-01-02 15:04"), runtime.GOOS, runtime.GOARCH, runtime.GOMAXPROCS(0), runtime.NumCPU())
	if o.stria == "" {
		o.stria = filepath.Join(o.dir, "stria")
		cmd := exec.Command("go", "build", "-o", o.stria, "./cmd/stria")
		cmd.Stdout, cmd.Stderr = os.Stdout, os.Stderr
		if err := cmd.Run(); err != nil {
			return fmt.Errorf("building stria (run striabench from the repository root, or give -stria): %w", err)
		}
	}
	full, err := recording(o, o.neurons, o.trials)
	if err != nil {
		return err
	}
	matMB := float64(o.neurons) * float64(o.trials) * 4 / 1e6
	fmt.Printf("recording: %d neurons x %d trials, float32 %.0f MB (%s)\n", o.neurons, o.trials, matMB, full.resp)

	if !o.skipLoad {
		if err := measureLoad(full.resp, o.repeats); err != nil {
			return err
		}
	}

	fmt.Println("\nstria fit, train.solver projected, end to end (child process: load, bin, split, train, score, write the run folder):")
	res, err := timeFit(o, full, "projected", "full", o.repeats)
	if err != nil {
		return err
	}
	fmt.Printf("  wall %.2f s (median of %d; target <= 2.5), %d epochs, held-out median R^2 %.5f\n", res.wall, max(1, o.repeats), res.epochs, res.r2)
	fmt.Printf("  peak resident memory %.0f MB = %.2f x the float32 matrix (target <= 2)\n", res.maxRSS/1e6, res.maxRSS/1e6/matMB)

	if o.inproc {
		if err := phases(o, full); err != nil {
			return err
		}
	}

	if o.ladder {
		fmt.Println("\nhow the cost grows (projected, end to end, median of the runs):")
		fmt.Printf("  %-8s %-8s %8s %8s %10s\n", "neurons", "trials", "wall s", "RSS MB", "median R2")
		fmt.Printf("  %-8d %-8d %8.2f %8.0f %10.4f\n", o.neurons, o.trials, res.wall, res.maxRSS/1e6, res.r2)
		for _, f := range []struct {
			n, t int
		}{{o.neurons / 4, o.trials}, {o.neurons / 2, o.trials}, {o.neurons, o.trials / 4}, {o.neurons, o.trials / 2}} {
			rec, err := subset(o, full, f.n, f.t)
			if err != nil {
				return err
			}
			r, err := timeFit(o, rec, "projected", fmt.Sprintf("n%d_t%d", f.n, f.t), o.repeats)
			if err != nil {
				return err
			}
			fmt.Printf("  %-8d %-8d %8.2f %8.0f %10.4f\n", f.n, f.t, r.wall, r.maxRSS/1e6, r.r2)
		}
	}

	if o.compare {
		if err := timeCompare(o, full); err != nil {
			return err
		}
	}

	if o.acuity {
		if err := timeAcuity(o, full); err != nil {
			return err
		}
	}

	if !o.skipAdam {
		n, t := o.adamNeurons, o.adamTrials
		if n <= 0 || n > o.neurons {
			n = o.neurons
		}
		if t <= 0 || t > o.trials {
			t = o.trials
		}
		fmt.Printf("\nheld-out median R^2 on the same split, %d neurons x %d trials (the first ones of the full recording):\n", n, t)
		rec, err := subset(o, full, n, t)
		if err != nil {
			return err
		}
		rp, err := timeFit(o, rec, "projected", fmt.Sprintf("cmp_n%d_t%d", n, t), 1)
		if err != nil {
			return err
		}
		fmt.Printf("  projected:                        %.5f  (%d epochs, %.2f s)\n", rp.r2, rp.epochs, rp.wall)
		ra, err := timeFit(o, rec, "adam", fmt.Sprintf("cmp_n%d_t%d", n, t), 1)
		if err != nil {
			return err
		}
		fmt.Printf("  adam, batch %d, lr %g, patience %d: %.5f  (%d epochs, best %d, stopped by %s, %.1f s)\n",
			o.adamBatch, o.adamLR, o.adamPatience, ra.r2, ra.epochs, ra.best, ra.stop, ra.wall)
		fmt.Printf("  difference projected - adam:      %+.5f\n", rp.r2-ra.r2)
	}
	return nil
}

// childResult is what the runner prints.
type childResult struct {
	Wall   float64 `json:"wall"`
	MaxRSS float64 `json:"max_rss"` // bytes
	CPU    float64 `json:"cpu"`     // user + system seconds of the child, all threads
	Err    string  `json:"err,omitempty"`
	Stderr string  `json:"stderr,omitempty"`
}

// runChild runs args, stopping it with an interrupt after the duration in
// the STRIABENCH_TIMEOUT environment variable, and prints a childResult.
func runChild(args []string) {
	var res childResult
	cmd := exec.Command(args[0], args[1:]...)
	var stderr strings.Builder
	cmd.Stderr = &stderr
	timeout, _ := time.ParseDuration(os.Getenv("STRIABENCH_TIMEOUT"))
	start := time.Now()
	err := cmd.Start()
	if err == nil {
		done := make(chan error, 1)
		go func() { done <- cmd.Wait() }()
		var limit <-chan time.Time
		if timeout > 0 {
			limit = time.After(timeout)
		}
		select {
		case err = <-done:
		case <-limit:
			cmd.Process.Signal(os.Interrupt)
			<-done
			err = fmt.Errorf("stopped after %s", timeout)
		}
	}
	res.Wall = time.Since(start).Seconds()
	if err != nil {
		res.Err, res.Stderr = err.Error(), stderr.String()
	} else if ru, ok := cmd.ProcessState.SysUsage().(*syscall.Rusage); ok {
		res.MaxRSS = float64(ru.Maxrss) * 1024 // Linux reports kilobytes
		res.CPU = float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
	}
	json.NewEncoder(os.Stdout).Encode(res)
}

// rec is a recording on disk.
type rec struct {
	neurons, trials int
	resp, stim      string
}

// recording writes (or reuses) the synthetic recording of the given size.
func recording(o options, n, t int) (rec, error) {
	base := filepath.Join(o.dir, fmt.Sprintf("synth_n%d_t%d_s%d", n, t, o.seed))
	r := rec{neurons: n, trials: t, resp: base + "_responses.npy", stim: base + "_heading.npy"}
	if fileExists(r.resp) && fileExists(r.stim) {
		return r, nil
	}
	start := time.Now()
	cfg := synth.DefaultConfig()
	cfg.Neurons, cfg.Trials, cfg.Seed = n, t, o.seed
	cfg.Bins = 60
	recd, _, _ := synth.Population(cfg)
	if err := format.WriteNPY64(r.stim, []int{t}, recd.Stim); err != nil {
		return r, err
	}
	if err := format.WriteNPY(r.resp, []int{t, n}, recd.Y.Data); err != nil {
		return r, err
	}
	fmt.Printf("(generated %s in %.1f s)\n", filepath.Base(r.resp), time.Since(start).Seconds())
	return r, nil
}

// subset writes the first n neurons of the first t trials of full.
func subset(o options, full rec, n, t int) (rec, error) {
	if n == full.neurons && t == full.trials {
		return full, nil
	}
	base := filepath.Join(o.dir, fmt.Sprintf("synth_n%d_t%d_s%d_of_n%d_t%d", n, t, o.seed, full.neurons, full.trials))
	r := rec{neurons: n, trials: t, resp: base + "_responses.npy", stim: base + "_heading.npy"}
	if fileExists(r.resp) && fileExists(r.stim) {
		return r, nil
	}
	m, err := format.ReadNPY(full.resp)
	if err != nil {
		return r, err
	}
	stim, err := data.ReadVector(full.stim, "")
	if err != nil {
		return r, err
	}
	sub := make([]float32, n*t)
	for i := 0; i < t; i++ {
		copy(sub[i*n:(i+1)*n], m.Row(i)[:n])
	}
	if err := format.WriteNPY64(r.stim, []int{t}, stim[:t]); err != nil {
		return r, err
	}
	return r, format.WriteNPY(r.resp, []int{t, n}, sub)
}

func fileExists(p string) bool {
	_, err := os.Stat(p)
	return err == nil
}

// measureLoad times format.ReadNPY of the response file.
func measureLoad(path string, repeats int) error {
	st, err := os.Stat(path)
	if err != nil {
		return err
	}
	// Warm the page cache so that the rate is stria's, not the disk's.
	if b, err := os.ReadFile(path); err == nil {
		runtime.KeepAlive(b)
	}
	runtime.GC()
	// ReadNPY maps a large file of the fast layout, so the call alone
	// returns at once; the rate that counts includes one pass over every
	// value, which brings the pages in (as the data checks of a fit do).
	var rates, calls []float64
	for i := 0; i < max(1, repeats); i++ {
		start := time.Now()
		m, err := format.ReadNPY(path)
		if err != nil {
			return err
		}
		call := time.Since(start).Seconds()
		var sum float32
		for _, v := range m.Data {
			sum += v
		}
		sec := time.Since(start).Seconds()
		runtime.KeepAlive(sum)
		rates = append(rates, float64(st.Size())/sec/1e9)
		calls = append(calls, call)
		m = nil
		runtime.GC()
	}
	slices.Sort(rates)
	slices.Sort(calls)
	fmt.Printf("load (format.ReadNPY and one pass over every value, file in the page cache): median %.2f GB/s, best %.2f GB/s over %d loads of %.0f MB (target >= 1); the ReadNPY call alone: median %.3f s\n",
		rates[len(rates)/2], rates[len(rates)-1], len(rates), float64(st.Size())/1e6, calls[len(calls)/2])
	return nil
}

// fitResult is what one child `stria fit` reported.
type fitResult struct {
	wall, maxRSS float64 // seconds, bytes (median over the runs)
	r2           float64
	epochs, best int
	stop         string
}

const configTemplate = `seed: %d
data:
  responses: %s
  stimulus: %s
axis:
  name: heading
  unit: deg
  min: 0
  max: 360
  periodic: true
  bin_width: 6
split:
  keep_blocks: false
model:
  layers:
    - {channels: 8, kernel: 9, stride: 1, border: circular}
  output: identity
  loss: mse
  readout_l2: %g
train:
  solver: %s
  learning_rate: %g
  batch_size: %d
  max_epochs: %d
  patience: %d
output: %s
`

// timeFit runs `stria fit` on r repeats times and returns the median wall
// time and peak RSS and the held-out median R^2 of the last run.
func timeFit(o options, r rec, solver, tag string, repeats int) (fitResult, error) {
	var res fitResult
	name := fmt.Sprintf("%s_%s", solver, tag)
	out := filepath.Join(o.dir, "run_"+name)
	cfgPath := filepath.Join(o.dir, "config_"+name+".yaml")
	lr, batch, maxEp, pat := o.projectedLR, 0, o.projectedMaxEpochs, o.projectedPatience
	if solver == "adam" {
		lr, batch, maxEp, pat = o.adamLR, o.adamBatch, o.adamMaxEpochs, o.adamPatience
	}
	cfg := fmt.Sprintf(configTemplate, o.seed, r.resp, r.stim, o.projectedReadoutL2, solver, lr, batch, maxEp, pat, out)
	if err := os.WriteFile(cfgPath, []byte(cfg), 0o644); err != nil {
		return res, err
	}
	var walls, rss []float64
	for i := 0; i < max(1, repeats); i++ {
		os.RemoveAll(out)
		var env []string
		if solver == "adam" && o.adamTimeout > 0 {
			env = append(env, "STRIABENCH_TIMEOUT="+o.adamTimeout.String())
		}
		cr, err := inChild(o, "fit", cfgPath, env)
		if err != nil {
			return res, err
		}
		walls = append(walls, cr.Wall)
		rss = append(rss, cr.MaxRSS)
		bench.line(fmt.Sprintf("Fit/solver=%s/neurons=%d/trials=%d", solver, r.neurons, r.trials), cr.Wall, "cpu-s", cr.CPU, "peak-MB", cr.MaxRSS/1e6)
		wall, maxRSS := cr.Wall, cr.MaxRSS
		if repeats > 1 {
			fmt.Printf("  %s run %d: %.2f s wall, peak RSS %.0f MB\n", tag, i+1, wall, maxRSS/1e6)
		}
	}
	sum, err := runfolder.ReadSummary(out)
	if err != nil {
		return res, err
	}
	res.r2 = float64(sum.Medians["test_r2"])
	res.epochs, res.best, res.stop = sum.Epochs, sum.BestEpoch, sum.Stop
	slices.Sort(walls)
	slices.Sort(rss)
	res.wall, res.maxRSS = walls[len(walls)/2], rss[len(rss)/2]
	if repeats > 1 {
		fmt.Printf("  %s: median %.2f s, fastest %.2f s; %d epochs (best %d, %s); held-out median R^2 %.4f\n",
			tag, res.wall, walls[0], res.epochs, res.best, res.stop, res.r2)
	}
	if !o.keepRuns {
		os.RemoveAll(out)
	}
	return res, nil
}

// phases runs the steps of `stria fit` in this process and times each.
func phases(o options, r rec) error {
	out := filepath.Join(o.dir, "run_phases")
	cfgText := fmt.Sprintf(configTemplate, o.seed, r.resp, r.stim, o.projectedReadoutL2, "projected", o.projectedLR, 0, o.projectedMaxEpochs, o.projectedPatience, out)
	cfgPath := filepath.Join(o.dir, "config_phases.yaml")
	if err := os.WriteFile(cfgPath, []byte(cfgText), 0o644); err != nil {
		return err
	}
	// stria fit refuses a folder that holds an earlier run.
	os.RemoveAll(out)
	cmd := exec.Command(o.stria, "fit", "--quiet", "--timings", "--config", cfgPath)
	cmd.Env = os.Environ()
	if o.cpuprofile != "" {
		cmd.Env = append(cmd.Env, "STRIA_CPUPROFILE="+o.cpuprofile)
	}
	b, err := cmd.CombinedOutput()
	if err != nil {
		return fmt.Errorf("stria fit --timings: %w\n%s", err, b)
	}
	fmt.Println("\nphases of one more such fit (stria fit --timings):")
	for _, line := range strings.Split(string(b), "\n") {
		if strings.HasPrefix(line, "timing: ") {
			fmt.Println("  " + strings.TrimPrefix(line, "timing: "))
		}
	}
	return nil
}

// compareTemplate adds a comparison to a fit config: the encoder of the
// config (projected solver) and the default baselines, 5 folds.
const compareTemplate = `compare:
  output: %s
`

// timeCompare runs `stria compare` with 5 folds over the encoder and the
// default baselines on r, once, and prints the wall time, the peak memory
// and each model's median CC_norm.
func timeCompare(o options, r rec) error {
	name := "compare_full"
	out := filepath.Join(o.dir, "run_"+name)
	cfgPath := filepath.Join(o.dir, "config_"+name+".yaml")
	cfg := fmt.Sprintf(configTemplate, o.seed, r.resp, r.stim, o.projectedReadoutL2, "projected", o.projectedLR, 0, o.projectedMaxEpochs, o.projectedPatience, out+"_fit")
	cfg += fmt.Sprintf(compareTemplate, out)
	if err := os.WriteFile(cfgPath, []byte(cfg), 0o644); err != nil {
		return err
	}
	os.RemoveAll(out)
	fmt.Println("\nstria compare, 5 folds, the projected encoder and the default baselines (condmean, vonmises, vonmises2, smoothlinear), child process:")
	cr, err := inChild(o, "compare", cfgPath, nil)
	if err != nil {
		return err
	}
	matMB := float64(r.neurons) * float64(r.trials) * 4 / 1e6
	bench.line(fmt.Sprintf("Compare/neurons=%d/trials=%d/folds=5", r.neurons, r.trials), cr.Wall, "cpu-s", cr.CPU, "peak-MB", cr.MaxRSS/1e6)
	fmt.Printf("  wall %.1f s (target <= 60), peak resident memory %.0f MB = %.2f x the float32 matrix\n", cr.Wall, cr.MaxRSS/1e6, cr.MaxRSS/1e6/matMB)
	cj, err := comparefolder.ReadComparisonInfo(out)
	if err != nil {
		return err
	}
	for _, m := range cj.Models {
		fmt.Printf("  %-14s median cc_norm %.4f, test_r2 %.4f\n", m, float64(cj.Summary[m]["cc_norm"].Median), float64(cj.Summary[m]["test_r2"].Median))
	}
	if !o.keepRuns {
		os.RemoveAll(out)
	}
	return nil
}

// inChild runs `stria COMMAND --quiet --config cfgPath` through the runner
// (a child process whose peak memory is its own; env is added to the
// environment) and returns what the runner measured, or the command's
// error with its stderr.
func inChild(o options, command, cfgPath string, env []string) (childResult, error) {
	var cr childResult
	self, err := os.Executable()
	if err != nil {
		return cr, err
	}
	cmd := exec.Command(self, runnerFlag, o.stria, command, "--quiet", "--config", cfgPath)
	cmd.Env = append(os.Environ(), env...)
	b, err := cmd.Output()
	if err != nil {
		return cr, fmt.Errorf("runner: %w", err)
	}
	if err := json.Unmarshal(b, &cr); err != nil {
		return cr, fmt.Errorf("runner output %q: %w", b, err)
	}
	if cr.Err != "" {
		return cr, fmt.Errorf("stria %s %s: %s\n%s", command, cfgPath, cr.Err, cr.Stderr)
	}
	return cr, nil
}
