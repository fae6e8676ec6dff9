package main

import (
	"fmt"
	"sort"
	"strings"
	"testing"

	"gopkg.in/yaml.v3"

	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/settings"
)

// TestHelpTopics checks that stria help prints every topic in full, still
// lists the commands without a topic, and still shows a command's options.
func TestHelpTopics(t *testing.T) {
	for _, name := range helpTopicNames {
		t.Run(name, func(t *testing.T) {
			want, ok := helpTopic(name)
			if !ok || len(want) < 1000 {
				t.Fatalf("topic %s: %d bytes (found %v), want a full page", name, len(want), ok)
			}
			got, err := runCLI(t, "help", name)
			if err != nil {
				t.Fatalf("stria help %s: %v", name, err)
			}
			if got != want {
				t.Errorf("stria help %s printed %d bytes, want the topic's %d", name, len(got), len(want))
			}
		})
	}
	if m, _ := helpTopic("methods"); m != eval.Methods {
		t.Error("topic methods is not eval.Methods")
	}
	cases := []struct {
		name string
		args []string
		want []string // substrings of the output
	}{
		{"no topic lists commands", []string{"help"}, []string{"COMMANDS:", "fit", "compare", "help, h", "--help"}},
		{"short alias", []string{"h", "metrics"}, []string{"cc_norm"}},
		{"command help", []string{"help", "fit"}, []string{"stria fit", "--resume", "--config"}},
		{"flag still works", []string{"--help"}, []string{"COMMANDS:"}},
		{"command flag still works", []string{"fit", "--help"}, []string{"--resume"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, err := runCLI(t, c.args...)
			if err != nil {
				t.Fatalf("stria %s: %v", strings.Join(c.args, " "), err)
			}
			for _, w := range c.want {
				if !strings.Contains(got, w) {
					t.Errorf("stria %s: output lacks %q; got\n%s", strings.Join(c.args, " "), w, got)
				}
			}
		})
	}
	if _, err := runCLI(t, "help", "nonsense"); err == nil || !strings.Contains(err.Error(), "config, outputs") {
		t.Errorf("stria help nonsense: got error %v, want one listing the topics", err)
	}
}

// configKeys walks a YAML mapping and returns the dotted path of every key:
// leaves, and lists (a list of mappings also yields its elements' keys as
// path[].key).
func configKeys(prefix string, m map[string]any, dst *[]string) {
	for k, v := range m {
		path := prefix + k
		switch v := v.(type) {
		case map[string]any:
			if len(v) == 0 {
				*dst = append(*dst, path)
			}
			configKeys(path+".", v, dst)
		case []any:
			*dst = append(*dst, path)
			if len(v) > 0 {
				if e, ok := v[0].(map[string]any); ok {
					configKeys(path+"[].", e, dst)
				}
			}
		default:
			*dst = append(*dst, path)
		}
	}
}

// TestConfigHelpComplete checks that config.md documents every key of the
// config, as the defaults marshal it to YAML (with one recording and one
// encoder spec, so that the keys of list entries appear too).
func TestConfigHelpComplete(t *testing.T) {
	cfg := settings.Defaults()
	cfg.Recordings = []settings.RecordingConfig{{}}
	cfg.Compare.Encoders = []settings.EncoderSpec{{}}
	b, err := cfg.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := yaml.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	var keys []string
	configKeys("", m, &keys)
	sort.Strings(keys)
	if len(keys) < 40 {
		t.Fatalf("walked %d keys, want the whole config (at least 40): %v", len(keys), keys)
	}
	doc, _ := helpTopic("config")
	for _, k := range keys {
		if !strings.Contains(doc, fmt.Sprintf("`%s`", k)) {
			t.Errorf("help/config.md does not document `%s`", k)
		}
	}
}
