package main

import (
	"fmt"
	"io/fs"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/settings"
)

// The command-line catalogue of bad inputs and faults. Every row must end
// with an error (stria exits non-zero) whose message holds each of its
// want strings (the file, field, trial or neuron at fault), without a Go
// trace, and must leave the output folders as they were (nothing written
// into a folder that did not exist, no file of an existing one changed).
//
// The rows below are what only the whole command can show. Two tables
// cover the rest, and are not repeated here:
//   - train.TestConfigFileMistakes and train.TestValidateRefusesBadSettings:
//     config mistakes (wrong type with line and key, unknown words,
//     stride 0, axis.min/max missing, a config over 1 MB, bad shapes);
//   - data.TestBadInputCatalogue: broken and inconsistent data files
//     (.npy, .npz, CSV/TSV, stimulus, condition and block files).
// A truncated mapped file (a memory fault) is in train.TestFitTruncatedMapping,
// a file changed during a comparison in compare.TestChangedDataRefused.
//
// The lock rows name the test's parent process (alive, and not this
// process, whose own lock a check lets pass) as the other writer.
//
// To add a row: give it a name, write what it needs in setup (the fixture
// has a good recording and configs; setup may run stria first to make a
// folder to spoil) and return the arguments; want holds the substrings.

// fixture is a folder with a small good recording (resp.npy: 240 trials
// x 24 neurons, counts; stim.npy: 8 headings) and a good config
// (cfg.yaml) fitting into out/ and comparing into cmp/.
type fixture struct {
	dir, cfg, resp, stim, out, cmp string
}

const fixtureConfig = `seed: %d
data: {responses: resp.npy, stimulus: stim.npy}
axis: {name: heading, unit: deg, min: 0, max: 360, periodic: true, bin_width: 45}
split: {folds: 2, keep_blocks: false}
model:
  readout_l2: %g
  layers: [{channels: 2, kernel: 3}]
train: {max_epochs: 4, patience: 4}
compare: {baselines: [condmean], output: cmp}
output: out
`

func newFixture(t *testing.T) *fixture {
	t.Helper()
	d := t.TempDir()
	f := &fixture{dir: d, cfg: filepath.Join(d, "cfg.yaml"), resp: filepath.Join(d, "resp.npy"), stim: filepath.Join(d, "stim.npy"),
		out: filepath.Join(d, "out"), cmp: filepath.Join(d, "cmp")}
	rows, cols := 240, 24
	y := make([]float32, rows*cols)
	s := make([]float64, rows)
	rng := rand.New(rand.NewPCG(7, 8))
	for tr := range rows {
		s[tr] = float64(tr%8) * 45
		for j := range cols {
			pref := float64(j%8) * 45
			d := (s[tr] - pref) / 45
			y[tr*cols+j] = float32(int(4/(1+d*d) + 2*rng.Float64()))
		}
	}
	f.writeResp(t, y, rows, cols)
	if err := format.WriteNPY64(f.stim, []int{rows}, s); err != nil {
		t.Fatal(err)
	}
	f.config(t, 1, 1)
	return f
}

func (f *fixture) writeResp(t *testing.T, y []float32, rows, cols int) {
	t.Helper()
	if err := format.WriteNPY(f.resp, []int{rows, cols}, y); err != nil {
		t.Fatal(err)
	}
}

// config writes cfg.yaml with a seed and readout_l2.
func (f *fixture) config(t *testing.T, seed int, l2 float64) {
	t.Helper()
	if err := os.WriteFile(f.cfg, []byte(fmt.Sprintf(fixtureConfig, seed, l2)), 0o644); err != nil {
		t.Fatal(err)
	}
}

// edit replaces old by new in cfg.yaml.
func (f *fixture) edit(t *testing.T, old, new string) {
	t.Helper()
	b, _ := os.ReadFile(f.cfg)
	s := strings.Replace(string(b), old, new, 1)
	if s == string(b) {
		t.Fatalf("fixture config lacks %q", old)
	}
	os.WriteFile(f.cfg, []byte(s), 0o644)
}

