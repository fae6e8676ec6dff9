package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
	"github.com/strialab/stria/train/settings"
)

// TestFitOverwrite: --overwrite empties the folder of an earlier run
// before the fit writes (no conv1 of a 2-layer run beside a 1-layer run,
// no old figures or report); a stale lock of an ended process is taken
// over with a note; temporary files of a killed write are removed; the
// lock is gone afterwards.
func TestFitOverwrite(t *testing.T) {
	f := newFixture(t)
	f.edit(t, "layers: [{channels: 2, kernel: 3}]", "layers: [{channels: 2, kernel: 3}, {channels: 2, kernel: 3}]")
	f.run(t, fitArgs(f)...)
	conv1 := filepath.Join(f.out, runfolder.DirParameters, "conv1_weight.npy")
	if _, err := os.Stat(conv1); err != nil {
		t.Fatalf("the 2-layer run has no conv1: %v", err)
	}
	os.MkdirAll(filepath.Join(f.out, runfolder.DirFigures), 0o755)
	old := []string{filepath.Join(f.out, runfolder.DirFigures, "filters.svg"), filepath.Join(f.out, runfolder.FileReport), filepath.Join(f.out, ".resume_state.gob.tmp123")}
	for _, p := range old {
		os.WriteFile(p, []byte("old"), 0o644)
	}
	cmd := exec.Command("true")
	if err := cmd.Run(); err != nil {
		t.Skip(err)
	}
	host, _ := os.Hostname()
	writeLockFile(t, f.out, runfolder.LockInfo{PID: cmd.Process.Pid, Host: host, Started: "2026-12-03T10:00:00Z", Command: "stria fit (killed)"})

	f.config(t, 1, 1) // one layer
	out, err := runCLI(t, fitArgs(f, "--overwrite")...)
	if err != nil {
		t.Fatalf("fit --overwrite: %v\n%s", err, out)
	}
	if !strings.Contains(out, "took over the lock") || !strings.Contains(out, "pid "+strconv.Itoa(cmd.Process.Pid)) {
		t.Errorf("no note about the stale lock in:\n%s", out)
	}
	for _, p := range append(old, conv1, filepath.Join(f.out, runfolder.FileLock)) {
		if _, err := os.Stat(p); err == nil {
			t.Errorf("%s left after fit --overwrite", p)
		}
	}
	if _, err := runfolder.Open(f.out); err != nil {
		t.Errorf("the new run: %v", err)
	}
}

// TestStaleTempsRemovedOnResume: a resumed fit removes the temporary
// files a killed checkpoint write left.
func TestStaleTempsRemovedOnResume(t *testing.T) {
	f := newFixture(t)
	fakeCheckpoint(t, f)
	tmp := filepath.Join(f.out, ".resume_state.gob.tmp99")
	os.WriteFile(tmp, []byte("half"), 0o644)
	// The fake checkpoint has no training state: the resumed fit may
	// fail, but only after the folder was cleaned.
	runCLI(t, fitArgs(f, "--resume")...)
	if _, err := os.Stat(tmp); err == nil {
		t.Error("stale temporary file left after --resume")
	}
}

// TestCompareReusesMatchingUnits: a comparison run again with the same
// settings and data reuses its finished units; with --overwrite it starts
// afresh after a change.
func TestCompareReusesMatchingUnits(t *testing.T) {
	f := newFixture(t)
	f.run(t, compareArgs(f)...)
	first, _ := os.ReadFile(filepath.Join(f.cmp, comparefolder.FileFoldScores))
	out, err := runCLI(t, "compare", "--config", f.cfg)
	if err != nil || !strings.Contains(out, "already done") {
		t.Fatalf("second run: %v\n%s", err, out)
	}
	again, _ := os.ReadFile(filepath.Join(f.cmp, comparefolder.FileFoldScores))
	if string(first) != string(again) {
		t.Error("reusing the units changed the scores")
	}
	f.config(t, 2, 1)
	if out, err := runCLI(t, compareArgs(f, "--overwrite")...); err != nil {
		t.Fatalf("compare --overwrite after a change: %v\n%s", err, out)
	}
	if _, err := runfolder.Open(f.cmp); err != nil {
		t.Error(err)
	}
}

// TestPredictCSV: --out FILE.csv writes CSV with the neuron names, not
// .npy bytes under a .csv name.
func TestPredictCSV(t *testing.T) {
	f := newFixture(t)
	f.run(t, fitArgs(f)...)
	pred := filepath.Join(f.dir, "pred.csv")
	f.run(t, "predict", "--stimulus", f.stim, "--out", pred, f.out)
	fh, err := os.Open(pred)
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	rows, err := csv.NewReader(fh).ReadAll()
	if err != nil {
		t.Fatalf("pred.csv is not CSV: %v", err)
	}
	if len(rows) != 241 || len(rows[0]) != 25 || rows[0][0] != "stimulus" || rows[0][1] == "" {
		t.Fatalf("pred.csv: %d rows, header %v; want header + 240 rows of stimulus and 24 neurons", len(rows), rows[0])
	}
	if rows[1][0] != "0" || rows[2][0] != "45" {
		t.Errorf("stimulus column starts %q, %q; want 0, 45", rows[1][0], rows[2][0])
	}
	for _, v := range rows[1][1:] {
		if _, err := strconv.ParseFloat(v, 64); err != nil {
			t.Errorf("prediction %q is not a number", v)
		}
	}
}

