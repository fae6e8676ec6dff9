package train

import (
	"context"
	"errors"
	"math"
	"os"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/train/settings"
)

// withSpill makes every fit of the test keep its best copy in a file.
func withSpill(t *testing.T) {
	t.Helper()
	old := spillParams
	spillParams = 1
	t.Cleanup(func() { spillParams = old })
}

// dirNames lists the names in dir.
func dirNames(t *testing.T, dir string) []string {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	return names
}

// sameLog reports whether two training logs agree in everything but the
// wall time.
func sameLog(a, b []EpochLog) bool {
	return slices.EqualFunc(a, b, func(x, y EpochLog) bool {
		x.Seconds, y.Seconds = 0, 0
		return x == y
	})
}

// bestEdits are adam fits whose validation loss turns up before the last
// epoch (a large learning rate), so that the fit ends on a best copy
// rather than on the last parameters.
var bestEdits = []struct {
	name string
	edit func(*settings.Config)
}{
	{"full batch", func(c *settings.Config) {}},
	{"mini-batch", func(c *settings.Config) { c.Train.BatchSize = 64 }},
	{"soft", func(c *settings.Config) { c.Axis.Encoding = settings.Soft }},
}

func bestEdit(edit func(*settings.Config)) func(*settings.Config) {
	return func(c *settings.Config) {
		c.Train.MaxEpochs = 30
		c.Train.Patience = 1000
		c.Train.CheckpointEvery = 7
		c.Train.LearningRate = 0.05
		c.Axis.BinWidth = 12
		c.Train.Solver = settings.SolverAdam
		edit(c)
	}
}

