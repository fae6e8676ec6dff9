package train

import (
	"github.com/strialab/stria/train/settings"
	"math"
	"strings"
	"testing"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/synth"
)

// TestConditionValues checks where conditions are placed and when stria
// warns that they are off the bin centres: a continuous uniform stimulus
// (the demo) and discrete values on the centres get no warning; 24
// directions 15 deg apart in 12 bins of 30 deg (two values per bin, every
// bin's trials 7.5 deg below its centre; StimulusLevels does not call 24
// values in 12 bins discrete, so the axis is not centred) get one, and
// the values are the bins' mean directions.
func TestConditionValues(t *testing.T) {
	prep := func(rec *data.Recording, width float64) *Prepared {
		cfg := settings.Defaults()
		cfg.Data.Responses = "synthetic"
		cfg.Axis = settings.AxisConfig{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: width, Encoding: settings.OneHot}
		cfg.Split.KeepBlocks = false
		if err := cfg.Validate(); err != nil {
			t.Fatal(err)
		}
		p, err := PrepareRecording(&cfg, rec)
		if err != nil {
			t.Fatal(err)
		}
		return p
	}
	warned := func(p *Prepared) bool {
		for _, w := range p.Report.Warnings {
			if strings.Contains(w, "mean stimulus value") || strings.Contains(w, "from their bin centres") {
				return true
			}
		}
		return false
	}
	for _, trials := range []int{600, 1200, 6000} { // 10, 20 and 100 trials per bin on average
		rec, _, _ := synth.Population(synth.Config{Neurons: 4, Trials: trials, Bins: 60, UntunedFrac: 0.5, NoiseSD: 0.5, Seed: 5})
		if p := prep(rec, 6); warned(p) {
			t.Errorf("continuous stimulus, %d trials: warned %q", trials, p.Report.Warnings)
		}
	}
	// 24 directions, 10 trials each.
	rec, _, _ := synth.Population(synth.Config{Neurons: 4, Trials: 240, Bins: 60, UntunedFrac: 0.5, NoiseSD: 0.5, Seed: 5})
	for i := range rec.Stim {
		rec.Stim[i] = float64(15 * (i % 24))
	}
	p := prep(rec, 30)
	if !warned(p) {
		t.Errorf("24 directions in 12 bins: no warning in %q", p.Report.Warnings)
	}
	for b, v := range p.Values {
		// Bin b holds 30b and 30b + 15, ten trials each: mean 30b + 7.5,
		// 7.5 below the centre [exact].
		if want := 30*float64(b) + 7.5; math.Abs(v-want) > 1e-9 {
			t.Errorf("bin %d value %v, want %v", b, v, want)
		}
	}
	// 12 directions on 0, 30, ...: the axis is centred on them and the
	// values are the centres exactly.
	for i := range rec.Stim {
		rec.Stim[i] = float64(30 * (i % 12))
	}
	p = prep(rec, 30)
	if warned(p) {
		t.Errorf("centred discrete stimulus: warned %q", p.Report.Warnings)
	}
	for b, c := range p.Axis.Centers() {
		if p.Values[b] != c {
			t.Errorf("bin %d value %v, want the centre %v exactly", b, p.Values[b], c)
		}
	}
}
