package main

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/projection"
	"github.com/strialab/stria/train/runfolder"
)

// stagesNeurons spans three blocks of sums (projection.SumBlock), the
// last one short.
const stagesNeurons = 2*projection.SumBlock + 300

// runStages runs the four stages of a fit over n array tasks into out
// (the tasks of each pass in the order given).
func runStages(t *testing.T, cfg, out string, n int, order []int) {
	t.Helper()
	for _, readouts := range []bool{false, true} {
		if readouts {
			if msg, err := runCLI(t, "gather", "--filters", out); err != nil {
				t.Fatal(msg, err)
			}
		}
		for _, i := range order {
			args := []string{"fit", "-c", cfg, "--out", out, "-q", "--array-task", itoa(i), "--array-task-count", itoa(n)}
			if readouts {
				args = append(args, "--readouts")
			}
			if msg, err := runCLI(t, args...); err != nil {
				t.Fatal(msg, err)
			}
		}
	}
	if msg, err := runCLI(t, "gather", out); err != nil {
		t.Fatal(msg, err)
	}
}

// TestFitStagesLikeOneFit: the fit in four stages (statistics and block
// sums per task, the reduce, the readouts per task, the merge) writes the
// files of the fit in one process byte for byte except the times, with 1
// task, 2 tasks (ranges of 4096 and 4396 neurons: not a divisor), 3 (one
// block each) and 5 (two tasks with no neurons), tasks in any order; so
// does the one-job gather of the tasks' statistics.
func TestFitStagesLikeOneFit(t *testing.T) {
	if testing.Short() {
		t.Skip("fits 8,492 neurons several times")
	}
	dir := t.TempDir()
	cfg := fitCaseOf(t, dir, stagesNeurons, 240, nil)
	single := filepath.Join(dir, "single")
	if out, err := runCLI(t, "fit", "-c", cfg, "--out", single, "-q"); err != nil {
		t.Fatal(out, err)
	}
	want := outputs(t, single)
	withoutTimes(want)
	for _, tc := range []struct {
		n     int
		order []int
	}{{1, []int{1}}, {2, []int{2, 1}}, {3, []int{3, 1, 2}}, {5, []int{5, 4, 3, 2, 1}}} {
		arr := filepath.Join(dir, "stages"+itoa(tc.n))
		runStages(t, cfg, arr, tc.n, tc.order)
		got := outputs(t, arr)
		withoutTimes(got)
		sameOutputs(t, want, got, itoa(tc.n)+" array tasks in stages")
		if _, err := os.Stat(filepath.Join(arr, runfolder.DirArrayTasks)); !os.IsNotExist(err) {
			t.Errorf("%d tasks: %s left in the run folder after gather", tc.n, runfolder.DirArrayTasks)
		}
		if err := runfolder.CheckComplete(arr, runfolder.KindRun); err != nil {
			t.Error(err)
		}
	}
	// The one-job gather of the statistics.
	arr := filepath.Join(dir, "onejob")
	for _, i := range []int{2, 1, 3} {
		if out, err := runCLI(t, "fit", "-c", cfg, "--out", arr, "-q", "--array-task", itoa(i), "--array-task-count", "3"); err != nil {
			t.Fatal(out, err)
		}
	}
	if out, err := runCLI(t, "gather", arr); err != nil {
		t.Fatal(out, err)
	}
	got := outputs(t, arr)
	withoutTimes(got)
	sameOutputs(t, want, got, "3 array tasks gathered in one job")
}

// TestNeuronRangeBlocks: the ranges of array tasks cover the neurons in
// order, each starting at a block boundary, with as many neurons as the
// rule gives (values worked out by hand).
func TestNeuronRangeBlocks(t *testing.T) {
	const b = projection.SumBlock
	for _, tc := range []struct {
		name    string
		n, N    int
		want    [][2]int
		coverOK bool
	}{
		{"one task", 1, 10, [][2]int{{0, 10}}, true},
		{"fewer neurons than a block", 3, 37, [][2]int{{0, 0}, {0, 0}, {0, 37}}, true},
		{"two tasks, three blocks", 2, 2*b + 300, [][2]int{{0, b}, {b, 2*b + 300}}, true},
		{"three tasks, three blocks", 3, 2*b + 300, [][2]int{{0, b}, {b, 2 * b}, {2 * b, 2*b + 300}}, true},
		{"four tasks, six blocks", 4, 6 * b, [][2]int{{0, b}, {b, 3 * b}, {3 * b, 4 * b}, {4 * b, 6 * b}}, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			for i := 1; i <= tc.n; i++ {
				n0, n1 := train.NeuronRange(i, tc.n, tc.N)
				if [2]int{n0, n1} != tc.want[i-1] {
					t.Errorf("task %d of %d over %d: got [%d, %d) want %v", i, tc.n, tc.N, n0, n1, tc.want[i-1])
				}
			}
		})
	}
	// Every count: contiguous, aligned, complete.
	for _, N := range []int{1, b - 1, b, b + 1, 7*b + 5, 1000000} {
		for n := 1; n <= 12; n++ {
			prev := 0
			for i := 1; i <= n; i++ {
				n0, n1 := train.NeuronRange(i, n, N)
				if n0 != prev || n1 < n0 || (n0%b != 0 && n0 != N) {
					t.Fatalf("%d neurons, task %d of %d: got [%d, %d) after %d", N, i, n, n0, n1, prev)
				}
				prev = n1
			}
			if prev != N {
				t.Fatalf("%d neurons over %d tasks: the ranges end at %d", N, n, prev)
			}
		}
	}
}

