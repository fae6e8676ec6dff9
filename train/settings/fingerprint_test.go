package settings

import (
	"strings"
	"testing"
)

// TestNumericSettings checks that the settings that decide the numbers
// ignore where outputs go and the core count, and that DiffSettings names
// each key that changed with its old and new value.
func TestNumericSettings(t *testing.T) {
	a := Defaults()
	a.Data.Responses = "/data/r.npy"
	b := a
	b.Output, b.Compare.Output, b.Train.Threads = "/elsewhere", "/elsewhere/c", 3
	sa, err := a.NumericSettings()
	if err != nil {
		t.Fatal(err)
	}
	sb, _ := b.NumericSettings()
	if Hash(sa) != Hash(sb) {
		t.Error("output folders or the thread count changed the settings hash")
	}
	b.Model.ReadoutL2 = Penalty{Value: 100}
	b.Seed = 2
	b.Model.Layers = append(b.Model.Layers, LayerConfig{Channels: 2, Kernel: 3, Stride: 1})
	sb, _ = b.NumericSettings()
	if Hash(sa) == Hash(sb) {
		t.Fatal("a changed penalty and seed kept the hash")
	}
	diff, err := DiffSettings(sa, sb)
	if err != nil {
		t.Fatal(err)
	}
	got := strings.Join(diff, "\n")
	for _, want := range []string{"model.readout_l2: auto -> 100", "seed: 1 -> 2", "model.layers[1].channels: (none) -> 2"} {
		if !strings.Contains(got, want) {
			t.Errorf("diff\n%s\ndoes not say %q", got, want)
		}
	}
	if len(diff) != 6 { // readout_l2, seed, and the new layer's four keys
		t.Errorf("got %d differences, want 6:\n%s", len(diff), got)
	}
}