// shuffleTrials rewrites resp.npy and stim.npy with the trials in another
// order (the same recording, the same size).
func (f *fixture) shuffleTrials(t *testing.T) {
	t.Helper()
	m, err := format.ReadNPY(f.resp)
	if err != nil {
		t.Fatal(err)
	}
	s, err := data.ReadVector(f.stim, "")
	if err != nil {
		t.Fatal(err)
	}
	perm := rand.New(rand.NewPCG(1, 1)).Perm(m.Rows)
	y := make([]float32, len(m.Data))
	s2 := make([]float64, len(s))
	for i, p := range perm {
		copy(y[i*m.Cols:(i+1)*m.Cols], m.Row(p))
		s2[i] = s[p]
	}
	// A distinct modification time even on a coarse clock.
	time.Sleep(10 * time.Millisecond)
	f.writeResp(t, y, m.Rows, m.Cols)
	format.WriteNPY64(f.stim, []int{len(s2)}, s2)
}

// run runs stria and fails the test on an error.
func (f *fixture) run(t *testing.T, args ...string) {
	t.Helper()
	if out, err := runCLI(t, args...); err != nil {
		t.Fatalf("stria %s: %v\n%s", strings.Join(args, " "), err, out)
	}
}

type badRow struct {
	name  string
	setup func(t *testing.T, f *fixture) []string
	want  []string
}

func fitArgs(f *fixture, more ...string) []string {
	return append([]string{"fit", "--config", f.cfg, "--quiet"}, more...)
}

func compareArgs(f *fixture, more ...string) []string {
	return append([]string{"compare", "--config", f.cfg, "--quiet"}, more...)
}

