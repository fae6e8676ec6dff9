package main

import (
	"bytes"
	"fmt"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// TestMain lets the tests run the stria command in child processes: the
// test binary acts as stria when STRIA_RUN_MAIN is set.
func TestMain(m *testing.M) {
	if os.Getenv("STRIA_RUN_MAIN") == "1" {
		main()
		os.Exit(0)
	}
	os.Exit(m.Run())
}

// child returns a command running stria in a separate process.
func child(args ...string) *exec.Cmd {
	cmd := exec.Command(os.Args[0], args...)
	cmd.Env = append(os.Environ(), "STRIA_RUN_MAIN=1")
	return cmd
}

// writeSessions writes three small synthetic recordings and a comparison
// config over all of them.
func writeSessions(t *testing.T, dir string, epochs int) string {
	t.Helper()
	for i := 1; i <= 3; i++ {
		sub := filepath.Join(dir, "sessions", fmt.Sprintf("m%d", i))
		os.MkdirAll(sub, 0o755)
		cfg := synth.DefaultConfig()
		cfg.Neurons, cfg.Trials, cfg.Seed = 24+4*i, 480, uint64(100+i)
		rec, _, _ := synth.Population(cfg)
		if err := format.WriteNPY(filepath.Join(sub, "resp.npy"), []int{rec.Y.Rows, rec.Y.Cols}, rec.Y.Data); err != nil {
			t.Fatal(err)
		}
		if err := format.WriteNPY64(filepath.Join(sub, "heading.npy"), []int{len(rec.Stim)}, rec.Stim); err != nil {
			t.Fatal(err)
		}
	}
	cfg := filepath.Join(dir, "many.yaml")
	src := `seed: 5
recordings:
  - responses: sessions/*/resp.npy
    stimulus: heading.npy
axis: {name: heading, unit: deg, min: 0, max: 360, periodic: true, bin_width: 30}
split: {folds: 3, keep_blocks: false}
model:
  layers: [{channels: 3, kernel: 5}]
train: {max_epochs: %d, patience: %d}
compare:
  baselines: [condmean, vonmises]
  starts: 2
  output: full
`
	src = fmt.Sprintf(src, epochs, epochs)
	if err := os.WriteFile(cfg, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	return cfg
}

// outputs reads every output file of a comparison folder except the
// fold results, the settings (which hold the folder's own path), the
// completion markers (which hold a time) and exports.
func outputs(t *testing.T, dir string) map[string][]byte {
	t.Helper()
	m := map[string][]byte{}
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(dir, p)
		if d.IsDir() {
			if d.Name() == runfolder.DirFoldResults || d.Name() == runfolder.DirFigures {
				return filepath.SkipDir
			}
			return nil
		}
		// complete.json holds the time the folder was finished.
		if filepath.Base(p) == runfolder.FileSettings || filepath.Base(p) == runfolder.FileReport || filepath.Base(p) == runfolder.FileComplete {
			return nil
		}
		b, _ := os.ReadFile(p)
		m[rel] = b
		return nil
	})
	return m
}

func sameOutputs(t *testing.T, want, got map[string][]byte, what string) {
	t.Helper()
	if len(want) == 0 || len(want) != len(got) {
		t.Fatalf("%s: %d output files, want %d", what, len(got), len(want))
	}
	for name, b := range want {
		if !bytes.Equal(b, got[name]) {
			t.Errorf("%s: %s differs from the run in one process", what, name)
		}
	}
}

