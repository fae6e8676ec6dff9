package train

import (
	"context"
	"errors"
	"github.com/strialab/stria/train/settings"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/nn"
)

// TestPoissonRefusesNonCounts: with loss: poisson, a negative or
// fractional response is refused, naming the trial and the neuron (a
// count loss on such values trains and scores without meaning).
func TestPoissonRefusesNonCounts(t *testing.T) {
	for _, c := range []struct {
		name string
		v    float32
		want string
	}{
		{"fraction", 2.5, "trial 7, neuron 3"},
		{"negative", -1, "trial 7, neuron 3"},
	} {
		t.Run(c.name, func(t *testing.T) {
			rec, _, _ := synth.Population(synth.Config{Neurons: 6, Trials: 120, Bins: 12, NoiseSD: 0.5, Seed: 3})
			for i, v := range rec.Y.Data {
				rec.Y.Data[i] = float32(int(v*v*4 + 0.5)) // whole numbers >= 0
			}
			rec.Y.Data[7*6+3] = c.v
			cfg := settings.Defaults()
			cfg.Data.Responses = "synthetic"
			cfg.Axis = settings.AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 30, Encoding: settings.OneHot}
			cfg.Model.Loss, cfg.Model.Output, cfg.Split.ZScore = settings.Poisson, nn.Softplus, false
			if err := cfg.Validate(); err != nil {
				t.Fatal(err)
			}
			_, err := PrepareRecording(&cfg, rec)
			if err == nil || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "not counts") {
				t.Errorf("got %v, want a refusal naming %q", err, c.want)
			}
			// The same values with mse are accepted.
			rec.Y.Data[7*6+3] = c.v
			cfg.Model.Loss, cfg.Model.Output = settings.MSE, nn.Identity
			if _, err := PrepareRecording(&cfg, rec); err != nil {
				t.Errorf("mse: %v", err)
			}
		})
	}
}

// TestFitTruncatedMapping truncates a mapped recording (above the 64 MB
// mapping threshold of format.ReadNPY) after it was prepared: the fit, the
// scoring and the final check each give an error naming the file (wrapping
// format.ErrChanged) instead of a crash with a goroutine dump.
func TestFitTruncatedMapping(t *testing.T) {
	if testing.Short() {
		t.Skip("writes a 68 MB file")
	}
	dir := t.TempDir()
	resp, stim := filepath.Join(dir, "resp.npy"), filepath.Join(dir, "stim.npy")
	rows, cols := 2176, 8192 // 68 MiB of float32
	v := make([]float32, rows*cols)
	s := make([]float64, rows)
	for t := range rows {
		s[t] = float64(t%8) * 45
		for j := range cols {
			v[t*cols+j] = float32((t*7 + j*3) % 11)
		}
	}
	if err := format.WriteNPY(resp, []int{rows, cols}, v); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(stim, []int{rows}, s); err != nil {
		t.Fatal(err)
	}
	v = nil
	cfg := settings.Defaults()
	cfg.Data.Responses, cfg.Data.Stimulus = resp, stim
	cfg.Axis = settings.AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 8, Encoding: settings.OneHot}
	cfg.Split.KeepBlocks = false
	cfg.Model.Layers = []settings.LayerConfig{{Channels: 2, Kernel: 3, Stride: 1, Border: settings.BorderCircular}}
	// Mini-batches of trials: the fit reads the responses (full-batch
	// fits work on condition sums made in Prepare).
	cfg.Train.MaxEpochs, cfg.Train.Patience, cfg.Train.BatchSize, cfg.Train.Solver = 1, 1, 256, settings.SolverAdam
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := Prepare(&cfg)
	if err != nil {
		t.Fatal(err)
	}
	if p.Rec.Y.MappedFile() != resp {
		t.Fatal("the 68 MB recording was not mapped")
	}
	if f := p.Rec.Files(); len(f) != 2 || f[0].Hash == "" || f[1].Hash == "" {
		t.Errorf("Prepare left the files without content hashes: %+v", f)
	}
	if err := os.Truncate(resp, 1<<20); err != nil {
		t.Fatal(err)
	}
	wantChanged := func(what string, err error) {
		t.Helper()
		if !errors.Is(err, format.ErrChanged) || !strings.Contains(err.Error(), resp) {
			t.Errorf("%s: got %v, want an error naming %s that wraps format.ErrChanged", what, err, resp)
		}
	}
	_, err = Fit(context.Background(), p, Hooks{}, nil)
	wantChanged("Fit", err)
	// Scoring in eval's worker goroutines, under the caller's guard.
	curves := make([]float64, p.NBins*cols)
	scores := make([]eval.Scores, cols)
	wantChanged("scoring", format.Guard(func() {
		eval.ScoreConditions(scores, p.Rec.Y.Data, cols, p.Test, p.Cond, curves, p.NBins)
	}))
	wantChanged("Unchanged", p.Rec.Unchanged())
}
