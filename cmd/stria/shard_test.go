package main

import (
	"bytes"
	"fmt"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/train"
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
		cfg := data.DefaultSynthConfig()
		cfg.Neurons, cfg.Trials, cfg.Seed = 24+4*i, 480, uint64(100+i)
		rec, _, _ := data.Synth(cfg)
		if err := data.WriteNPY(filepath.Join(sub, "resp.npy"), []int{rec.Y.Rows, rec.Y.Cols}, rec.Y.Data); err != nil {
			t.Fatal(err)
		}
		if err := data.WriteNPY64(filepath.Join(sub, "heading.npy"), []int{len(rec.Stim)}, rec.Stim); err != nil {
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
// units, the configs (which hold the folder's own path) and exports.
func outputs(t *testing.T, dir string) map[string][]byte {
	t.Helper()
	m := map[string][]byte{}
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(dir, p)
		if d.IsDir() {
			if d.Name() == train.UnitsDir || d.Name() == train.DirExport {
				return filepath.SkipDir
			}
			return nil
		}
		if filepath.Base(p) == train.FileConfig || filepath.Base(p) == train.FileReport {
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
			t.Errorf("%s: %s differs from the unsharded run", what, name)
		}
	}
}

func TestShardsMergeLikeOneRun(t *testing.T) {
	if testing.Short() {
		t.Skip("runs several processes")
	}
	dir := t.TempDir()
	cfg := writeSessions(t, dir, 40)
	out, err := runCLI(t, "compare", "--config", cfg, "--quiet")
	if err != nil {
		t.Fatalf("unsharded: %v\n%s", err, out)
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
	for _, f := range []string{"m1-resp/scores.csv", "m3-resp/comparison.json", train.FileRecordings, train.FilePooled, train.FilePooledPairs} {
		if _, ok := full[f]; !ok {
			t.Errorf("unsharded run lacks %s", f)
		}
	}

	// Three shards in three processes, then merge.
	sharded := filepath.Join(dir, "sharded")
	for i := 1; i <= 3; i++ {
		b, err := child("compare", "--config", cfg, "--out", sharded, "--shard", fmt.Sprintf("%d/3", i), "--quiet").CombinedOutput()
		if err != nil {
			t.Fatalf("shard %d: %v\n%s", i, err, b)
		}
	}
	if b, err := child("merge", sharded).CombinedOutput(); err != nil {
		t.Fatalf("merge: %v\n%s", err, b)
	}
	sameOutputs(t, full, outputs(t, sharded), "sharded")
}

func TestKilledShardReruns(t *testing.T) {
	if testing.Short() {
		t.Skip("runs several processes")
	}
	dir := t.TempDir()
	// Long enough units (no early stop) that the shard is still running
	// when its first unit lands.
	cfg := writeSessions(t, dir, 2000)
	if out, err := runCLI(t, "compare", "--config", cfg, "--quiet"); err != nil {
		t.Fatalf("unsharded: %v\n%s", err, out)
	}
	full := outputs(t, filepath.Join(dir, "full"))

	killed := filepath.Join(dir, "killed")
	units := filepath.Join(killed, train.UnitsDir)
	cmd := child("compare", "--config", cfg, "--out", killed, "--shard", "1/2", "--workers", "1", "--quiet")
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	// Kill the shard once its first unit is on disk.
	deadline := time.Now().Add(60 * time.Second)
	for countUnits(units) == 0 && time.Now().Before(deadline) {
		time.Sleep(5 * time.Millisecond)
	}
	cmd.Process.Kill()
	if err := cmd.Wait(); err == nil {
		t.Fatal("the shard finished before it could be killed: make its units slower")
	}
	before := countUnits(units)
	t.Logf("killed the shard after %d units", before)
	if before == 0 {
		t.Fatal("the shard wrote no unit before the deadline")
	}
	// No half-written unit: every file there decodes (merge checks that too).
	b, err := child("merge", killed).CombinedOutput()
	if err == nil || !strings.Contains(string(b), "units missing") {
		t.Fatalf("merge of an unfinished comparison: %v\n%s", err, b)
	}
	if !strings.Contains(string(b), "fold") {
		t.Errorf("merge error does not name the missing units:\n%s", b)
	}
	for _, shard := range []string{"1/2", "2/2"} {
		b, err := child("compare", "--config", cfg, "--out", killed, "--shard", shard).CombinedOutput()
		if err != nil {
			t.Fatalf("shard %s: %v\n%s", shard, err, b)
		}
		if shard == "1/2" && before > 0 && !strings.Contains(string(b), "already done") {
			t.Errorf("rerun of the killed shard redid its finished units:\n%s", b)
		}
	}
	if b, err := child("merge", killed).CombinedOutput(); err != nil {
		t.Fatalf("merge: %v\n%s", err, b)
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

func TestPrintArrayScript(t *testing.T) {
	dir := t.TempDir()
	cfg := writeSessions(t, dir, 40)
	out, err := runCLI(t, "compare", "--config", cfg, "--print-array-script", "4")
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"#SBATCH --array=1-4", `--shard "${SLURM_ARRAY_TASK_ID}/4"`, "merge"} {
		if !strings.Contains(out, want) {
			t.Errorf("array script lacks %q:\n%s", want, out)
		}
	}
}