var badRows = []badRow{
	// --- Silently stale or mixed comparison results ---
	{"compare: readout_l2 1 -> 100 on finished units", func(t *testing.T, f *fixture) []string {
		f.run(t, compareArgs(f)...)
		f.config(t, 1, 100)
		return compareArgs(f)
	}, []string{"encoder/fold1", "model.readout_l2: 1 -> 100", "--overwrite", "new output folder"}},
	{"compare: the same recording with its trials shuffled", func(t *testing.T, f *fixture) []string {
		f.run(t, compareArgs(f)...)
		f.shuffleTrials(t)
		return compareArgs(f)
	}, []string{"resp.npy", "content differs", "stim.npy"}},
	{"compare: another seed", func(t *testing.T, f *fixture) []string {
		f.run(t, compareArgs(f)...)
		f.config(t, 2, 1)
		return compareArgs(f)
	}, []string{"seed: 1 -> 2"}},
	{"compare: array task 2/2 with another seed than task 1/2", func(t *testing.T, f *fixture) []string {
		f.run(t, compareArgs(f, "--array-task", "1", "--array-task-count", "2")...)
		f.config(t, 2, 1)
		return compareArgs(f, "--array-task", "2", "--array-task-count", "2")
	}, []string{"settings.yaml", "seed: 1 -> 2", "array tasks of one comparison must share them"}},
	{"gather: units of two seeds", func(t *testing.T, f *fixture) []string {
		// Task 1 with seed 1 into its own folder, task 2 with seed 2 into
		// another, then task 1's units beside task 2's: gather reads the
		// settings of seed 2.
		f.run(t, compareArgs(f, "--array-task", "1", "--array-task-count", "2")...)
		f.config(t, 2, 1)
		other := filepath.Join(f.dir, "cmp2")
		f.run(t, compareArgs(f, "--out", other, "--array-task", "2", "--array-task-count", "2")...)
		copyTree(t, filepath.Join(f.cmp, runfolder.DirFoldResults), filepath.Join(other, runfolder.DirFoldResults))
		f.cmp = other
		return []string{"gather", other}
	}, []string{"seed: 1 -> 2", "refusing to mix"}},
	{"gather: the data changed after the units ran", func(t *testing.T, f *fixture) []string {
		f.run(t, compareArgs(f, "--array-task", "1", "--array-task-count", "1")...)
		f.shuffleTrials(t)
		return []string{"gather", f.cmp}
	}, []string{"resp.npy", "content differs"}},
	{"fit --resume: a checkpoint written on other data", func(t *testing.T, f *fixture) []string {
		fakeCheckpoint(t, f)
		f.shuffleTrials(t)
		return fitArgs(f, "--resume")
	}, []string{"--resume", "other data", "resp.npy", "modified"}}, // the one-pass fit hashes nothing: size and time decide
	{"fit --resume: a checkpoint written with another config", func(t *testing.T, f *fixture) []string {
		fakeCheckpoint(t, f)
		f.config(t, 1, 100)
		return fitArgs(f, "--resume")
	}, []string{"--resume", "another config", "model.readout_l2: 1 -> 100"}},
	{"fit --resume: no checkpoint", func(t *testing.T, f *fixture) []string { return fitArgs(f, "--resume") },
		[]string{"--resume", "resume_state.gob"}},
	{"fit --resume with --overwrite", func(t *testing.T, f *fixture) []string { return fitArgs(f, "--resume", "--overwrite") },
		[]string{"give one of them"}},

	// --- Folders: another run, another writer, bad paths ---
	{"fit into a folder holding a run", func(t *testing.T, f *fixture) []string {
		f.run(t, fitArgs(f)...)
		return fitArgs(f)
	}, []string{"out", "holds a run folder", "--overwrite"}},
	{"fit --overwrite into a folder of other files", func(t *testing.T, f *fixture) []string {
		os.MkdirAll(f.out, 0o755)
		os.WriteFile(filepath.Join(f.out, "notes.txt"), []byte("mine"), 0o644)
		return fitArgs(f, "--overwrite")
	}, []string{"out", "did not write", "empty or new output folder"}},
	{"fit --overwrite into a folder with a settings.yaml beside other files", func(t *testing.T, f *fixture) []string {
		os.MkdirAll(f.out, 0o755)
		os.WriteFile(filepath.Join(f.out, runfolder.FileSettings), []byte("seed: 1\n"), 0o644)
		os.WriteFile(filepath.Join(f.out, "my_recording.npy"), []byte("mine"), 0o644)
		return fitArgs(f, "--overwrite")
	}, []string{"out", "did not write (my_recording.npy)", "refusing to delete"}},
	{"compare --overwrite into a folder with other files", func(t *testing.T, f *fixture) []string {
		f.run(t, compareArgs(f)...)
		os.WriteFile(filepath.Join(f.cmp, "analysis.ipynb"), []byte("{}"), 0o644)
		return compareArgs(f, "--overwrite")
	}, []string{"cmp", "did not write (analysis.ipynb)"}},
	{"fit while another process writes the folder", func(t *testing.T, f *fixture) []string {
		host, _ := os.Hostname()
		writeLockFile(t, f.out, runfolder.LockInfo{PID: os.Getppid(), Host: host, Started: "2026-12-03T10:00:00Z", Command: "stria fit --config other.yaml"})
		return fitArgs(f)
	}, []string{"another stria process", fmt.Sprintf("pid %d", os.Getppid()), "other.yaml"}},
	{"compare while another process writes the folder", func(t *testing.T, f *fixture) []string {
		host, _ := os.Hostname()
		writeLockFile(t, f.cmp, runfolder.LockInfo{PID: os.Getppid(), Host: host, Started: "2026-12-03T10:00:00Z", Command: "stria compare"})
		return compareArgs(f)
	}, []string{"another stria process", fmt.Sprintf("pid %d", os.Getppid())}},
	{"array task while a whole comparison writes the folder", func(t *testing.T, f *fixture) []string {
		host, _ := os.Hostname()
		f.run(t, compareArgs(f, "--array-task", "1", "--array-task-count", "2")...)
		writeLockFile(t, f.cmp, runfolder.LockInfo{PID: os.Getppid(), Host: host, Started: "2026-12-03T10:00:00Z", Command: "stria compare"})
		return compareArgs(f, "--array-task", "2", "--array-task-count", "2")
	}, []string{"another stria process"}},
	{"compare --overwrite with array tasks", func(t *testing.T, f *fixture) []string {
		return compareArgs(f, "--overwrite", "--array-task", "1", "--array-task-count", "2")
	}, []string{"--overwrite", "other array tasks"}},
	{"fit: output path is a file", func(t *testing.T, f *fixture) []string {
		os.WriteFile(f.out, []byte("x"), 0o644)
		return fitArgs(f)
	}, []string{"out", "is a file, not a folder"}},
	{"compare: output path under a file", func(t *testing.T, f *fixture) []string {
		os.WriteFile(filepath.Join(f.dir, "afile"), []byte("x"), 0o644)
		return compareArgs(f, "--out", filepath.Join(f.dir, "afile", "cmp"))
	}, []string{"afile is a file, not a folder"}},
	{"compare into a run folder", func(t *testing.T, f *fixture) []string {
		f.run(t, fitArgs(f)...)
		return compareArgs(f, "--out", f.out)
	}, []string{"out", "run folder", "its own folder"}},
	{"gather: a run folder", func(t *testing.T, f *fixture) []string {
		f.run(t, fitArgs(f)...)
		return []string{"gather", f.out}
	}, []string{"is a run folder"}},
	{"gather: units missing", func(t *testing.T, f *fixture) []string {
		f.run(t, compareArgs(f, "--array-task", "1", "--array-task-count", "2")...)
		return []string{"gather", f.cmp}
	}, []string{"units missing", "not done"}},
	{"predict: an unfinished run folder", func(t *testing.T, f *fixture) []string {
		f.run(t, fitArgs(f)...)
		os.Remove(filepath.Join(f.out, runfolder.FileComplete))
		return []string{"predict", "--stimulus", f.stim, "--out", filepath.Join(f.dir, "p.npy"), f.out}
	}, []string{"incomplete", "complete.json"}},
	{"export: an unfinished comparison folder", func(t *testing.T, f *fixture) []string {
		f.run(t, compareArgs(f, "--array-task", "1", "--array-task-count", "2")...)
		return []string{"export", f.cmp}
	}, []string{"incomplete", "stria gather"}},

	// --- Data checked before anything is written ---
	{"compare: a NaN response", func(t *testing.T, f *fixture) []string {
		m, _ := format.ReadNPY(f.resp)
		m.Data[5*m.Cols+3] = float32(nanValue())
		f.writeResp(t, m.Data, m.Rows, m.Cols)
		return compareArgs(f)
	}, []string{"resp.npy", "trial 5", "neuron 3"}},
	{"compare: too few trials per condition for the folds", func(t *testing.T, f *fixture) []string {
		f.edit(t, "folds: 2", "folds: 40")
		return compareArgs(f)
	}, []string{"folds"}},
	{"fit: poisson on non-counts", func(t *testing.T, f *fixture) []string {
		m, _ := format.ReadNPY(f.resp)
		m.Data[9*m.Cols+4] = 2.5
		f.writeResp(t, m.Data, m.Rows, m.Cols)
		f.edit(t, "  readout_l2:", "  loss: poisson\n  output: softplus\n  readout_l2:")
		f.edit(t, "keep_blocks: false", "keep_blocks: false, zscore: false")
		return fitArgs(f)
	}, []string{"resp.npy", "not counts", "trial 9", "neuron 4"}},
	{"inspect: poisson on negative values", func(t *testing.T, f *fixture) []string {
		m, _ := format.ReadNPY(f.resp)
		m.Data[2*m.Cols+1] = -1
		f.writeResp(t, m.Data, m.Rows, m.Cols)
		f.edit(t, "  readout_l2:", "  loss: poisson\n  output: softplus\n  readout_l2:")
		f.edit(t, "keep_blocks: false", "keep_blocks: false, zscore: false")
		return []string{"inspect", "--config", f.cfg}
	}, []string{"resp.npy", "not counts", "trial 2", "neuron 1"}},
	{"fit: responses file missing", func(t *testing.T, f *fixture) []string {
		os.Remove(f.resp)
		return fitArgs(f)
	}, []string{"resp.npy", "no such file"}},
	{"fit: config too large", func(t *testing.T, f *fixture) []string {
		b, _ := os.ReadFile(f.cfg)
		os.WriteFile(f.cfg, append(b, []byte("# "+strings.Repeat("x", 1<<20)+"\n")...), 0o644)
		return fitArgs(f)
	}, []string{"cfg.yaml", "larger than 1 MB"}},
	{"fit: a wrong-type value", func(t *testing.T, f *fixture) []string {
		f.edit(t, "seed: 1", "seed: one")
		return fitArgs(f)
	}, []string{"cfg.yaml", "line 1", "seed"}},

	// --- Command lines ---
	{"predict: --out after the folder", func(t *testing.T, f *fixture) []string {
		f.run(t, fitArgs(f)...)
		return []string{"predict", "--stimulus", f.stim, f.out, "--out", "x.npy"}
	}, []string{"option --out after the folder", "put options before it"}},
	{"predict: no --out", func(t *testing.T, f *fixture) []string {
		return []string{"predict", "--stimulus", f.stim, f.out}
	}, []string{"give --out"}},
	{"predict: --out of an unknown kind", func(t *testing.T, f *fixture) []string {
		return []string{"predict", "--stimulus", f.stim, "--out", filepath.Join(f.dir, "pred.txt"), f.out}
	}, []string{"pred.txt", ".npy or .csv"}},
	{"fit: a stray argument", func(t *testing.T, f *fixture) []string { return append(fitArgs(f), "extra") },
		[]string{"fit takes no arguments", "extra"}},
	{"compare: a stray argument", func(t *testing.T, f *fixture) []string { return append(compareArgs(f), "cfg.yaml") },
		[]string{"compare takes no arguments", "cfg.yaml"}},
	{"inspect: a stray argument", func(t *testing.T, f *fixture) []string {
		return []string{"inspect", "--config", f.cfg, "resp.npy"}
	}, []string{"inspect takes no arguments", "resp.npy"}},
	{"demo: a stray argument", func(t *testing.T, f *fixture) []string {
		return []string{"demo", "--out", filepath.Join(f.dir, "demo"), "now"}
	}, []string{"demo takes no arguments", "now"}},
}

