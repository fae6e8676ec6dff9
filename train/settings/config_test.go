package settings

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestParseConfigUnknownKey(t *testing.T) {
	src := "seed: 3\ntrain:\n  learnig_rate: 0.1\n"
	_, err := ParseConfig([]byte(src), "x.yaml")
	if err == nil {
		t.Fatal("misspelt key accepted")
	}
	for _, want := range []string{"x.yaml", "line 3", `"train.learnig_rate"`} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q does not mention %s", err, want)
		}
	}
}

func TestParseConfigDefaults(t *testing.T) {
	cfg, err := ParseConfig([]byte("data:\n  responses: r.npy\n"), "x.yaml")
	if err != nil {
		t.Fatal(err)
	}
	d := Defaults()
	if cfg.Train.LearningRate != d.Train.LearningRate || cfg.Split.TestFraction != d.Split.TestFraction ||
		len(cfg.Model.Layers) != 1 || cfg.Model.Layers[0].Kernel != 9 {
		t.Errorf("defaults not kept: %+v", cfg)
	}
	// An empty file is all defaults.
	if _, err := ParseConfig(nil, "empty.yaml"); err != nil {
		t.Errorf("empty config: %v", err)
	}
	// A layer without stride gets stride 1.
	cfg, err = ParseConfig([]byte("model:\n  layers:\n    - channels: 2\n      kernel: 3\n"), "x.yaml")
	if err != nil || cfg.Model.Layers[0].Stride != 1 || len(cfg.Model.Layers) != 1 {
		t.Errorf("layer defaults: %+v %v", cfg.Model.Layers, err)
	}
}

func validBase() Config {
	c := Defaults()
	c.Data.Responses = "r.npy"
	c.Axis = AxisConfig{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 6, Encoding: OneHot}
	return c
}

func TestValidateRefusesBadSettings(t *testing.T) {
	if err := func() *Config { c := validBase(); return &c }().Validate(); err != nil {
		t.Fatalf("valid config refused: %v", err)
	}
	cases := []struct {
		name string
		edit func(*Config)
		want string
	}{
		{"kernel longer than axis", func(c *Config) { c.Model.Layers[0].Kernel = 61 }, "model.layers[0].kernel 61 is longer than its input (60 positions)"},
		{"stride 0", func(c *Config) { c.Model.Layers[0].Stride = 0 }, "model.layers[0].stride 0"},
		{"negative rate", func(c *Config) { c.Train.LearningRate = -1e-3 }, "train.learning_rate -0.001"},
		{"second layer too long", func(c *Config) {
			c.Model.Layers = []LayerConfig{{Channels: 4, Kernel: 9, Stride: 10}, {Channels: 4, Kernel: 7, Stride: 1}}
		}, "model.layers[1].kernel 7 is longer than its input (6 positions)"},
		{"poisson identity", func(c *Config) { c.Model.Loss = Poisson }, "model.loss poisson needs a positive output"},
		{"no responses", func(c *Config) { c.Data.Responses = "" }, "data.responses"},
		{"test fraction", func(c *Config) { c.Split.TestFraction = 1 }, "split.test_fraction 1"},
		{"beta2", func(c *Config) { c.Train.Beta2 = 1 }, "train.beta2 1"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c := validBase()
			tc.edit(&c)
			err := c.Validate()
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("got %v, want an error containing %q", err, tc.want)
			}
		})
	}
}

func TestConfigExamplesParse(t *testing.T) {
	files, _ := filepath.Glob("../../configs/*.yaml")
	if len(files) == 0 {
		t.Fatal("no example configs")
	}
	for _, f := range files {
		cfg, err := LoadConfig(f)
		if err != nil {
			t.Errorf("%s: %v", f, err)
			continue
		}
		if err := cfg.Validate(); err != nil {
			t.Errorf("%s: %v", f, err)
		}
	}
}

func TestLoadConfigResolvesPaths(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "c.yaml")
	os.WriteFile(path, []byte("data:\n  responses: sub/r.npy\n  stimulus: /abs/s.npy\noutput: out\n"), 0o644)
	cfg, err := LoadConfig(path)
	if err != nil {
		t.Fatal(err)
	}
	if cfg.Data.Responses != filepath.Join(dir, "sub/r.npy") || cfg.Data.Stimulus != "/abs/s.npy" || cfg.Output != filepath.Join(dir, "out") {
		t.Errorf("paths: %q %q %q", cfg.Data.Responses, cfg.Data.Stimulus, cfg.Output)
	}
}

// TestConfigFileMistakes checks that mistakes in a config file are refused
// with the line and the key, before any work.
func TestConfigFileMistakes(t *testing.T) {
	const ok = "data: {responses: r.npy}\naxis:\n  min: 0\n  max: 360\n  periodic: true\n  bin_width: 30\n"
	for _, tc := range []struct {
		name, src string
		want      []string
	}{
		{"wrong type", "data: {responses: r.npy}\naxis:\n  min: zero\n  max: 360\n", []string{"line 3", "axis.min", "zero"}},
		{"wrong type in a list", ok + "model:\n  layers:\n    - channels: many\n", []string{"line 9", "model.layers[0].channels"}},
		{"unknown word", ok + "model:\n  loss: poison\n", []string{"line 8", "model.loss", `"poison"`, "want mse or poisson"}},
		{"unknown border", ok + "model:\n  layers:\n    - {channels: 2, kernel: 3, border: reflect}\n", []string{"line 9", "model.layers[0].border", "want auto, zero, circular or valid"}},
		{"unknown solver in compare", ok + "compare:\n  encoders:\n    - {name: a, solver: fast}\n", []string{"compare.encoders[0].solver", `"fast"`}},
		{"explicit stride 0", ok + "model:\n  layers:\n    - channels: 2\n      kernel: 3\n      stride: 0\n", []string{"line 11", "model.layers[0].stride 0", "leave it out"}},
		{"no axis.min", "data: {responses: r.npy}\naxis:\n  max: 180\n  periodic: true\n  bin_width: 15\n", []string{"axis.min: required"}},
		{"no axis.max", "data: {responses: r.npy}\naxis:\n  min: -180\n  periodic: true\n  bin_width: 15\n", []string{"axis.max: required"}},
		{"too large", ok + "# " + strings.Repeat("x", 1<<20) + "\n", []string{"larger than 1 MB"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			cfg, err := ParseConfig([]byte(tc.src), "x.yaml")
			if err == nil {
				err = cfg.Validate()
			}
			if err == nil {
				t.Fatal("accepted")
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not mention %s", err, w)
				}
			}
		})
	}
	cfg, err := ParseConfig([]byte(ok+"model:\n  loss: mse\n  layers:\n    - {channels: 2, kernel: 3, border: auto}\n"), "x.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if err := cfg.Validate(); err != nil {
		t.Errorf("valid config refused: %v", err)
	}
	if cfg.Model.Layers[0].Stride != 1 || cfg.Model.Layers[0].Border != BorderAuto {
		t.Errorf("layer: %+v, want stride 1 and border auto", cfg.Model.Layers[0])
	}
}
