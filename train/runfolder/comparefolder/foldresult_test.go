package comparefolder

import (
	"encoding/gob"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/runfolder"
)

// TestFoldResultPacked: a result is written packed and reads back bit for
// bit (NaN and infinities included; a score of -0 as 0, as gob read it
// back before the packing, while curves keep -0 as gob kept it); a result written before the packing
// (gob of the FoldResult itself) still reads; a packed file with a score
// this stria does not have, or without one it has, is refused.
func TestFoldResultPacked(t *testing.T) {
	dir := t.TempDir()
	scores := make([]eval.Scores, 3)
	for j := range scores {
		scores[j] = eval.Scores{TestR2: 0.25 * float64(j), TestR: math.NaN(), EVScore: math.Copysign(0, -1), FEV: math.Inf(1),
			CCNorm: 1.0 / 3, SignalF: math.Inf(-1), SignalDF2: 1e-300, SplitHalf: float64(j)}
	}
	r := &FoldResult{ID: "rec/vonmises/fold3", Model: "vonmises", Fold: 2, Scores: scores, Curves: []float64{1.5, math.NaN(), -2, 1e-310, math.Copysign(0, -1)},
		Epochs: 4, Fingerprint: runfolder.Fingerprint{Settings: []byte("seed: 1\n")}}
	if err := WriteFoldResult(dir, r); err != nil {
		t.Fatal(err)
	}
	got, err := ReadFoldResult(dir, r.ID)
	if err != nil {
		t.Fatal(err)
	}
	same := func(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) }
	check := func(what string, got *FoldResult) {
		t.Helper()
		if got.ID != r.ID || got.Model != r.Model || got.Fold != r.Fold || got.Epochs != r.Epochs || string(got.Fingerprint.Settings) != string(r.Fingerprint.Settings) ||
			len(got.Scores) != len(r.Scores) || len(got.Curves) != len(r.Curves) {
			t.Fatalf("%s: read back as %+v, want %+v", what, got, r)
		}
		for i := range r.Curves {
			if !same(got.Curves[i], r.Curves[i]) {
				t.Errorf("%s: curve %d = %v, want %v", what, i, got.Curves[i], r.Curves[i])
			}
		}
		for j := range r.Scores {
			a, b := got.Scores[j], r.Scores[j]
			if !same(a.TestR2, b.TestR2) || !same(a.TestR, b.TestR) || !same(a.EVScore, 0) || !same(a.FEV, b.FEV) ||
				!same(a.CCNorm, b.CCNorm) || !same(a.SignalF, b.SignalF) || !same(a.SignalDF2, b.SignalDF2) || !same(a.SplitHalf, b.SplitHalf) {
				t.Errorf("%s: neuron %d scores %+v, want %+v", what, j, a, b)
			}
		}
	}
	check("packed", got)

	// A result as stria wrote it before the packing.
	old := *r
	old.ID = "rec/vonmises/fold4"
	path := FoldResultPath(dir, old.ID)
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := gob.NewEncoder(f).Encode(&old); err != nil {
		t.Fatal(err)
	}
	f.Close()
	got, err = ReadFoldResult(dir, old.ID)
	if err != nil {
		t.Fatal(err)
	}
	old.ID = r.ID
	got.ID = r.ID
	check("before the packing", got)

	for _, tc := range []struct {
		name   string
		fields func([]string) []string
		want   string
	}{
		{"unknown score", func(f []string) []string { return append(f[:len(f):len(f)], "Future") }, `score "Future", which this stria does not know`},
		{"missing score", func(f []string) []string { return f[1:] }, "lacks the score"},
	} {
		pf := packFoldResult(r)
		pf.ScoreFields = tc.fields(pf.ScoreFields)
		pf.ScoreBits = make([]byte, 8*len(pf.ScoreFields)*pf.Neurons)
		p := filepath.Join(dir, DirFoldResults, "bad.gob")
		f, err := os.Create(p)
		if err != nil {
			t.Fatal(err)
		}
		if err := gob.NewEncoder(f).Encode(pf); err != nil {
			t.Fatal(err)
		}
		f.Close()
		if _, err := ReadFoldResult(dir, "bad"); err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), "run its array task again") {
			t.Errorf("%s: %v", tc.name, err)
		}
	}
}
