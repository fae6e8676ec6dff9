package settings

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"
)

// maxConfigBytes caps the size of a config file: a real one is a few
// kilobytes, and decoding a very large YAML document can take more memory
// than the recording.
const maxConfigBytes = 1 << 20

var errConfigSize = "larger than 1 MB; a stria config is a short YAML file (is this the right file?)"

// LoadConfig reads a YAML config strictly: an unknown or misspelt key is an
// error naming the key and its line, and so is a value of the wrong type or
// an unknown word. Missing keys keep their defaults, except the ones
// Validate requires.
func LoadConfig(path string) (*Config, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, maxConfigBytes+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	cfg, err := ParseConfig(b, path)
	if err != nil {
		return nil, err
	}
	abs, err := filepath.Abs(filepath.Dir(path))
	if err != nil {
		return nil, err
	}
	cfg.dir = abs
	cfg.resolvePaths()
	return cfg, nil
}

// resolvePaths makes every path of the config absolute, relative to the
// config file's folder, so that the resolved config written into a run
// folder works from anywhere.
func (c *Config) resolvePaths() {
	d := &c.Data
	for _, p := range []*string{&d.Responses, &d.Stimulus, &d.Condition, &d.Block, &d.Covariates, &c.Output, &c.Compare.Output, &c.Acuity.Output, &c.Acuity.Encoder} {
		*p = c.Resolve(*p)
	}
	// A recording's other paths are relative to its responses file.
	for i := range c.Recordings {
		c.Recordings[i].Responses = c.Resolve(c.Recordings[i].Responses)
	}
}

// ParseConfig decodes YAML bytes over the defaults; name is used in errors.
func ParseConfig(b []byte, name string) (*Config, error) {
	if len(b) > maxConfigBytes {
		return nil, fmt.Errorf("%s: %s", name, errConfigSize)
	}
	var root yaml.Node
	if err := yaml.Unmarshal(b, &root); err != nil {
		return nil, fmt.Errorf("%s: %s", name, cleanYAMLError(err, nil))
	}
	keys := yamlKeys(&root, "", nil)
	if err := checkKeys(keys); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	cfg := Defaults()
	// A layers list in the file replaces the default one rather than
	// merging into it element by element.
	cfg.Model.Layers = nil
	dec := yaml.NewDecoder(bytes.NewReader(b))
	dec.KnownFields(true)
	// An empty file decodes to io.EOF: all defaults.
	if err := dec.Decode(&cfg); err != nil && !errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("%s: %s", name, cleanYAMLError(err, keys))
	}
	if cfg.Model.Layers == nil {
		cfg.Model.Layers = Defaults().Model.Layers
	}
	// A stride left out is 1 (checkKeys refused a stride written as 0).
	for i := range cfg.Model.Layers {
		if cfg.Model.Layers[i].Stride == 0 {
			cfg.Model.Layers[i].Stride = 1
		}
	}
	for _, e := range cfg.Compare.Encoders {
		for i := range e.Layers {
			if e.Layers[i].Stride == 0 {
				e.Layers[i].Stride = 1
			}
		}
	}
	cfg.given = map[string]bool{}
	for _, k := range keys {
		cfg.given[k.path] = true
	}
	return &cfg, nil
}

// yamlKey is one key of a YAML document: its dotted path (sequence items
// as [i]), its line and its value.
type yamlKey struct {
	path  string
	line  int
	value *yaml.Node
}

// yamlKeys appends every mapping key of a document to out, depth first.
func yamlKeys(n *yaml.Node, prefix string, out []yamlKey) []yamlKey {
	switch n.Kind {
	case yaml.DocumentNode:
		for _, c := range n.Content {
			out = yamlKeys(c, prefix, out)
		}
	case yaml.MappingNode:
		for i := 0; i+1 < len(n.Content); i += 2 {
			k, v := n.Content[i], n.Content[i+1]
			path := k.Value
			if prefix != "" {
				path = prefix + "." + k.Value
			}
			out = append(out, yamlKey{path: path, line: k.Line, value: v})
			out = yamlKeys(v, path, out)
		}
	case yaml.SequenceNode:
		for i, c := range n.Content {
			out = yamlKeys(c, fmt.Sprintf("%s[%d]", prefix, i), out)
		}
	}
	return out
}

var seqIndex = regexp.MustCompile(`\[\d+\]`)

// indexless drops the sequence indices of a key path: "a[2].b" -> "a[].b".
func indexless(path string) string { return seqIndex.ReplaceAllString(path, "[]") }