// TestFitStagesRefused: each stage names what is missing or mixed and the
// command to run, and leaves no output of its own: the reduce with a
// task missing, the readout pass before the reduce, with changed
// settings or data, the merge with a task's readouts missing.
func TestFitStagesRefused(t *testing.T) {
	dir := t.TempDir()
	cfg := fitCase(t, dir, nil)
	run := func(args ...string) error {
		t.Helper()
		_, err := runCLI(t, args...)
		return err
	}
	wantErr := func(err error, what string, want ...string) {
		t.Helper()
		if err == nil {
			t.Fatalf("%s: no error; want one mentioning %q", what, want)
		}
		for _, w := range want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: error %q does not mention %q", what, err, w)
			}
		}
	}
	task := func(out string, i, n int, more ...string) error {
		return run(append([]string{"fit", "-c", cfg, "--out", out, "-q", "--array-task", itoa(i), "--array-task-count", itoa(n)}, more...)...)
	}
	out := filepath.Join(dir, "out")
	if err := task(out, 1, 2); err != nil {
		t.Fatal(err)
	}
	wantErr(run("gather", "--filters", out), "reduce with a task missing", "array task(s) 2 of 2", "--array=2", "--filters")
	wantErr(task(out, 1, 2, "--readouts"), "readouts before the reduce", "filters have not been trained", "stria gather --filters "+out)
	if err := task(out, 2, 2); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(runfolder.ArrayFiltersDir(out)); !os.IsNotExist(err) {
		t.Errorf("a refused reduce left %s", runfolder.ArrayFiltersDir(out))
	}
	if err := run("gather", "--filters", out); err != nil {
		t.Fatal(err)
	}
	// Changed settings for the readout pass.
	other := filepath.Join(dir, "other.yaml")
	b, _ := os.ReadFile(cfg)
	os.WriteFile(other, bytes.Replace(b, []byte("seed: 3"), []byte("seed: 4"), 1), 0o644)
	err := run("fit", "-c", other, "--out", out, "-q", "--array-task", "1", "--array-task-count", "2", "--readouts")
	wantErr(err, "readouts with other settings", "other settings", "seed: 3 -> 4")
	if _, serr := os.Stat(filepath.Join(runfolder.ArrayTaskDir(out, 1, 2), runfolder.FileArrayReadouts)); serr == nil {
		t.Errorf("a refused readout pass wrote %s", runfolder.FileArrayReadouts)
	}
	// The merge with task 1's readouts missing.
	if err := task(out, 2, 2, "--readouts"); err != nil {
		t.Fatal(err)
	}
	wantErr(run("gather", out), "merge with a task's readouts missing", "array task(s) 1 of 2 have no readouts", "--readouts", "--array=1")
	if _, serr := os.Stat(filepath.Join(out, runfolder.FileComplete)); serr == nil {
		t.Errorf("a refused merge wrote %s", runfolder.FileComplete)
	}
	// Data changed after the reduce.
	resp := filepath.Join(dir, "resp.npy")
	later := time.Now().Add(time.Minute)
	if err := os.Chtimes(resp, later, later); err != nil {
		t.Fatal(err)
	}
	wantErr(task(out, 1, 2, "--readouts"), "readouts on changed data", "resp.npy", "modified")
	wantErr(run("gather", out), "merge on changed data", "array task(s) 1 of 2 have no readouts")
	if err := task(out, 1, 2); err != nil { // task 1's statistics again, on the data now
		t.Fatal(err)
	}
	wantErr(run("gather", "--filters", out), "reduce mixing data", "task_2_of_2", "resp.npy")
	// --readouts without a task.
	wantErr(run("fit", "-c", cfg, "--out", filepath.Join(dir, "x"), "-q", "--readouts"), "--readouts alone", "--array-task")
}

// TestFitSlurmScriptStages: the script of fit --slurm-script submits the
// four jobs, each after the one before has succeeded, with the commands
// of the stages; bash can parse it.
func TestFitSlurmScriptStages(t *testing.T) {
	dir := t.TempDir()
	cfg := fitCase(t, dir, nil)
	out, err := runCLI(t, "fit", "-c", cfg, "--out", filepath.Join(dir, "out"), "--slurm-script", "7")
	if err != nil {
		t.Fatal(out, err)
	}
	for _, want := range []string{"--array=1-7", "--array-task-count 7", `gather --filters $(q "$OUT")`, `--wrap "$task --readouts"`,
		`--dependency=afterok:"${stats%%;*}"`, `--dependency=afterok:"${filters%%;*}"`, `--dependency=afterok:"${readouts%%;*}"`, `gather $(q "$OUT")")`} {
		if !strings.Contains(out, want) {
			t.Errorf("the script lacks %q:\n%s", want, out)
		}
	}
	if n := strings.Count(out, "sbatch --parsable"); n != 4 {
		t.Errorf("the script submits %d jobs, want 4", n)
	}
	script := filepath.Join(dir, "fit.sh")
	os.WriteFile(script, []byte(out), 0o644)
	if b, err := exec.Command("bash", "-n", script).CombinedOutput(); err != nil {
		t.Errorf("bash -n: %v\n%s", err, b)
	}
}
