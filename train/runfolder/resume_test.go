package runfolder

import (
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/strialab/stria/train"
)

// TestResumeStateRoundTrip writes a resume state and reads it back whole,
// and refuses a truncated file and one of another format.
func TestResumeStateRoundTrip(t *testing.T) {
	dir := t.TempDir()
	c := &train.Checkpoint{Epoch: 7, Params: []float64{1, -2.5, 3e-300}, M: []float64{0.1, 0.2, 0.3}, V: []float64{4, 5, 6},
		T: 7, Best: []float64{1, 2, 3}, BestVal: 0.25, BestEpoch: 5, Since: 2, RNG: []byte{1, 2, 3},
		Log: []train.EpochLog{{Epoch: 1, TrainLoss: 1, ValLoss: 2, ValR2: 0.5, Seconds: 0.1}}, Config: []byte("seed: 1\n")}
	if err := SaveResumeState(dir, c); err != nil {
		t.Fatal(err)
	}
	back, err := LoadResumeState(dir)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(back, c) {
		t.Errorf("read back %+v, wrote %+v", back, c)
	}
	path := filepath.Join(dir, FileResume)
	b, _ := os.ReadFile(path)
	os.WriteFile(path, b[:len(b)-5], 0o644)
	if _, err := LoadResumeState(dir); err == nil || !strings.Contains(err.Error(), "truncated") {
		t.Errorf("truncated file: got %v", err)
	}
	os.WriteFile(path, []byte("garbage"), 0o644)
	if _, err := LoadResumeState(dir); err == nil || !strings.Contains(err.Error(), "not a stria resume state") {
		t.Errorf("other file: got %v", err)
	}
}
