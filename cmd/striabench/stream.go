package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"syscall"
	"time"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/train/runfolder"
)

// streamOptions are the flags of the one-pass benchmark (-stream).
type streamOptions struct {
	neurons, trials int
	keep            bool
	inMemory        bool
	cold            bool
}

// defaultTemplate is a config with the defaults for everything but the
// data, the axis and the output: what a user's first fit runs.
const defaultTemplate = `seed: %d
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
output: %s
`

// runStream measures `stria fit` with the default config on a recording
// written to disk by synth.WriteNPY (streamed: nothing of its size is held
// in memory), against a plain sequential read of the same file (cat FILE >
// /dev/null) in the same run: cat, fit, cat, -repeats times, each in a
// child process whose peak RSS is its own, with the recording evicted from
// the page cache before each (-stream-cold, the default; a recording that
// fits in memory is otherwise read from the cache). It states the disk space it
// needs first and deletes the recording and run folder afterwards unless
// -stream-keep.
func runStream(o options, so streamOptions) error {
	if err := os.MkdirAll(o.dir, 0o755); err != nil {
		return err
	}
	N, T := so.neurons, so.trials
	fileBytes := int64(N) * int64(T) * 4
	// The run folder: parameters/readout_coef.npy (N x 60 float64 at the
	// default shape), neuron_scores.csv (about 120 bytes per neuron) and
	// a few more values per neuron: 0.61 GB measured at a million.
	runBytes := int64(N) * (60*8 + 120 + 10*8)
	fmt.Printf("striabench -stream %s: %d neurons x %d trials, float32\n", time.Now().Format("2006-01-02 15:04"), N, T)
	fmt.Printf("disk space needed in %s: %.1f GB (recording %.1f GB, run folder %.1f GB)\n", o.dir, float64(fileBytes+runBytes)/1e9, float64(fileBytes)/1e9, float64(runBytes)/1e9)
	var st syscall.Statfs_t
	if err := syscall.Statfs(o.dir, &st); err == nil {
		free := int64(st.Bavail) * int64(st.Bsize)
		fmt.Printf("free there: %.1f GB\n", float64(free)/1e9)
		base := filepath.Join(o.dir, fmt.Sprintf("stream_n%d_t%d_s%d", N, T, o.seed))
		if !fileExists(base+"_responses.npy") && free < fileBytes+runBytes {
			return fmt.Errorf("not enough free disk space in %s (give -dir)", o.dir)
		}
	}
	if o.stria == "" {
		o.stria = filepath.Join(o.dir, "stria")
		cmd := exec.Command("go", "build", "-o", o.stria, "./cmd/stria")
		cmd.Stdout, cmd.Stderr = os.Stdout, os.Stderr
		if err := cmd.Run(); err != nil {
			return fmt.Errorf("building stria (run striabench from the repository root, or give -stria): %w", err)
		}
	}
	base := filepath.Join(o.dir, fmt.Sprintf("stream_n%d_t%d_s%d", N, T, o.seed))
	resp, stimPath := base+"_responses.npy", base+"_heading.npy"
	out := base + "_run"
	made := false
	if !fileExists(resp) || !fileExists(stimPath) {
		start := time.Now()
		stim, err := synth.WriteNPY(resp, synth.StreamConfig{Neurons: N, Trials: T, UntunedFrac: 0.1, GainSD: 0.15, NoiseSD: 0.5, Seed: o.seed})
		if err != nil {
			return err
		}
		if err := format.WriteNPY64(stimPath, []int{T}, stim); err != nil {
			return err
		}
		made = true
		fmt.Printf("wrote %s in %.0f s (synth.WriteNPY, streamed to disk)\n", resp, time.Since(start).Seconds())
	}
	defer func() {
		if !so.keep {
			os.RemoveAll(out)
			if made {
				os.Remove(resp)
				os.Remove(stimPath)
			}
		}
	}()
	cfgPath := base + "_config.yaml"
	if err := os.WriteFile(cfgPath, []byte(fmt.Sprintf(defaultTemplate, o.seed, resp, stimPath, out)), 0o644); err != nil {
		return err
	}
	// evict drops the recording's pages from the page cache (-stream-cold):
	// a recording that fits in memory would otherwise be read from the
	// cache by whichever command comes second.
	evict := func() error {
		if !so.cold {
			return nil
		}
		return evictFile(resp)
	}
	cat := func() (childResult, error) {
		if err := evict(); err != nil {
			return childResult{}, err
		}
		return runnerArgs("cat", resp)
	}
	if so.cold {
		fmt.Println("the recording is evicted from the page cache before each command (-stream-cold)")
	}
	// The second yardstick: a sequential read past the page cache (dd
	// with O_DIRECT, 64 MiB requests), which costs the kernel no copying;
	// on a machine whose page cache is slow to fill, cat measures the
	// cache more than the disk. Linux only; skipped if dd refuses.
	direct := runtime.GOOS == "linux"
	var cats, fits, ratios, rss, directs, dratios []float64
	for i := 0; i < max(1, o.repeats); i++ {
		c1, err := cat()
		if err != nil {
			return err
		}
		os.RemoveAll(out)
		args := []string{o.stria, "fit", "--quiet", "--config", cfgPath}
		if so.inMemory {
			args = append(args, "--in-memory")
		}
		if err := evict(); err != nil {
			return err
		}
		f, err := runnerArgs(args...)
		if err != nil {
			return err
		}
		c2, err := cat()
		if err != nil {
			return err
		}
		catMean := (c1.Wall + c2.Wall) / 2
		dtext, dwall := "", math.NaN()
		if direct {
			d, err := runnerArgs("dd", "if="+resp, "of=/dev/null", "bs=64M", "iflag=direct", "status=none")
			if err != nil {
				fmt.Printf("  (no read past the page cache: %v)\n", err)
				direct = false
			} else {
				dwall = d.Wall
				dtext = fmt.Sprintf("; dd iflag=direct %.1f s, fit / dd %.2f", dwall, f.Wall/dwall)
				directs, dratios = append(directs, dwall), append(dratios, f.Wall/dwall)
			}
		}
		kv := []any{"cpu-s", f.CPU, "peak-MB", f.MaxRSS / 1e6, "x-cat", f.Wall / catMean, "cat-s", catMean}
		if !math.IsNaN(dwall) {
			kv = append(kv, "x-dd-direct", f.Wall/dwall, "dd-direct-s", dwall)
		}
		bench.line(fmt.Sprintf("StreamFit/neurons=%d/trials=%d", so.neurons, so.trials), f.Wall, kv...)
		fmt.Printf("  run %d: cat %.1f s, stria fit %.1f s (%.0f s CPU), cat %.1f s; fit / mean cat %.2f%s; fit peak RSS %.2f GB\n",
			i+1, c1.Wall, f.Wall, f.CPU, c2.Wall, f.Wall/catMean, dtext, f.MaxRSS/1e9)
		cats = append(cats, c1.Wall, c2.Wall)
		fits = append(fits, f.Wall)
		ratios = append(ratios, f.Wall/catMean)
		rss = append(rss, f.MaxRSS)
	}
	sum, err := runfolder.ReadSummary(out)
	if err != nil {
		return err
	}
	fmt.Printf("summary: responses %s; %d epochs; held-out median R^2 %.4f\n", sum.Responses, sum.Epochs, float64(sum.Medians["test_r2"]))
	fmt.Printf("fit wall %.1f-%.1f s, cat %.1f-%.1f s, ratio fit / cat %.2f-%.2f (target <= 1.5), peak RSS %.2f-%.2f GB (target <= 4)\n",
		slices.Min(fits), slices.Max(fits), slices.Min(cats), slices.Max(cats), slices.Min(ratios), slices.Max(ratios), slices.Min(rss)/1e9, slices.Max(rss)/1e9)
	if len(directs) > 0 {
		fmt.Printf("read past the page cache (dd iflag=direct bs=64M) %.1f-%.1f s, ratio fit / that read %.2f-%.2f\n",
			slices.Min(directs), slices.Max(directs), slices.Min(dratios), slices.Max(dratios))
	}
	return nil
}

// runnerArgs runs args through the runner (see runnerFlag) and returns
// what it measured, or the command's error with its stderr.
func runnerArgs(args ...string) (childResult, error) {
	var cr childResult
	self, err := os.Executable()
	if err != nil {
		return cr, err
	}
	b, err := exec.Command(self, append([]string{runnerFlag}, args...)...).Output()
	if err != nil {
		return cr, fmt.Errorf("runner: %w", err)
	}
	if err := json.Unmarshal(b, &cr); err != nil {
		return cr, fmt.Errorf("runner output %q: %w", b, err)
	}
	if cr.Err != "" {
		return cr, fmt.Errorf("%v: %s\n%s", args, cr.Err, cr.Stderr)
	}
	return cr, nil
}
