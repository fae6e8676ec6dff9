package main

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/train/runfolder"
)

// fitCase writes a small synthetic recording (.npy) and a fit config
// reading it; edit changes the responses before they are written.
func fitCase(t *testing.T, dir string, edit func(y []float32, neurons int)) string {
	return fitCaseOf(t, dir, 37, 900, edit)
}

// fitCaseOf is fitCase with neurons x trials.
func fitCaseOf(t *testing.T, dir string, neurons, trials int, edit func(y []float32, neurons int)) string {
	t.Helper()
	cfg := synth.DefaultConfig()
	cfg.Neurons, cfg.Trials, cfg.Seed = neurons, trials, 4
	rec, _, _ := synth.Population(cfg)
	if edit != nil {
		edit(rec.Y.Data, rec.Y.Cols)
	}
	if err := format.WriteNPY(filepath.Join(dir, "resp.npy"), []int{rec.Y.Rows, rec.Y.Cols}, rec.Y.Data); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(filepath.Join(dir, "heading.npy"), []int{len(rec.Stim)}, rec.Stim); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, "fit.yaml")
	src := `seed: 3
data: {responses: resp.npy, stimulus: heading.npy}
axis: {name: heading, unit: deg, min: 0, max: 360, periodic: true, bin_width: 12}
train: {max_epochs: 60}
`
	if err := os.WriteFile(path, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// withoutTimes blanks the fields of a run folder that hold times: the
// seconds column of training_history.csv, wall_seconds of summary.json
// and created of model.json.
func withoutTimes(m map[string][]byte) {
	for name, re := range map[string]*regexp.Regexp{
		runfolder.FileHistory:  regexp.MustCompile(`,[0-9.]+\n`),
		runfolder.FileSummary:  regexp.MustCompile(`"wall_seconds": [0-9.e+-]+`),
		runfolder.FileManifest: regexp.MustCompile(`"created": "[^"]*"`),
	} {
		m[name] = re.ReplaceAll(m[name], nil)
	}
}

// TestFitArrayTasksGatherLikeOneFit: a fit spread over array tasks (three
// of them, in any order, and one of five tasks with no neurons at all)
// and gathered writes the files of the fit in one process, byte for byte
// except the times; the tasks' statistics are gone and complete.json is
// there.
func TestFitArrayTasksGatherLikeOneFit(t *testing.T) {
	dir := t.TempDir()
	cfg := fitCase(t, dir, nil)
	single := filepath.Join(dir, "single")
	if out, err := runCLI(t, "fit", "-c", cfg, "--out", single, "-q"); err != nil {
		t.Fatal(out, err)
	}
	want := outputs(t, single)
	withoutTimes(want)
	for _, n := range []int{3, 40} {
		arr := filepath.Join(dir, "array"+itoa(n))
		order := []int{2, 3, 1}
		if n == 40 {
			order = nil
			for i := 40; i >= 1; i-- {
				order = append(order, i)
			}
		}
		for _, i := range order {
			if out, err := runCLI(t, "fit", "-c", cfg, "--out", arr, "-q", "--array-task", itoa(i), "--array-task-count", itoa(n)); err != nil {
				t.Fatal(out, err)
			}
		}
		out, err := runCLI(t, "gather", arr)
		if err != nil {
			t.Fatal(out, err)
		}
		got := outputs(t, arr)
		withoutTimes(got)
		sameOutputs(t, want, got, itoa(n)+" array tasks")
		if _, err := os.Stat(filepath.Join(arr, runfolder.DirArrayTasks)); !os.IsNotExist(err) {
			t.Errorf("%d tasks: %s left in the run folder after gather", n, runfolder.DirArrayTasks)
		}
		if err := runfolder.CheckComplete(arr, runfolder.KindRun); err != nil {
			t.Error(err)
		}
	}
}

func itoa(i int) string { return strconv.Itoa(i) }

// TestFitArrayTasksRefused: gather names the tasks that have not run,
// refuses statistics written with other settings, with another task count
// or on data that changed since; the streamed fit and an array task name
// the file, trial and neuron of a non-finite response, and a truncated
// file.
func TestFitArrayTasksRefused(t *testing.T) {
	dir := t.TempDir()
	const badTrial, badNeuron = 411, 29
	cfg := fitCase(t, dir, nil)
	task := func(cfg, out string, i, n int) {
		t.Helper()
		if msg, err := runCLI(t, "fit", "-c", cfg, "--out", out, "-q", "--array-task", itoa(i), "--array-task-count", itoa(n)); err != nil {
			t.Fatal(msg, err)
		}
	}
	gatherErr := func(out string, want ...string) {
		t.Helper()
		msg, err := runCLI(t, "gather", out)
		if err == nil {
			t.Fatalf("gather %s: no error; want one mentioning %q", out, want)
		}
		for _, w := range want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("gather %s: error %q does not mention %q", out, err, w)
			}
		}
		if _, serr := os.Stat(filepath.Join(out, runfolder.FileComplete)); serr == nil {
			t.Errorf("gather %s failed but wrote %s (output: %s)", out, runfolder.FileComplete, msg)
		}
	}
	missing := filepath.Join(dir, "missing")
	task(cfg, missing, 1, 4)
	task(cfg, missing, 3, 4)
	gatherErr(missing, "array task(s) 2, 4 of 4 have not finished", "--array=2,4")

	// Other settings: a config with another seed for task 2.
	other := filepath.Join(dir, "other.yaml")
	b, _ := os.ReadFile(cfg)
	os.WriteFile(other, bytes.Replace(b, []byte("seed: 3"), []byte("seed: 4"), 1), 0o644)
	mixed := filepath.Join(dir, "mixed")
	task(cfg, mixed, 1, 3)
	task(other, mixed, 2, 3)
	task(cfg, mixed, 3, 3)
	gatherErr(mixed, "task_2_of_3", "other settings", "seed: 4 -> 3")

	counts := filepath.Join(dir, "counts")
	task(cfg, counts, 1, 2)
	task(cfg, counts, 2, 3)
	gatherErr(counts, "2 and 3 tasks")

	// Data changed after the tasks ran.
	changed := filepath.Join(dir, "changed")
	task(cfg, changed, 1, 2)
	task(cfg, changed, 2, 2)
	resp := filepath.Join(dir, "resp.npy")
	later := time.Now().Add(time.Minute)
	if err := os.Chtimes(resp, later, later); err != nil {
		t.Fatal(err)
	}
	gatherErr(changed, "task_1_of_2", "resp.npy", "modified")

	// A NaN response, in the one-pass fit and in the array task holding
	// its neuron; a truncated file.
	bad := t.TempDir()
	badCfg := fitCase(t, bad, func(y []float32, n int) { y[badTrial*n+badNeuron] = float32(math.NaN()) })
	for _, args := range [][]string{
		{"fit", "-c", badCfg, "-q"},
		{"fit", "-c", badCfg, "-q", "--out", filepath.Join(bad, "arr"), "--array-task", "3", "--array-task-count", "3"},
	} {
		_, err := runCLI(t, args...)
		if err == nil || !strings.Contains(err.Error(), "resp.npy") || !strings.Contains(err.Error(), "trial 411") || !strings.Contains(err.Error(), "neuron 29") {
			t.Errorf("%v: error %v, want one naming resp.npy, trial 411 and neuron 29", args, err)
		}
	}
	respBad := filepath.Join(bad, "resp.npy")
	st, _ := os.Stat(respBad)
	if err := os.Truncate(respBad, st.Size()-4*37*10); err != nil {
		t.Fatal(err)
	}
	if _, err := runCLI(t, "fit", "-c", badCfg, "-q", "--out", filepath.Join(bad, "trunc")); err == nil || !strings.Contains(err.Error(), "resp.npy") {
		t.Errorf("truncated file: error %v, want one naming resp.npy", err)
	}
}

// TestTaskCountNote: more tasks than blocks of neurons are named, with the
// number that is enough; otherwise nothing is said.
func TestTaskCountNote(t *testing.T) {
	for _, c := range []struct {
		n, N int
		want string
	}{
		{6, 24000, ""},
		{1, 10, ""},
		{8, 24000, "with 8 tasks, 2 of them get no neurons and finish at once: 6 tasks are enough"},
		{2, 4096, "with 2 tasks, 1 of them gets no neurons and finishes at once: 1 task is enough"},
	} {
		got := taskCountNote(c.n, c.N)
		if (c.want == "") != (got == "") || !strings.Contains(got, c.want) {
			t.Errorf("taskCountNote(%d, %d) = %q, want one containing %q", c.n, c.N, got, c.want)
		}
	}
}