// TestBadInputCLI runs the catalogue; it reports the number of rows.
func TestBadInputCLI(t *testing.T) {
	names := map[string]bool{}
	for _, c := range badRows {
		if names[c.name] {
			t.Fatalf("two rows are called %q", c.name)
		}
		names[c.name] = true
		t.Run(c.name, func(t *testing.T) {
			f := newFixture(t)
			args := c.setup(t, f)
			before := map[string]string{}
			for _, d := range []string{f.out, f.cmp, filepath.Join(f.dir, "demo")} {
				snapshot(t, d, before)
			}
			out, err := runCLI(t, args...)
			if err == nil {
				t.Fatalf("stria %s succeeded, want an error\n%s", strings.Join(args, " "), out)
			}
			msg := err.Error()
			t.Logf("stria: %s", msg)
			for _, w := range c.want {
				if !strings.Contains(msg, w) {
					t.Errorf("error %q does not mention %q", msg, w)
				}
			}
			if strings.Contains(msg, "goroutine ") || strings.Contains(msg, "panic") {
				t.Errorf("a Go trace in the message: %s", msg)
			}
			after := map[string]string{}
			for _, d := range []string{f.out, f.cmp, filepath.Join(f.dir, "demo")} {
				snapshot(t, d, after)
			}
			for p, v := range after {
				if before[p] != v {
					t.Errorf("%s written by the refused command", p)
				}
			}
			for p := range before {
				if _, ok := after[p]; !ok {
					t.Errorf("%s removed by the refused command", p)
				}
			}
		})
	}
	t.Logf("%d command-line cases refused cleanly", len(badRows))
}