// wordKeys are the settings that take one word from a list, by key path.
var wordKeys = map[string][]string{
	"axis.encoding":                      encodingWords,
	"recordings[].axis.encoding":         encodingWords,
	"model.output":                       {"identity", "softplus", "exp"},
	"model.loss":                         lossWords,
	"model.layers[].border":              borderWords,
	"compare.encoders[].layers[].border": borderWords,
	"train.optimizer":                    optimizerWords,
	"train.solver":                       solverWords,
	"state.tuning":                       stateTuningWords,
	"compare.encoders[].solver":          solverWords,
}

// wordListKeys are the settings that take a list of words from a list.
var wordListKeys = map[string][]string{
	"acuity.decoders": acuityDecoderWords,
}

// checkKeys refuses, before decoding, the values that decoding would
// report without their key: an unknown word; and a stride of 0, which
// decoding cannot tell from a stride left out (meaning 1).
func checkKeys(keys []yamlKey) error {
	for _, k := range keys {
		gen := indexless(k.path)
		if words, ok := wordKeys[gen]; ok && k.value.Tag != "!!null" {
			v := k.value
			if v.Kind != yaml.ScalarNode || (v.Value != "" && !slices.Contains(words, v.Value)) {
				return fmt.Errorf("line %d: %s %q: want %s", k.line, k.path, v.Value, orList(words))
			}
		}
		if words, ok := wordListKeys[gen]; ok && k.value.Kind == yaml.SequenceNode {
			for i, v := range k.value.Content {
				if v.Kind != yaml.ScalarNode || !slices.Contains(words, v.Value) {
					return fmt.Errorf("line %d: %s[%d] %q: want %s", v.Line, k.path, i, v.Value, orList(words))
				}
			}
		}
		if strings.HasSuffix(gen, "layers[].stride") && k.value.Kind == yaml.ScalarNode && k.value.Value == "0" {
			return fmt.Errorf("line %d: %s 0: want at least 1 (leave it out for 1)", k.line, k.path)
		}
	}
	return nil
}

var (
	yamlLine   = regexp.MustCompile(`line (\d+): field (\S+) not found in type ([\w.]+)`)
	yamlAtLine = regexp.MustCompile(`^line (\d+): (.*)$`)
)

// cleanYAMLError rewrites yaml.v3's messages: an unknown field becomes
// `line 3: unknown key "train.learnig_rate"`, and any other message about
// a line also names the key on that line (keys may be nil).
func cleanYAMLError(err error, keys []yamlKey) string {
	msg := err.Error()
	msg = strings.TrimPrefix(msg, "yaml: unmarshal errors:\n")
	var out []string
	for _, line := range strings.Split(msg, "\n") {
		line = strings.TrimSpace(line)
		if m := yamlLine.FindStringSubmatch(line); m != nil {
			sec := sectionOf(m[3])
			key := m[2]
			if sec != "" {
				key = sec + "." + key
			}
			out = append(out, fmt.Sprintf("line %s: unknown key %q", m[1], key))
			continue
		}
		line = strings.TrimPrefix(line, "yaml: ")
		if m := yamlAtLine.FindStringSubmatch(line); m != nil {
			if n, err := strconv.Atoi(m[1]); err == nil {
				if key := keyAt(keys, n); key != "" {
					line = fmt.Sprintf("line %d: %s: %s", n, key, m[2])
				}
			}
		}
		out = append(out, line)
	}
	return strings.Join(out, "; ")
}

// keyAt returns the last key whose name or value is on line n.
func keyAt(keys []yamlKey, n int) string {
	key := ""
	for _, k := range keys {
		if k.line == n || k.value.Line == n {
			key = k.path
		}
	}
	return key
}

func sectionOf(typ string) string {
	switch strings.TrimPrefix(typ, "settings.") {
	case "DataConfig":
		return "data"
	case "AxisConfig":
		return "axis"
	case "SplitConfig":
		return "split"
	case "ModelConfig":
		return "model"
	case "LayerConfig":
		return "model.layers[]"
	case "TrainConfig":
		return "train"
	case "CompareConfig":
		return "compare"
	case "ScoresConfig":
		return "scores"
	case "EncoderSpec":
		return "compare.encoders[]"
	case "RecordingConfig":
		return "recordings[]"
	case "AcuityConfig":
		return "acuity"
	case "StateConfig":
		return "state"
	}
	return ""
}