func TestArrayTasksGatherLikeOneRun(t *testing.T) {
	if testing.Short() {
		t.Skip("runs several processes")
	}
	dir := t.TempDir()
	cfg := writeSessions(t, dir, 40)
	out, err := runCLI(t, "compare", "--config", cfg, "--quiet")
	if err != nil {
		t.Fatalf("in one process: %v\n%s", err, out)
	}
	if !strings.Contains(out, "all 3 recordings, neurons pooled") {
		t.Errorf("no pooled table in:\n%s", out)
	}
	// The report of a comparison over recordings, before outputs() reads
	// the folder (the report adds export folders and report.html).
	rep := filepath.Join(dir, "many-report.html")
	if out, err := runCLI(t, "report", "--out", rep, filepath.Join(dir, "full")); err != nil {
		t.Fatalf("report over recordings: %v\n%s", err, out)
	}
	html, _ := os.ReadFile(rep)
	for _, want := range []string{"Across recordings", "Recording m1-resp", "Recording m3-resp", "median of recordings"} {
		if !bytes.Contains(html, []byte(want)) {
			t.Errorf("report over recordings lacks %q", want)
		}
	}
	full := outputs(t, filepath.Join(dir, "full"))
	for _, f := range []string{"m1-resp/fold_scores.csv", "m3-resp/comparison.json", runfolder.FilePerRecording, comparefolder.FilePooledSummary, comparefolder.FilePooledPairs} {
		if _, ok := full[f]; !ok {
			t.Errorf("the run in one process lacks %s", f)
		}
	}

	// Three array tasks in three processes, then gather. The third task
	// finds its number in Slurm's environment: SLURM_ARRAY_TASK_ID 7 of
	// an array 5-7 is task 7-5+1 = 3 of 3.
	tasks := filepath.Join(dir, "tasks")
	for i := 1; i <= 3; i++ {
		cmd := child("compare", "--config", cfg, "--out", tasks, "--array-task", strconv.Itoa(i), "--array-task-count", "3", "--quiet")
		if i == 3 {
			cmd = child("compare", "--config", cfg, "--out", tasks, "--quiet")
			cmd.Env = append(cmd.Env, "SLURM_ARRAY_TASK_ID=7", "SLURM_ARRAY_TASK_MIN=5", "SLURM_ARRAY_TASK_COUNT=3")
		}
		b, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("array task %d: %v\n%s", i, err, b)
		}
		if !strings.Contains(string(b), fmt.Sprintf("array task %d of 3", i)) {
			t.Errorf("array task %d does not say which task it ran:\n%s", i, b)
		}
		if i == 3 && !strings.Contains(string(b), "SLURM_ARRAY_TASK_ID=7") {
			t.Errorf("the task taken from Slurm's environment does not say so:\n%s", b)
		}
	}
	if b, err := child("gather", tasks).CombinedOutput(); err != nil {
		t.Fatalf("gather: %v\n%s", err, b)
	}
	if _, err := os.Stat(filepath.Join(tasks, runfolder.FileComplete)); err != nil {
		t.Errorf("gather wrote no %s: %v", runfolder.FileComplete, err)
	}
	sameOutputs(t, full, outputs(t, tasks), "array tasks")
}

func TestKilledArrayTaskReruns(t *testing.T) {
	if testing.Short() {
		t.Skip("runs several processes")
	}
	dir := t.TempDir()
	// Long enough units (no early stop) that the array task is still running
	// when its first unit lands.
	cfg := writeSessions(t, dir, 2000)
	if out, err := runCLI(t, "compare", "--config", cfg, "--quiet"); err != nil {
		t.Fatalf("in one process: %v\n%s", err, out)
	}
	full := outputs(t, filepath.Join(dir, "full"))

	killed := filepath.Join(dir, "killed")
	units := filepath.Join(killed, runfolder.DirFoldResults)
	cmd := child("compare", "--config", cfg, "--out", killed, "--array-task", "1", "--array-task-count", "2", "--workers", "1", "--quiet")
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	// Kill the array task once its first unit is on disk.
	deadline := time.Now().Add(60 * time.Second)
	for countUnits(units) == 0 && time.Now().Before(deadline) {
		time.Sleep(5 * time.Millisecond)
	}
	cmd.Process.Kill()
	if err := cmd.Wait(); err == nil {
		t.Fatal("the array task finished before it could be killed: make its units slower")
	}
	before := countUnits(units)
	t.Logf("killed the array task after %d units", before)
	if before == 0 {
		t.Fatal("the array task wrote no unit before the deadline")
	}
	// No half-written unit: every file there decodes (gather checks that too).
	b, err := child("gather", killed).CombinedOutput()
	if err == nil || !strings.Contains(string(b), "units missing") {
		t.Fatalf("gather of an unfinished comparison: %v\n%s", err, b)
	}
	if !strings.Contains(string(b), "fold") {
		t.Errorf("gather error does not name the missing units:\n%s", b)
	}
	// Readers refuse the unfinished folder.
	b, err = child("report", killed).CombinedOutput()
	if want := "is incomplete: the comparison that wrote it did not finish (no complete.json)"; err == nil || !strings.Contains(string(b), want) {
		t.Errorf("report of an unfinished comparison: %v, want an error containing %q\n%s", err, want, b)
	}
	for _, task := range []string{"1", "2"} {
		b, err := child("compare", "--config", cfg, "--out", killed, "--array-task", task, "--array-task-count", "2").CombinedOutput()
		if err != nil {
			t.Fatalf("array task %s: %v\n%s", task, err, b)
		}
		if task == "1" && before > 0 && !strings.Contains(string(b), "already done") {
			t.Errorf("rerun of the killed array task redid its finished units:\n%s", b)
		}
	}
	if b, err := child("gather", killed).CombinedOutput(); err != nil {
		t.Fatalf("gather: %v\n%s", err, b)
	}
	sameOutputs(t, full, outputs(t, killed), "killed and rerun")
}

func countUnits(dir string) int {
	n := 0
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() && strings.HasSuffix(p, ".gob") {
			n++
		}
		return nil
	})
	return n
}

func TestSlurmScript(t *testing.T) {
	dir := t.TempDir()
	cfg := writeSessions(t, dir, 40)
	out, err := runCLI(t, "compare", "--config", cfg, "--slurm-script", "4")
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"#SBATCH --array=1-4", `--array-task "${SLURM_ARRAY_TASK_ID}" --array-task-count 4`, "gather"} {
		if !strings.Contains(out, want) {
			t.Errorf("array script lacks %q:\n%s", want, out)
		}
	}
}