// snapshot records every file and folder under dir (size, time, mode).
func snapshot(t *testing.T, dir string, m map[string]string) {
	t.Helper()
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return nil
		}
		st, err := d.Info()
		if err != nil {
			return nil
		}
		v := fmt.Sprintf("%v %v", st.Mode(), st.IsDir())
		if !st.IsDir() {
			v += fmt.Sprintf(" %d %v", st.Size(), st.ModTime().UnixNano())
		}
		m[p] = v
		return nil
	})
}

func writeLockFile(t *testing.T, dir string, l runfolder.LockInfo) {
	t.Helper()
	os.MkdirAll(dir, 0o755)
	if err := runfolder.WriteJSON(filepath.Join(dir, runfolder.FileLock), l); err != nil {
		t.Fatal(err)
	}
}

// fakeCheckpoint writes the resume state an interrupted fit of the
// fixture's config would leave (its config and data files; the training
// state does not matter to the checks).
func fakeCheckpoint(t *testing.T, f *fixture) {
	t.Helper()
	cfg, err := settings.LoadConfig(f.cfg)
	if err != nil {
		t.Fatal(err)
	}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	b, err := cfg.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	rec, err := data.Load(cfg.Source())
	if err != nil {
		t.Fatal(err)
	}
	if err := rec.HashFiles(); err != nil {
		t.Fatal(err)
	}
	if err := runfolder.SaveResumeState(f.out, &train.Checkpoint{Config: b, Files: rec.Files()}); err != nil {
		t.Fatal(err)
	}
}

