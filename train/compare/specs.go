package compare

import (
	"fmt"
	"slices"
	"sort"
	"strconv"
	"strings"

	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/settings"
)

// gridKeys are the settings a grid may vary (channels, kernel and stride
// apply to the first conv layer).
var gridKeys = []string{"readout_l2", "learning_rate", "weight_decay", "channels", "kernel", "stride"}

func defaultBaselines(ax settings.AxisConfig) []string {
	if !ax.Periodic {
		return []string{"condmean", "gaussian", "smoothlinear"}
	}
	if ax.Max-ax.Min == 360 {
		return []string{"condmean", "vonmises", "vonmises2", "smoothlinear"}
	}
	return []string{"condmean", "vonmises", "smoothlinear"}
}

// Specs expands the compare section of c into model specs, encoders
// first (grids expanded, keys in sorted order), baselines last. Errors name
// the field.
func Specs(c *settings.Config) ([]train.ModelSpec, error) {
	var specs []train.ModelSpec
	encs := c.Compare.Encoders
	if len(encs) == 0 {
		encs = []settings.EncoderSpec{{Name: "encoder"}}
	}
	seen := map[string]bool{}
	add := func(s train.ModelSpec) error {
		if seen[s.Name] {
			return fmt.Errorf("compare: two models are called %q", s.Name)
		}
		seen[s.Name] = true
		specs = append(specs, s)
		return nil
	}
	for i, e := range encs {
		if e.Name == "" {
			e.Name = fmt.Sprintf("encoder%d", i+1)
		}
		base := *c
		base.Model.Layers = slices.Clone(c.Model.Layers)
		if len(e.Layers) > 0 {
			base.Model.Layers = slices.Clone(e.Layers)
			for k := range base.Model.Layers {
				if base.Model.Layers[k].Stride == 0 {
					base.Model.Layers[k].Stride = 1
				}
			}
		}
		if e.ReadoutL2 != nil {
			base.Model.ReadoutL2 = *e.ReadoutL2
		}
		if e.LearningRate != nil {
			base.Train.LearningRate = *e.LearningRate
		}
		if e.WeightDecay != nil {
			base.Train.WeightDecay = *e.WeightDecay
		}
		if e.Solver != nil {
			base.Train.Solver = *e.Solver
		}
		keys := make([]string, 0, len(e.Grid))
		for k, v := range e.Grid {
			if !slices.Contains(gridKeys, k) {
				return nil, fmt.Errorf("compare.encoders[%d].grid: unknown key %q (want one of %s)", i, k, strings.Join(gridKeys, ", "))
			}
			if len(v) == 0 {
				return nil, fmt.Errorf("compare.encoders[%d].grid.%s: no values", i, k)
			}
			keys = append(keys, k)
		}
		sort.Strings(keys)
		combos := [][]float64{nil}
		for _, k := range keys {
			var next [][]float64
			for _, c := range combos {
				for _, v := range e.Grid[k] {
					next = append(next, append(slices.Clone(c), v))
				}
			}
			combos = next
		}
		for _, combo := range combos {
			cfg := base
			cfg.Model.Layers = slices.Clone(base.Model.Layers)
			name := e.Name
			var parts []string
			for ki, k := range keys {
				v := combo[ki]
				parts = append(parts, k+"="+strconv.FormatFloat(v, 'g', -1, 64))
				switch k {
				case "readout_l2":
					cfg.Model.ReadoutL2 = settings.Penalty{Value: v}
				case "learning_rate":
					cfg.Train.LearningRate = v
				case "weight_decay":
					cfg.Train.WeightDecay = v
				case "channels":
					cfg.Model.Layers[0].Channels = int(v)
				case "kernel":
					cfg.Model.Layers[0].Kernel = int(v)
				case "stride":
					cfg.Model.Layers[0].Stride = int(v)
				}
			}
			if len(parts) > 0 {
				name += "[" + strings.Join(parts, ",") + "]"
			}
			if err := cfg.Validate(); err != nil {
				return nil, fmt.Errorf("compare model %s: %w", name, err)
			}
			if err := add(train.ModelSpec{Name: name, Cfg: &cfg}); err != nil {
				return nil, err
			}
		}
	}
	bl := c.Compare.Baselines
	if len(bl) == 0 {
		bl = defaultBaselines(c.Axis)
	}
	for _, b := range bl {
		switch b {
		case "condmean", "smoothlinear":
		case "vonmises", "vonmises2":
			if !c.Axis.Periodic {
				return nil, fmt.Errorf("compare.baselines: %s needs a periodic axis", b)
			}
		case "gaussian":
			if c.Axis.Periodic {
				return nil, fmt.Errorf("compare.baselines: gaussian is for a non-periodic axis (use vonmises)")
			}
		default:
			return nil, fmt.Errorf("compare.baselines: unknown model %q (want condmean, vonmises, vonmises2, gaussian or smoothlinear)", b)
		}
		if err := add(train.ModelSpec{Name: b, Baseline: b}); err != nil {
			return nil, err
		}
	}
	variants, err := stateSpecs(c, specs)
	if err != nil {
		return nil, err
	}
	for _, v := range variants {
		if err := add(v); err != nil {
			return nil, err
		}
	}
	return specs, nil
}