// TestFitRefusesChangedData: a data file rewritten while the fit runs
// (here between training and scoring) is refused, naming it, and the run
// folder is left without complete.json.
func TestFitRefusesChangedData(t *testing.T) {
	f := newFixture(t)
	cfg, err := settings.LoadConfig(f.cfg)
	if err != nil {
		t.Fatal(err)
	}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	_, err = runFit(context.Background(), cfg, fitOptions{quiet: true, stdout: &out, stderr: &out, afterFit: func() { f.shuffleTrials(t) }})
	if !errors.Is(err, format.ErrChanged) || !strings.Contains(err.Error(), f.resp) {
		t.Fatalf("got %v, want an error naming %s that wraps format.ErrChanged", err, f.resp)
	}
	if _, err := os.Stat(filepath.Join(f.out, runfolder.FileComplete)); err == nil {
		t.Error("complete.json written for a fit on changed data")
	}
	if _, err := os.Stat(filepath.Join(f.out, runfolder.FileLock)); err == nil {
		t.Error("the lock was not released")
	}
}

// TestTwoFitsOneFolder starts two fits into one folder at once: exactly
// one may write it; the other refuses (naming the first while it runs,
// or the run it left), and the folder holds one complete run.
func TestTwoFitsOneFolder(t *testing.T) {
	if testing.Short() {
		t.Skip("runs child processes")
	}
	f := newFixture(t)
	f.edit(t, "max_epochs: 4, patience: 4", "max_epochs: 300, patience: 300")
	var cmds [2]*exec.Cmd
	var errs [2]strings.Builder
	for i := range cmds {
		cmds[i] = child(fitArgs(f)...)
		cmds[i].Stderr = &errs[i]
		if err := cmds[i].Start(); err != nil {
			t.Fatal(err)
		}
	}
	ok := 0
	for i, c := range cmds {
		if err := c.Wait(); err == nil {
			ok++
		} else if t.Logf("fit %d refused: %s", i+1, strings.TrimSpace(errs[i].String())); false {
		} else if msg := errs[i].String(); !strings.Contains(msg, "another stria process") && !strings.Contains(msg, "holds a run folder") {
			t.Errorf("fit %d failed with:\n%s", i+1, msg)
		}
	}
	if ok != 1 {
		t.Fatalf("%d fits succeeded, want exactly 1\n%s\n%s", ok, errs[0].String(), errs[1].String())
	}
	if _, err := runfolder.Open(f.out); err != nil {
		t.Error(err)
	}
	if _, err := os.Stat(filepath.Join(f.out, runfolder.FileLock)); err == nil {
		t.Error("lock left behind")
	}
}

// TestGatherRemovesStaleTemps: once every unit is done, gather removes
// the temporary files that killed writes of units left.
func TestGatherRemovesStaleTemps(t *testing.T) {
	f := newFixture(t)
	f.run(t, compareArgs(f, "--array-task", "1", "--array-task-count", "1")...)
	tmp := filepath.Join(f.cmp, runfolder.DirFoldResults, "encoder", ".fold1.gob.tmp777")
	if err := os.WriteFile(tmp, []byte("half"), 0o644); err != nil {
		t.Fatal(err)
	}
	f.run(t, "gather", f.cmp)
	if _, err := os.Stat(tmp); err == nil {
		t.Error("gather left a stale temporary file")
	}
}

// TestExportWaitsForWriter: export and report refuse a folder another
// stria process holds the lock of (a fit still writing it), and take the
// lock themselves.
func TestExportWaitsForWriter(t *testing.T) {
	f := newFixture(t)
	f.run(t, fitArgs(f)...)
	sleeper := exec.Command("sleep", "30")
	if err := sleeper.Start(); err != nil {
		t.Skip(err)
	}
	defer func() { sleeper.Process.Kill(); sleeper.Wait() }()
	host, _ := os.Hostname()
	writeLockFile(t, f.out, runfolder.LockInfo{PID: sleeper.Process.Pid, Host: host, Started: "2026-12-03T10:00:00Z", Command: "stria fit (running)"})
	for _, cmd := range []string{"export", "report"} {
		out, err := runCLI(t, cmd, f.out)
		if err == nil || !strings.Contains(err.Error(), runfolder.ErrLocked.Error()) {
			t.Errorf("stria %s of a locked folder: got %v\n%s\nwant %q", cmd, err, out, runfolder.ErrLocked)
		}
	}
	if _, err := os.Stat(filepath.Join(f.out, runfolder.DirFigures)); err == nil {
		t.Error("export wrote figures into a locked folder")
	}
	os.Remove(filepath.Join(f.out, runfolder.FileLock))
	if out, err := runCLI(t, "export", f.out); err != nil {
		t.Errorf("stria export: %v\n%s", err, out)
	}
	if _, err := os.Stat(filepath.Join(f.out, runfolder.FileLock)); err == nil {
		t.Error("export left its lock behind")
	}
}
