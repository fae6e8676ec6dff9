package compare

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/train/runfolder/comparefolder"
	"github.com/strialab/stria/train/settings"
)

const fpConfig = `seed: 1
data: {responses: r.npy}
axis: {min: 0, max: 360, periodic: true, bin_width: 45}
split: {folds: 2, validation_fraction: 0.2, test_fraction: 0.2}
model: {readout_l2: 1, layers: [{channels: 2, kernel: 3}]}
train: {max_epochs: 3, patience: 3, checkpoint_every: 10}
compare: {baselines: [condmean, vonmises], starts: 2}
`

// TestUnitSettings checks what each unit's fingerprint depends on: an
// encoder on its model and training settings, a baseline not; the curve
// fit's starts only for the fits with random starts; the seed, split and
// axis for every unit; never where outputs go, the core count or the
// checkpoint interval.
func TestUnitSettings(t *testing.T) {
	settings := func(edit string) [][]byte {
		t.Helper()
		src := fpConfig
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
		return p.settings[0] // encoder, condmean, vonmises
	}
	base := settings("")
	for _, c := range []struct {
		edit    string
		changed [3]bool // encoder, condmean, vonmises
	}{
		{"readout_l2: 1=>readout_l2: 100", [3]bool{true, false, false}},
		{"max_epochs: 3=>max_epochs: 30", [3]bool{true, false, false}},
		{"starts: 2=>starts: 5", [3]bool{false, false, true}},
		{"seed: 1=>seed: 2", [3]bool{true, true, true}},
		{"folds: 2=>folds: 3", [3]bool{true, true, true}},
		{"bin_width: 45=>bin_width: 30", [3]bool{true, true, true}},
		{"checkpoint_every: 10=>checkpoint_every: 20", [3]bool{false, false, false}},
		{"validation_fraction: 0.2=>validation_fraction: 0.3", [3]bool{true, false, false}},
		{"test_fraction: 0.2=>test_fraction: 0.3", [3]bool{false, false, false}},
		{"compare: {=>output: elsewhere\ncompare: {", [3]bool{false, false, false}},
		{"train: {=>train: {threads: 1, ", [3]bool{false, false, false}},
		{"data: {responses: r.npy}=>data: {responses: moved/r.npy}", [3]bool{false, false, false}},
		{"baselines: [condmean, vonmises]=>baselines: [condmean, vonmises], encoders: [{name: encoder}]", [3]bool{false, false, false}},
	} {
		t.Run(c.edit, func(t *testing.T) {
			got := settings(c.edit)
			for i, name := range []string{"encoder", "condmean", "vonmises"} {
				if changed := string(got[i]) != string(base[i]); changed != c.changed[i] {
					t.Errorf("%s: fingerprint changed %v, want %v", name, changed, c.changed[i])
				}
			}
		})
	}
}

// TestChangedDataRefused rewrites the recording's file while a comparison
// runs: the units that finish afterwards are not written, and the error
// names the file.
func TestChangedDataRefused(t *testing.T) {
	dir := t.TempDir()
	resp, stim := filepath.Join(dir, "r.npy"), filepath.Join(dir, "s.npy")
	rec, _, _ := synth.Population(synth.Config{Neurons: 10, Trials: 160, Bins: 8, NoiseSD: 0.5, Seed: 4})
	if err := format.WriteNPY(resp, []int{rec.Y.Rows, rec.Y.Cols}, rec.Y.Data); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(stim, []int{len(rec.Stim)}, rec.Stim); err != nil {
		t.Fatal(err)
	}
	src := strings.Replace(fpConfig, "data: {responses: r.npy}", "data: {responses: r.npy, stimulus: s.npy}", 1)
	src = strings.Replace(src, "split: {folds: 2, validation_fraction: 0.2, test_fraction: 0.2}", "split: {folds: 2, keep_blocks: false}", 1)
	cfgPath := filepath.Join(dir, "c.yaml")
	os.WriteFile(cfgPath, []byte(src+"output: run\n"), 0o644)
	cfg, err := settings.LoadConfig(cfgPath)
	if err != nil {
		t.Fatal(err)
	}
	cfg.Compare.Output = filepath.Join(dir, "cmp")
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	p, err := NewPlan(cfg)
	if err != nil {
		t.Fatal(err)
	}
	first := true
	err = p.RunUnits(context.Background(), p.Units, 1, func(u Unit, skipped bool) {
		if first {
			first = false
			later := time.Now().Add(time.Minute)
			os.Chtimes(resp, later, later)
		}
	})
	if !errors.Is(err, format.ErrChanged) || !strings.Contains(err.Error(), resp) {
		t.Fatalf("got %v, want an error naming %s that wraps format.ErrChanged", err, resp)
	}
	n := 0
	for _, u := range p.Units {
		if comparefolder.HasFoldResult(p.Dir(), u.ID) {
			n++
		}
	}
	if n != 1 {
		t.Errorf("%d units written, want only the one finished before the change", n)
	}
}
