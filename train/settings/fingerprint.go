package settings

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"slices"
	"strings"

	"gopkg.in/yaml.v3"
)

// NumericSettings returns the settings that decide a fit's numbers, as
// YAML: the whole resolved config except where outputs go and how many
// cores run (results do not depend on the core count). Two fits with
// equal NumericSettings and the same data give the same numbers.
func (c *Config) NumericSettings() ([]byte, error) {
	d := *c
	d.Output = ""
	d.Compare.Output = ""
	d.Acuity.Output = ""
	d.Train.Threads = 0
	return d.Marshal()
}

// Hash returns the hex SHA-256 of settings (from NumericSettings).
func Hash(settings []byte) string {
	h := sha256.Sum256(settings)
	return hex.EncodeToString(h[:])
}

// DiffSettings compares two YAML settings documents and lists each key
// whose value differs as "key: old -> new" (a key on one side only shows
// "(none)" on the other), in key order. Sequences compare item by item
// (model.layers[0].channels).
func DiffSettings(old, new []byte) ([]string, error) {
	flat := func(b []byte) (map[string]string, error) {
		var root yaml.Node
		if err := yaml.Unmarshal(b, &root); err != nil {
			return nil, err
		}
		m := map[string]string{}
		flattenYAML(&root, "", m)
		return m, nil
	}
	a, err := flat(old)
	if err != nil {
		return nil, fmt.Errorf("settings: %w", err)
	}
	b, err := flat(new)
	if err != nil {
		return nil, fmt.Errorf("settings: %w", err)
	}
	keys := map[string]bool{}
	for k := range a {
		keys[k] = true
	}
	for k := range b {
		keys[k] = true
	}
	var out []string
	for _, k := range slices.Sorted(func(yield func(string) bool) {
		for k := range keys {
			if !yield(k) {
				return
			}
		}
	}) {
		va, oka := a[k]
		vb, okb := b[k]
		if oka && okb && va == vb {
			continue
		}
		if !oka {
			va = "(none)"
		}
		if !okb {
			vb = "(none)"
		}
		out = append(out, fmt.Sprintf("%s: %s -> %s", k, va, vb))
	}
	return out, nil
}

// flattenYAML records every scalar of a document under its key path; an
// empty sequence or mapping records as [] or {}.
func flattenYAML(n *yaml.Node, prefix string, m map[string]string) {
	switch n.Kind {
	case yaml.DocumentNode:
		for _, c := range n.Content {
			flattenYAML(c, prefix, m)
		}
	case yaml.MappingNode:
		if len(n.Content) == 0 {
			m[prefix] = "{}"
		}
		for i := 0; i+1 < len(n.Content); i += 2 {
			key := n.Content[i].Value
			if prefix != "" {
				key = prefix + "." + key
			}
			flattenYAML(n.Content[i+1], key, m)
		}
	case yaml.SequenceNode:
		if len(n.Content) == 0 {
			m[prefix] = "[]"
		}
		for i, c := range n.Content {
			flattenYAML(c, fmt.Sprintf("%s[%d]", prefix, i), m)
		}
	case yaml.AliasNode:
		flattenYAML(n.Alias, prefix, m)
	default:
		m[prefix] = strings.TrimSpace(n.Value)
	}
}