// TestSpilledBestIdentical checks that a fit keeping its best copy in a
// file gives bit for bit the parameters and log of the same fit keeping it
// in memory (the reference: the in-memory path), that the file exists in
// the folder during the fit under a name runfolder.RemoveStaleTemps clears
// (".NAME.tmp*"), and that it is gone afterwards.
func TestSpilledBestIdentical(t *testing.T) {
	for _, tc := range bestEdits {
		t.Run(tc.name, func(t *testing.T) {
			edit := bestEdit(tc.edit)
			p, _ := synthPrepared(t, 30, 400, edit)
			mem, err := Fit(context.Background(), p, Hooks{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if mem.BestEpoch >= len(mem.Log) {
				t.Fatalf("best epoch %d of %d: the test needs a fit that ends past its best", mem.BestEpoch, len(mem.Log))
			}

			withSpill(t)
			dir := t.TempDir()
			var seen []string
			hooks := Hooks{TempDir: dir, OnEpoch: func(EpochLog) { seen = dirNames(t, dir) }}
			p, _ = synthPrepared(t, 30, 400, edit)
			spill, err := Fit(context.Background(), p, hooks, nil)
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(mem.Net.Params, spill.Net.Params) {
				t.Error("parameters with the best copy in a file differ from those with it in memory")
			}
			if !sameLog(mem.Log, spill.Log) || mem.BestEpoch != spill.BestEpoch || mem.Stop != spill.Stop {
				t.Errorf("log, best epoch or stop differ: got %d %q, want %d %q", spill.BestEpoch, spill.Stop, mem.BestEpoch, mem.Stop)
			}
			if len(seen) != 1 || !strings.HasPrefix(seen[0], ".") || !strings.Contains(seen[0], ".tmp") {
				t.Errorf("during the fit the folder held %q, want one hidden .tmp file", seen)
			}
			if left := dirNames(t, dir); len(left) > 0 {
				t.Errorf("after the fit the folder holds %q, want nothing", left)
			}
		})
	}
}

// TestSpilledBestResume interrupts a fit that keeps its best copy in a
// file, resumes it from its checkpoint (whose best copy is read back from
// the file) and expects the parameters of an uninterrupted in-memory fit;
// no temporary file may be left after the interruption or the end.
func TestSpilledBestResume(t *testing.T) {
	for _, tc := range bestEdits {
		t.Run(tc.name, func(t *testing.T) {
			edit := bestEdit(tc.edit)
			p, _ := synthPrepared(t, 30, 400, edit)
			whole, err := Fit(context.Background(), p, Hooks{}, nil)
			if err != nil {
				t.Fatal(err)
			}

			withSpill(t)
			dir := t.TempDir()
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			// Interrupt at the first epoch that does not improve, so that
			// the checkpoint's best copy is not the current parameters.
			var saved *Checkpoint
			low := math.Inf(1)
			hooks := Hooks{
				TempDir: dir,
				OnEpoch: func(e EpochLog) {
					if e.ValLoss >= low {
						cancel()
					}
					low = min(low, e.ValLoss)
				},
				Checkpoint: func(c *Checkpoint) error { saved = c; return nil },
			}
			p, _ = synthPrepared(t, 30, 400, edit)
			if _, err := Fit(ctx, p, hooks, nil); !errors.Is(err, ErrInterrupted) {
				t.Fatalf("interrupted fit returned %v", err)
			}
			if left := dirNames(t, dir); len(left) > 0 {
				t.Errorf("after the interruption the folder holds %q, want nothing", left)
			}
			if saved == nil || saved.Best == nil || saved.BestEpoch >= saved.Epoch || slices.Equal(saved.Best, saved.Params) {
				t.Fatal("the test needs a checkpoint whose best epoch is before its last")
			}
			cdir := t.TempDir()
			if err := SaveCheckpoint(cdir, saved); err != nil {
				t.Fatal(err)
			}
			back, err := LoadCheckpoint(cdir)
			if err != nil {
				t.Fatal(err)
			}
			p, _ = synthPrepared(t, 30, 400, edit)
			resumed, err := Fit(context.Background(), p, Hooks{TempDir: dir}, back)
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(whole.Net.Params, resumed.Net.Params) {
				t.Error("resumed parameters differ from the uninterrupted in-memory fit")
			}
			if !sameLog(whole.Log, resumed.Log) {
				t.Error("resumed log differs from the uninterrupted in-memory fit")
			}
			if left := dirNames(t, dir); len(left) > 0 {
				t.Errorf("after the resumed fit the folder holds %q, want nothing", left)
			}
		})
	}
}

// TestSpilledBestRemovedOnError fails a fit in its checkpoint hook, after
// the best copy has been written, and expects no temporary file left.
func TestSpilledBestRemovedOnError(t *testing.T) {
	withSpill(t)
	dir := t.TempDir()
	boom := errors.New("disk full (test)")
	wrote := false
	hooks := Hooks{
		TempDir: dir,
		Checkpoint: func(*Checkpoint) error {
			wrote = len(dirNames(t, dir)) == 1
			return boom
		},
	}
	p, _ := synthPrepared(t, 30, 400, bestEdit(func(*settings.Config) {}))
	if _, err := Fit(context.Background(), p, hooks, nil); !errors.Is(err, boom) {
		t.Fatalf("got %v, want the hook's error", err)
	}
	if !wrote {
		t.Error("the best copy was not in the folder when the hook ran")
	}
	if left := dirNames(t, dir); len(left) > 0 {
		t.Errorf("after the error the folder holds %q, want nothing", left)
	}
}

// TestSmallFitKeepsBestInMemory: below spillParams no file is made, even
// with a folder given.
func TestSmallFitKeepsBestInMemory(t *testing.T) {
	dir := t.TempDir()
	var seen []string
	hooks := Hooks{TempDir: dir, OnEpoch: func(EpochLog) { seen = append(seen, dirNames(t, dir)...) }}
	p, _ := synthPrepared(t, 30, 400, bestEdit(func(*settings.Config) {}))
	if _, err := Fit(context.Background(), p, hooks, nil); err != nil {
		t.Fatal(err)
	}
	if len(seen) > 0 {
		t.Errorf("a small fit wrote %q", seen)
	}
}
