package synth

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
)

func TestWriteSynthNPY(t *testing.T) {
	dir := t.TempDir()
	cfg := StreamConfig{Neurons: 333, Trials: 57, UntunedFrac: 0.1, GainSD: 0.15, NoiseSD: 0.5, Seed: 9, BlockRows: 5}
	p1 := filepath.Join(dir, "a.npy")
	stim1, err := WriteNPY(p1, cfg)
	if err != nil {
		t.Fatal(err)
	}
	cfg.BlockRows = 0
	p2 := filepath.Join(dir, "b.npy")
	stim2, err := WriteNPY(p2, cfg)
	if err != nil {
		t.Fatal(err)
	}
	b1, _ := os.ReadFile(p1)
	b2, _ := os.ReadFile(p2)
	if !bytes.Equal(b1, b2) {
		t.Fatal("files differ between block sizes, want identical bytes")
	}
	for i := range stim1 {
		if stim1[i] != stim2[i] || !(stim1[i] >= 0 && stim1[i] < 360) {
			t.Fatalf("stimulus %d = %v and %v, want equal values in [0, 360)", i, stim1[i], stim2[i])
		}
	}
	m, err := format.ReadNPY(p1)
	if err != nil {
		t.Fatal(err)
	}
	if m.Rows != 57 || m.Cols != 333 {
		t.Fatalf("got %d x %d, want 57 x 333", m.Rows, m.Cols)
	}
	// The noise s.d. of untuned... any cell: a trial's deviation from the
	// cell's noise-free value is N(0, 0.5^2); check the overall spread is
	// in a plausible range (a simulation sanity check, not a tight test).
	var s, s2 float64
	for _, v := range m.Data {
		s += float64(v)
		s2 += float64(v) * float64(v)
	}
	k := float64(len(m.Data))
	sd := math.Sqrt(s2/k - (s/k)*(s/k))
	if !(sd > 0.5 && sd < 2) {
		t.Fatalf("overall s.d. %v, want between the noise s.d. 0.5 and 2", sd)
	}
	if err := (StreamConfig{Neurons: 0, Trials: 3}).Validate(); err == nil || !strings.Contains(err.Error(), "neurons") {
		t.Fatalf("got %v, want an error naming neurons", err)
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 2 {
		t.Fatalf("%d files in the folder, want 2 (no temporary files left)", len(entries))
	}
}