// copyTree copies the files under src into dst.
func copyTree(t *testing.T, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		if d.IsDir() {
			return os.MkdirAll(filepath.Join(dst, rel), 0o755)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(dst, rel), b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
}

// TestBadInputCLIExit runs a few rows of the catalogue as a user does, in
// a child process: stria must exit with status 1 and print one "stria:"
// message, no Go trace.
func TestBadInputCLIExit(t *testing.T) {
	if testing.Short() {
		t.Skip("runs child processes")
	}
	for _, name := range []string{"fit: a stray argument", "compare: a NaN response", "fit while another process writes the folder", "compare: another seed"} {
		t.Run(name, func(t *testing.T) {
			var row *badRow
			for i := range badRows {
				if badRows[i].name == name {
					row = &badRows[i]
				}
			}
			if row == nil {
				t.Fatalf("no row %q", name)
			}
			f := newFixture(t)
			args := row.setup(t, f)
			cmd := child(args...)
			var stdout, stderr strings.Builder
			cmd.Stdout, cmd.Stderr = &stdout, &stderr
			err := cmd.Run()
			if cmd.ProcessState == nil || cmd.ProcessState.ExitCode() != 1 {
				t.Fatalf("exit: %v, want status 1\n%s", err, stderr.String())
			}
			msg := stderr.String()
			if !strings.HasPrefix(msg, "stria: ") || strings.Contains(msg, "goroutine ") || strings.Contains(msg, "panic") {
				t.Errorf("stderr:\n%s", msg)
			}
			for _, w := range row.want {
				if !strings.Contains(msg, w) {
					t.Errorf("stderr does not mention %q:\n%s", w, msg)
				}
			}
		})
	}
}
