package train

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"testing"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/train/settings"
)

// stateRefFile is the part of testdata/state/state_ref.json (written by
// testdata/state/gen_state.py: numpy lstsq, scikit-learn Ridge and
// r2_score) that the wired path is checked against.
type stateRefFile struct {
	T, N, B, K int
	Names      []string
	Y          []float64
	Cond       []int
	Cov        []float64
	Train      []int
	Test       []int
	F          []float64
	Affine     struct{ Gain, Offset, Bias []float64 }
	Ridge      struct {
		Lambda             float64
		Gain, Offset, Bias []float64
	}
	Heldout struct {
		R2Stim  []float64 `json:"r2_stim"`
		R2State []float64 `json:"r2_state"`
	}
}

// TestStateReference: the state terms fitted through train (covariates
// from the recording, standardised on the fitting trials, tuning held
// fixed at the reference tuning f) equal numpy's lstsq (ridge 0) and
// scikit-learn's Ridge on unit-rms columns (ridge 0.05), and the held-out
// R^2 scikit-learn's r2_score (testdata/state/state_ref.json).
func TestStateReference(t *testing.T) {
	b, err := os.ReadFile("../testdata/state/state_ref.json")
	if err != nil {
		t.Fatal(err)
	}
	var r stateRefFile
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	y := data.NewMatrix(r.T, r.N)
	for i, v := range r.Y {
		y.Data[i] = float32(v)
	}
	stim := make([]float64, r.T)
	for i, c := range r.Cond {
		stim[i] = float64(c) * 360 / float64(r.B)
	}
	cols := make([][]float64, r.K)
	for k := range cols {
		cols[k] = make([]float64, r.T)
		for i := range cols[k] {
			cols[k][i] = r.Cov[i*r.K+k]
		}
	}
	for _, tc := range []struct {
		name               string
		ridge              float64
		gain, offset, bias []float64
		tol                float64
	}{
		{"lstsq", 0, r.Affine.Gain, r.Affine.Offset, r.Affine.Bias, 1e-9},
		{"ridge", r.Ridge.Lambda, r.Ridge.Gain, r.Ridge.Offset, r.Ridge.Bias, 1e-9},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rec := &data.Recording{Y: y, Stim: stim, CovariateNames: r.Names, Covariates: cols, Source: data.Source{Responses: "ref", Covariates: "ref"}}
			cfg := settings.Defaults()
			cfg.Data.Responses, cfg.Data.Covariates = "ref", "ref"
			cfg.Axis = settings.AxisConfig{Name: "direction", Min: 0, Max: 360, Periodic: true, Bins: r.B, Encoding: settings.OneHot}
			cfg.Split.KeepBlocks, cfg.Split.ZScore = false, false
			cfg.Model.Layers = []settings.LayerConfig{{Channels: 2, Kernel: 3, Stride: 1}}
			cfg.State.Tuning, cfg.State.Ridge = settings.StateFixed, tc.ridge
			if err := cfg.Validate(); err != nil {
				t.Fatal(err)
			}
			p, err := PrepareRecording(&cfg, rec)
			if err != nil {
				t.Fatal(err)
			}
			p.Train, p.Val, p.Test = r.Train, nil, r.Test
			sf, err := StateFitCurves(context.Background(), p, r.F, true)
			if err != nil {
				t.Fatal(err)
			}
			var worst float64
			for i := range tc.gain {
				worst = math.Max(worst, math.Abs(sf.Params.Gain[i]-tc.gain[i]))
				worst = math.Max(worst, math.Abs(sf.Params.Offset[i]-tc.offset[i]))
			}
			for j := range tc.bias {
				worst = math.Max(worst, math.Abs(sf.Params.Bias[j]-tc.bias[j]))
			}
			if worst > tc.tol {
				t.Errorf("got largest difference from the reference %.3g, want <= %g", worst, tc.tol)
			}
			if tc.ridge == 0 {
				for j := 0; j < r.N; j++ {
					if d := math.Abs(sf.Scores[j].R2Stim - r.Heldout.R2Stim[j]); d > 1e-9 {
						t.Errorf("neuron %d: got stimulus-only R^2 %g, want %g (r2_score)", j, sf.Scores[j].R2Stim, r.Heldout.R2Stim[j])
					}
					if d := math.Abs(sf.Scores[j].R2State - r.Heldout.R2State[j]); d > 1e-9 {
						t.Errorf("neuron %d: got R^2 with state %g, want %g (r2_score)", j, sf.Scores[j].R2State, r.Heldout.R2State[j])
					}
				}
			}
			t.Logf("%s: largest difference from the reference %.2g", tc.name, worst)
		})
	}
}
