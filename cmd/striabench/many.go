package main

import (
	"encoding/json"
	"flag"
	"fmt"
	"io/fs"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"time"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// The many-recordings benchmark (-many N): N sessions of a heading-tuned
// population of our own, each written straight to disk by synth.WriteNPY,
// compared with the default models (the encoder and the baselines of a
// direction axis, 5 folds) as a job array, then gathered.
var (
	manyCount = flag.Int("many", 0, "run the many-recordings benchmark instead: generate this many sessions (300-3,000 neurons, 200-1,200 trials each, some with many untuned cells, few trials in some conditions), compare them as a job array and gather them (50 for the measured benchmark)")
	manyTasks = flag.Int("many-tasks", 10, "array tasks of -many")
	manySlurm = flag.String("many-slurm", "auto", "run the array of -many under Slurm: auto (when sbatch is found and a node is up), yes, or no (array tasks one after another here)")
	manyScale = flag.Float64("many-scale", 1, "scale the neurons and trials of -many's sessions (at least 20 neurons and 150 trials each)")
	manyKeep  = flag.Bool("many-keep", false, "keep -many's sessions and comparison folder (default: delete them at the end)")
	manyEpoch = flag.Int("many-max-epochs", 3000, "train.max_epochs of -many's encoder")
)

// session is one generated recording.
type session struct {
	name            string
	neurons, trials int
	untuned         float64
	noise           float64
	seed            uint64
}

// manyBins is the number of conditions (30-degree bins) of -many's axis,
// and manyFolds its folds.
const (
	manyBins  = 12
	manyFolds = 5
)

// manySessions draws the sessions' sizes and tunings from the seed.
func manySessions(n int, scale float64, seed uint64) []session {
	rng := rand.New(rand.NewPCG(seed, 0x6d616e79))
	out := make([]session, n)
	for k := range out {
		s := session{name: fmt.Sprintf("s%02d", k+1), seed: seed*1000 + uint64(k)}
		s.neurons = max(20, int(math.Round(scale*math.Exp(math.Log(300)+math.Log(10)*rng.Float64()))))
		s.trials = max(150, int(math.Round(scale*math.Exp(math.Log(200)+math.Log(6)*rng.Float64()))))
		s.untuned = 0.2 * rng.Float64()
		if k%5 == 2 {
			s.untuned = 0.6 // mostly untuned cells: many neurons without a usable ceiling
		}
		s.noise = 0.3 + 0.6*rng.Float64()
		out[k] = s
	}
	return out
}

// manyEstimate is the disk space -many needs, in bytes: the recordings,
// the fold results (scores and curves of every unit, float64) and the
// comparison folders (CSV rows of about 150-250 bytes, curves as float64).
func manyEstimate(ss []session, models int) (recBytes, resultBytes, folderBytes int64) {
	for _, s := range ss {
		n, t := int64(s.neurons), int64(s.trials)
		recBytes += 4*n*t + 8*t + 256
		units := int64(models * manyFolds)
		resultBytes += units * (8*manyBins*n + 8*14*n + 1024)
		folderBytes += units*n*170 + int64(models)*n*260 + int64(models+1)*n*110 + int64(models+2)*8*manyBins*n + 64<<10
	}
	return
}

const manyConfig = `# %d sessions of a heading-tuned population (striabench -many)
seed: %d
axis: {name: heading, unit: deg, min: 0, max: 360, periodic: true, bin_width: 30}
split: {keep_blocks: false, folds: %d}
model:
  layers: [{channels: 8, kernel: 5, border: circular}]
train: {max_epochs: %d}
recordings:
  - responses: sessions/*/responses.npy
    stimulus: heading.npy
compare:
  output: compare
`

// runMany runs the many-recordings benchmark.
func runMany(o options) error {
	ss := manySessions(*manyCount, *manyScale, o.seed)
	dir := filepath.Join(o.dir, "many")
	if o.stria == "" {
		if err := os.MkdirAll(o.dir, 0o755); err != nil {
			return err
		}
		o.stria = filepath.Join(o.dir, "stria")
		cmd := exec.Command("go", "build", "-o", o.stria, "./cmd/stria")
		cmd.Stdout, cmd.Stderr = os.Stdout, os.Stderr
		if err := cmd.Run(); err != nil {
			return fmt.Errorf("building stria (run striabench from the repository root, or give -stria): %w", err)
		}
	}
	if err := os.RemoveAll(dir); err != nil {
		return err
	}
	if err := os.MkdirAll(filepath.Join(dir, "sessions"), 0o755); err != nil {
		return err
	}
	if !*manyKeep {
		defer os.RemoveAll(dir)
	}
	models := 5 // the encoder and condmean, vonmises, vonmises2, smoothlinear
	rb, ub, fb := manyEstimate(ss, models)
	var neurons, trials int
	for _, s := range ss {
		neurons += s.neurons
		trials += s.trials
	}
	fmt.Printf("striabench -many: %d sessions, %d neurons and %d trials in all (%d-%d neurons, %d-%d trials per session), %d models x %d folds = %d units, %d array tasks\n",
		len(ss), neurons, trials, minOf(ss, func(s session) int { return s.neurons }), maxOf(ss, func(s session) int { return s.neurons }),
		minOf(ss, func(s session) int { return s.trials }), maxOf(ss, func(s session) int { return s.trials }), models, manyFolds, len(ss)*models*manyFolds, *manyTasks)
	need := rb + ub + fb
	fmt.Printf("disk space needed (estimate): %.0f MB = recordings %.0f MB + fold results %.0f MB + comparison folders %.0f MB, in %s\n",
		float64(need)/1e6, float64(rb)/1e6, float64(ub)/1e6, float64(fb)/1e6, dir)
	var st syscall.Statfs_t
	if err := syscall.Statfs(dir, &st); err == nil {
		if free := int64(st.Bavail) * int64(st.Bsize); free < need+need/4 {
			return fmt.Errorf("-many needs about %.0f MB in %s and %.0f MB are free: use a smaller -many-scale or another -dir", float64(need)/1e6, dir, float64(free)/1e6)
		}
	}

	start := time.Now()
	for _, s := range ss {
		if err := writeSession(dir, s); err != nil {
			return err
		}
	}
	gen := time.Since(start).Seconds()
	fmt.Printf("generated the sessions in %.1f s (synth.WriteNPY, streamed to disk)\n", gen)
	cfg := filepath.Join(dir, "many.yaml")
	if err := os.WriteFile(cfg, []byte(fmt.Sprintf(manyConfig, len(ss), o.seed, manyFolds, *manyEpoch)), 0o644); err != nil {
		return err
	}
	out := filepath.Join(dir, "compare")

	useSlurm, why := slurmUp()
	switch *manySlurm {
	case "yes":
		if !useSlurm {
			return fmt.Errorf("-many-slurm yes: %s", why)
		}
	case "no":
		useSlurm, why = false, "-many-slurm no"
	case "auto":
	default:
		return fmt.Errorf("-many-slurm %q: want auto, yes or no", *manySlurm)
	}
	var arrayWall, maxRSS float64
	var taskWalls []float64
	if useSlurm {
		fmt.Printf("array: %d tasks under Slurm (%s)\n", *manyTasks, why)
		script, err := exec.Command(o.stria, "compare", "--config", cfg, "--slurm-script", strconv.Itoa(*manyTasks)).Output()
		if err != nil {
			return fmt.Errorf("stria compare --slurm-script: %w", err)
		}
		path := filepath.Join(dir, "array.sh")
		if err := os.WriteFile(path, script, 0o755); err != nil {
			return err
		}
		t0 := time.Now()
		cmd := exec.Command("sbatch", "--wait", path)
		cmd.Dir = dir
		cmd.Env = append(os.Environ(), "STRIA="+o.stria)
		if b, err := cmd.CombinedOutput(); err != nil {
			logs, _ := filepath.Glob(filepath.Join(dir, "stria-task-*.log"))
			return fmt.Errorf("sbatch --wait: %w\n%s\n(task logs: %s)", err, b, strings.Join(logs, " "))
		}
		arrayWall = time.Since(t0).Seconds()
	} else {
		fmt.Printf("array: %d tasks run here one after another (%s)\n", *manyTasks, why)
		t0 := time.Now()
		for i := 1; i <= *manyTasks; i++ {
			cr, err := runStria(o, "compare", "--quiet", "--config", cfg, "--array-task", strconv.Itoa(i), "--array-task-count", strconv.Itoa(*manyTasks))
			if err != nil {
				return err
			}
			taskWalls = append(taskWalls, cr.Wall)
			maxRSS = max(maxRSS, cr.MaxRSS)
		}
		arrayWall = time.Since(t0).Seconds()
	}
	cr, err := runStria(o, "gather", out)
	if err != nil {
		return err
	}
	maxRSS = max(maxRSS, cr.MaxRSS)
	used, files := diskUse(dir)
	fmt.Printf("array tasks: %.1f s wall in all", arrayWall)
	if len(taskWalls) > 0 {
		slices.Sort(taskWalls)
		fmt.Printf(" (per task: fastest %.1f s, median %.1f s, slowest %.1f s)", taskWalls[0], taskWalls[len(taskWalls)/2], taskWalls[len(taskWalls)-1])
	}
	fmt.Printf("\nstria gather: %.1f s wall\n", cr.Wall)
	fmt.Printf("in all: %.1f s (without generating: %.1f s); peak resident memory of a task or gather %.0f MB\n", gen+arrayWall+cr.Wall, arrayWall+cr.Wall, maxRSS/1e6)
	fmt.Printf("disk used: %.0f MB in %d files (estimate %.0f MB)\n", float64(used)/1e6, files, float64(need)/1e6)
	a, err := comparefolder.ReadAcross(out)
	if err != nil {
		return err
	}
	fmt.Println("pooled neurons, median cc_norm [interquartile range]:")
	for _, r := range a.Pooled {
		if r.Metric == "cc_norm" {
			fmt.Printf("  %-14s %.4f [%.4f, %.4f]\n", r.Model, float64(r.Median), float64(r.Q1), float64(r.Q3))
		}
	}
	if *manyKeep {
		fmt.Printf("kept: %s\n", dir)
	}
	return nil
}

// writeSession writes one session's responses and stimulus, drawing its
// seed again until every condition has at least 2 x manyFolds trials
// (every fold's training part then keeps two per condition for its
// validation split; a session may still have as few as two test trials in
// a condition, which the comparison's few-trials caution reports).
func writeSession(dir string, s session) error {
	sd := filepath.Join(dir, "sessions", s.name)
	if err := os.MkdirAll(sd, 0o755); err != nil {
		return err
	}
	cfg := synth.StreamConfig{Neurons: s.neurons, Trials: s.trials, UntunedFrac: s.untuned, GainSD: 0.15, NoiseSD: s.noise, Seed: s.seed}
	for try := 0; ; try++ {
		stim, err := synth.WriteNPY(filepath.Join(sd, "responses.npy"), cfg)
		if err != nil {
			return err
		}
		var count [manyBins]int
		for _, v := range stim {
			count[min(manyBins-1, int(v/(360/manyBins)))]++
		}
		if slices.Min(count[:]) >= 2*manyFolds || try == 20 {
			return format.WriteNPY64(filepath.Join(sd, "heading.npy"), []int{len(stim)}, stim)
		}
		cfg.Seed += 1 << 32
	}
}

// slurmUp reports whether sbatch is found and a Slurm node is up, and why.
func slurmUp() (bool, string) {
	if _, err := exec.LookPath("sbatch"); err != nil {
		return false, "no sbatch on PATH"
	}
	b, err := exec.Command("sinfo", "-h", "-o", "%T").Output()
	if err != nil {
		return false, "sinfo failed: " + err.Error()
	}
	for _, s := range strings.Fields(string(b)) {
		switch strings.TrimRight(s, "*~#") {
		case "idle", "mixed", "allocated":
			return true, "a node is " + s
		}
	}
	return false, fmt.Sprintf("no Slurm node up (sinfo: %q)", strings.TrimSpace(string(b)))
}

// runStria runs the stria binary with args through the runner (its own
// wall time and peak memory) and returns what the runner measured, or the
// command's error with its stderr.
func runStria(o options, args ...string) (childResult, error) {
	var cr childResult
	self, err := os.Executable()
	if err != nil {
		return cr, err
	}
	b, err := exec.Command(self, append([]string{runnerFlag, o.stria}, args...)...).Output()
	if err != nil {
		return cr, fmt.Errorf("runner: %w", err)
	}
	if err := json.Unmarshal(b, &cr); err != nil {
		return cr, fmt.Errorf("runner output %q: %w", b, err)
	}
	if cr.Err != "" {
		return cr, fmt.Errorf("stria %s: %s\n%s", strings.Join(args, " "), cr.Err, cr.Stderr)
	}
	return cr, nil
}

// diskUse returns the bytes and the number of files under dir.
func diskUse(dir string) (int64, int) {
	var bytes int64
	var files int
	filepath.WalkDir(dir, func(_ string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			if info, err := d.Info(); err == nil {
				bytes += info.Size()
				files++
			}
		}
		return nil
	})
	return bytes, files
}

func minOf(ss []session, f func(session) int) int {
	m := f(ss[0])
	for _, s := range ss[1:] {
		m = min(m, f(s))
	}
	return m
}

func maxOf(ss []session, f func(session) int) int {
	m := f(ss[0])
	for _, s := range ss[1:] {
		m = max(m, f(s))
	}
	return m
}
