package runfolder

import (
	"context"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/eval/state"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder/foldertest"
	"github.com/strialab/stria/train/settings"
)

// TestStateRoundTrip writes the state terms of a small fit (a covariate and
// the population gain) into a run folder: the folder passes the folder
// checks (modes, no temporary files), model.json lists the state arrays,
// the table parses, and the folder read back and written again is the same
// byte for byte.
func TestStateRoundTrip(t *testing.T) {
	cfg := state.DefaultSim()
	cfg.Neurons, cfg.Repeats, cfg.Seed = 12, 12, 3
	sim := state.Simulate(cfg)
	T, N, B := len(sim.Cond), cfg.Neurons, cfg.Conditions
	y := data.NewMatrix(T, N)
	copy(y.Data, sim.Y)
	stim := make([]float64, T)
	for i, c := range sim.Cond {
		stim[i] = float64(c) * 360 / float64(B)
	}
	rec := &data.Recording{Y: y, Stim: stim, CovariateNames: []string{"speed"}, Covariates: [][]float64{sim.Speed},
		Source: data.Source{Responses: "synthetic", Covariates: "speed.npy"}}
	c := settings.Defaults()
	c.Data.Responses, c.Data.Covariates = "synthetic", "speed.npy"
	c.Axis = settings.AxisConfig{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: B, Encoding: settings.OneHot}
	c.Split.KeepBlocks = false
	c.Model.Layers = []settings.LayerConfig{{Channels: 2, Kernel: 3, Stride: 1}}
	c.Train.MaxEpochs, c.Train.Patience = 4, 4
	c.State.PopulationGain = true
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := train.PrepareRecording(&c, rec)
	if err != nil {
		t.Fatal(err)
	}
	f, err := train.Fit(context.Background(), p, train.Hooks{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	sf, err := train.FitState(context.Background(), p, f)
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	if err := Begin(dir); err != nil {
		t.Fatal(err)
	}
	if err := WriteModel(dir, p, f); err != nil {
		t.Fatal(err)
	}
	sum, err := WriteResults(dir, p, f, train.ScoreFitted(p, f), time.Second)
	if err != nil {
		t.Fatal(err)
	}
	if sum.State, err = WriteState(dir, p, sf); err != nil {
		t.Fatal(err)
	}
	if err := WriteJSON(filepath.Join(dir, FileSummary), sum); err != nil {
		t.Fatal(err)
	}
	if err := Finish(dir, FormatRun); err != nil {
		t.Fatal(err)
	}
	foldertest.CheckFolder(t, dir, FileMode, FolderMode)
	rows := foldertest.ReadAllCSV(t, filepath.Join(dir, FileStateTerms))
	if len(rows) != N+1 || !strings.HasPrefix(strings.Join(rows[0], ","), "neuron,name,status,gain_speed,offset_speed,bias,") {
		t.Errorf("state_terms.csv: %d rows, header %v", len(rows), rows[0])
	}
	mf, err := ReadManifest(dir)
	if err != nil {
		t.Fatal(err)
	}
	for _, a := range []string{ArrayStateGains, ArrayStateOffsets, ArrayStateBias, ArrayStateTuning, ArrayStateLow, ArrayStateHigh, ArrayPopulationCoupled, ArrayPopulationTerms} {
		if _, ok := mf.Arrays[a]; !ok {
			t.Errorf("model.json does not list %s", a)
		}
	}
	rs, err := ReadSummary(dir)
	if err != nil {
		t.Fatal(err)
	}
	if rs.State == nil || rs.State.Caution != StateCaution || len(rs.State.Covariates) != 1 || rs.State.Population == nil {
		t.Errorf("summary.json state block: %+v", rs.State)
	}
	r, err := ReadRun(dir)
	if err != nil {
		t.Fatal(err)
	}
	copyDir := filepath.Join(t.TempDir(), "copy")
	if err := WriteRun(copyDir, r); err != nil {
		t.Fatal(err)
	}
	if err := Finish(copyDir, FormatRun); err != nil {
		t.Fatal(err)
	}
	foldertest.SameFolders(t, dir, copyDir, FileComplete)
}
