package compare

import (
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train/settings"
)

const stateConfig = `seed: 1
data: {responses: r.npy, covariates: speed.npy, covariate_columns: [speed]}
axis: {min: 0, max: 360, periodic: true, bin_width: 45}
split: {folds: 2, validation_fraction: 0.2, test_fraction: 0.2}
model: {readout_l2: 1, layers: [{channels: 2, kernel: 3}]}
train: {max_epochs: 3, patience: 3, checkpoint_every: 10}
compare: {baselines: [condmean, vonmises], starts: 2}
state: {ridge: 0.001, population_gain: true, compare_models: [encoder, condmean]}
`

// TestStateVariants: state.compare_models adds a +state and a +popgain
// variant of each named model after the others; a changed state setting
// changes the fingerprints of the variants and of nothing else, so a state
// variant is never reused across state settings and the other models are
// not recomputed.
func TestStateVariants(t *testing.T) {
	names := []string{"encoder", "condmean", "vonmises", "encoder+state", "encoder+popgain", "condmean+state", "condmean+popgain"}
	plan := func(edit string) *Plan {
		t.Helper()
		src := stateConfig
		if edit != "" {
			old, new, _ := strings.Cut(edit, "=>")
			if !strings.Contains(src, old) {
				t.Fatalf("config lacks %q", old)
			}
			src = strings.Replace(src, old, new, 1)
		}
		cfg, err := settings.ParseConfig([]byte(src), "c.yaml")
		if err != nil {
			t.Fatal(err)
		}
		p, err := NewPlan(cfg)
		if err != nil {
			t.Fatal(err)
		}
		return p
	}
	base := plan("")
	specs := base.Recordings[0].Specs
	var got []string
	for _, s := range specs {
		got = append(got, s.Name)
	}
	if strings.Join(got, ",") != strings.Join(names, ",") {
		t.Fatalf("got models %v, want %v", got, names)
	}
	for _, c := range []struct {
		edit    string
		changed [7]bool
	}{
		{"ridge: 0.001=>ridge: 0.01", [7]bool{false, false, false, true, true, true, true}},
		{"population_gain: true=>population_gain: true, population_offset: true", [7]bool{false, false, false, true, true, true, true}},
		{"covariate_columns: [speed]=>covariate_columns: [running]", [7]bool{false, false, false, true, true, true, true}},
		{"covariates: speed.npy=>covariates: moved/speed.npy", [7]bool{false, false, false, false, false, false, false}},
		{"readout_l2: 1=>readout_l2: 100", [7]bool{true, false, false, true, true, false, false}},
		{"seed: 1=>seed: 2", [7]bool{true, true, true, true, true, true, true}},
	} {
		t.Run(c.edit, func(t *testing.T) {
			got := plan(c.edit).settings[0]
			for i, name := range names {
				if changed := string(got[i]) != string(base.settings[0][i]); changed != c.changed[i] {
					t.Errorf("%s: fingerprint changed %v, want %v", name, changed, c.changed[i])
				}
			}
		})
	}
	// Two variants of one model differ from each other and from the model.
	s := base.settings[0]
	if string(s[3]) == string(s[4]) || string(s[3]) == string(s[0]) || string(s[5]) == string(s[1]) {
		t.Errorf("variants share a fingerprint with each other or their model")
	}
	// The covariate file is part of the variants' fingerprints only.
	files := []format.FileID{{Path: "r.npy", Hash: "a"}, {Path: "speed.npy", Hash: "b"}}
	for i, name := range names {
		fp := base.fingerprint(Unit{Rec: 0, Spec: i}, files)
		if has := len(fp.Files) == 2; has != strings.Contains(name, "+") {
			t.Errorf("%s: fingerprint files %v", name, fp.Files)
		}
	}
	cfg, _ := settings.ParseConfig([]byte(strings.Replace(stateConfig, "compare_models: [encoder, condmean]", "compare_models: [encoder, nomodel]", 1)), "c.yaml")
	if _, err := NewPlan(cfg); err == nil || !strings.Contains(err.Error(), `state.compare_models[1]: no model "nomodel"`) {
		t.Errorf("got error %v, want one naming the unknown model", err)
	}
}
