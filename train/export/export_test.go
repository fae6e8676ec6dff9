package export

import (
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/train/runfolder"
)

func TestSelectNeurons(t *testing.T) {
	nan := math.NaN()
	// Ranking by score, highest first: 2 (0.9), 4 (0.7), 0 (0.5), 3 (0.1);
	// neuron 1 is NaN and never ranked. Expected lists worked by hand.
	score := []float64{0.5, nan, 0.9, 0.1, 0.7}
	for _, c := range []struct {
		sel  string
		want []int
	}{
		{"best 2", []int{2, 4}},
		{"best", []int{2}},
		{"worst 1", []int{3}},
		{"worst 2", []int{3, 0}},
		{"best 2,worst 1,0", []int{2, 4, 3, 0}},
		{" 1 , 1,best 1", []int{1, 2}}, // an index may name a NaN neuron; repeats dropped
		{"best 10", []int{2, 4, 0, 3}}, // capped at the ranked neurons
	} {
		got, err := SelectNeurons(c.sel, score, 1)
		if err != nil || !slices.Equal(got, c.want) {
			t.Errorf("SelectNeurons(%q) = %v, %v; want %v", c.sel, got, err, c.want)
		}
	}
	for _, c := range []struct{ sel, msg string }{
		{"5", "neuron 5 out of range (5 neurons, numbered from 0)"},
		{"-1", "out of range"},
		{"best x", "positive whole number"},
		{"best 0", "positive whole number"},
		{"top 2", "want an index"},
		{"best 1 2", "want an index"},
		{" , ", "chose no neuron"},
	} {
		if _, err := SelectNeurons(c.sel, score, 1); err == nil || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("SelectNeurons(%q): error %v, want one containing %q", c.sel, err, c.msg)
		}
	}
	// random: distinct ranked neurons, the same for the same seed.
	a, err := SelectNeurons("random 3", score, 7)
	if err != nil || len(a) != 3 {
		t.Fatalf("random 3: %v %v", a, err)
	}
	for _, j := range a {
		if j == 1 {
			t.Errorf("random chose the NaN neuron: %v", a)
		}
	}
	b, _ := SelectNeurons("random 3", score, 7)
	if !slices.Equal(a, b) {
		t.Errorf("random 3 with the same seed: %v then %v", a, b)
	}
}

func TestFolderRefused(t *testing.T) {
	dir := t.TempDir()
	if _, err := Folder(dir, Options{}); err == nil || !strings.Contains(err.Error(), "neither a run folder") {
		t.Errorf("export of an empty folder: %v", err)
	}
	if _, err := os.Stat(filepath.Join(dir, runfolder.DirFigures)); err == nil {
		t.Error("a refused export left a figures folder")
	}
	// A run folder whose fit did not finish.
	os.WriteFile(filepath.Join(dir, runfolder.FileManifest), []byte("{}"), 0o644)
	const want = "is incomplete: the fit that wrote it did not finish (no complete.json)"
	if _, err := Folder(dir, Options{}); err == nil || !strings.Contains(err.Error(), want) {
		t.Errorf("export of an unfinished run: %v, want %q", err, want)
	}
	if _, err := WriteReport(dir, "", Options{}); err == nil || !strings.Contains(err.Error(), want) {
		t.Errorf("report of an unfinished run: %v, want %q", err, want)
	}
	if _, err := os.Stat(filepath.Join(dir, runfolder.DirFigures)); err == nil {
		t.Error("a refused export left a figures folder")
	}
	if _, err := os.Stat(filepath.Join(dir, runfolder.FileReport)); err == nil {
		t.Error("a refused report left a report")
	}
}
