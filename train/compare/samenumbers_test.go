package compare

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/train/runfolder/comparefolder"
	"github.com/strialab/stria/train/settings"
)

// The numbers guard: a comparison of two small recordings (testdata/compare)
// must give the numbers recorded in testdata/compare/expected.json, which
// were written by the implementation before the comparison was made faster
// (shared per-fold statistics, scoring from held-out sums, the synchronous
// curve-fit driver, one preparation per recording). Every unit's scores and
// curves are compared bit for bit (as SHA-256 digests of their float64
// bits), and so are the gathered tables.
//
// Regenerate expected.json only when a change is meant to change the
// numbers, and say so in the commit:
//
//	go test ./train/compare -run TestSameNumbers -update-numbers
var updateNumbers = flag.Bool("update-numbers", false, "rewrite testdata/compare/expected.json from this implementation")

// genRecordings rewrites the recordings of testdata/compare (they are
// committed; synth may change, the recordings may not).
var genRecordings = flag.Bool("gen-recordings", false, "rewrite the recordings of testdata/compare from data/synth")

const sameNumbersDir = "../../testdata/compare"

// sameNumbersConfig compares an encoder and every baseline that suits each
// axis on two recordings: "heading" (periodic, blocks kept, one constant
// neuron, untuned cells) and "track" (the same kind of data on a
// non-periodic axis, fewer trials: few test trials per condition).
const sameNumbersConfig = `seed: 3
axis: {name: heading, unit: deg, min: 0, max: 360, periodic: true, bin_width: 30}
model:
  layers: [{channels: 2, kernel: 3, border: circular}]
train: {max_epochs: 60, patience: 10}
recordings:
  - name: heading
    responses: heading_responses.npy
    stimulus: heading_stimulus.npy
    block: heading_blocks.npy
    baselines: []
  - name: track
    responses: track_responses.npy
    stimulus: track_stimulus.npy
    axis: {name: position, unit: cm, min: 0, max: 360, periodic: false, bin_width: 30}
compare:
  baselines: []
`

// writeSameNumbersRecordings writes the two recordings into dir.
func writeSameNumbersRecordings(t *testing.T, dir string) {
	for _, r := range []struct {
		name           string
		neurons, trial int
		seed           uint64
		blocks         bool
	}{{"heading", 24, 360, 11, true}, {"track", 16, 150, 12, false}} {
		cfg := synth.DefaultConfig()
		cfg.Neurons, cfg.Trials, cfg.Bins, cfg.Seed = r.neurons, r.trial, 12, r.seed
		cfg.UntunedFrac, cfg.TwoPeakFrac = 0.2, 0.3
		rec, _, _ := synth.Population(cfg)
		y := slices.Clone(rec.Y.Data)
		if r.name == "heading" {
			for tr := 0; tr < r.trial; tr++ {
				y[tr*r.neurons+5] = 0.25 // a constant neuron: excluded from every score
			}
		}
		if err := format.WriteNPY(filepath.Join(dir, r.name+"_responses.npy"), []int{r.trial, r.neurons}, y); err != nil {
			t.Fatal(err)
		}
		if err := format.WriteNPY64(filepath.Join(dir, r.name+"_stimulus.npy"), []int{r.trial}, rec.Stim); err != nil {
			t.Fatal(err)
		}
		if r.blocks {
			b := make([]float64, r.trial)
			for i, v := range rec.Block {
				b[i] = float64(v)
			}
			if err := format.WriteNPY64(filepath.Join(dir, r.name+"_blocks.npy"), []int{r.trial}, b); err != nil {
				t.Fatal(err)
			}
		}
	}
}

// sameNumbersPlan copies the recordings into a temporary folder and returns
// the plan of the comparison into it.
func sameNumbersPlan(t *testing.T) *Plan {
	t.Helper()
	if *genRecordings {
		writeSameNumbersRecordings(t, sameNumbersDir)
	}
	dir := t.TempDir()
	for _, f := range []string{"heading_responses.npy", "heading_stimulus.npy", "heading_blocks.npy", "track_responses.npy", "track_stimulus.npy"} {
		b, err := os.ReadFile(filepath.Join(sameNumbersDir, f))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, f), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	src := strings.ReplaceAll(sameNumbersConfig, "    baselines: []\n", "")
	if err := os.WriteFile(filepath.Join(dir, "compare.yaml"), []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	cfg, err := settings.LoadConfig(filepath.Join(dir, "compare.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	cfg.Compare.Output = filepath.Join(dir, "out")
	p, err := NewPlan(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// digestFloats hashes the bits of float64 values.
func digestFloats(h interface{ Write([]byte) (int, error) }, v ...float64) {
	var b [8]byte
	for _, x := range v {
		binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
		h.Write(b[:])
	}
}

// sameNumbersDigests runs the comparison and returns a digest per unit (its
// scores and curves) and per gathered table.
func sameNumbersDigests(t *testing.T, p *Plan) map[string]string {
	t.Helper()
	if err := p.Check(p.Units); err != nil {
		t.Fatal(err)
	}
	if err := p.Begin(); err != nil {
		t.Fatal(err)
	}
	if err := p.RunUnits(context.Background(), p.Units, 2, nil); err != nil {
		t.Fatal(err)
	}
	if _, err := p.Gather(); err != nil {
		t.Fatal(err)
	}
	out := map[string]string{}
	for _, u := range p.Units {
		r, err := comparefolder.ReadFoldResult(p.Dir(), u.ID)
		if err != nil {
			t.Fatal(err)
		}
		h := sha256.New()
		for _, s := range r.Scores {
			digestFloats(h, s.TestR2, s.EVScore, s.TestR, s.ExplainableFraction, s.FEV, s.SP, s.CCAbs, s.CCMax, s.CCNorm, s.SPE, s.SplitHalf, s.SignalF, s.SignalDF1, s.SignalDF2)
		}
		digestFloats(h, r.Curves...)
		digestFloats(h, float64(r.Epochs))
		out["unit "+u.ID] = hex.EncodeToString(h.Sum(nil))
	}
	// The gathered tables (their bytes: numbers and layout).
	for _, f := range []string{"per_recording.csv", "pooled_summary.csv", "pooled_pairs.csv",
		"heading/fold_scores.csv", "heading/model_summary.csv", "heading/model_pairs.csv", "heading/tuning_descriptors.csv", "heading/fold_averages.csv",
		"track/fold_scores.csv", "track/model_summary.csv", "track/model_pairs.csv", "track/tuning_descriptors.csv", "track/fold_averages.csv"} {
		b, err := os.ReadFile(filepath.Join(p.Dir(), filepath.FromSlash(f)))
		if err != nil {
			t.Fatal(err)
		}
		sum := sha256.Sum256(b)
		out["file "+f] = hex.EncodeToString(sum[:])
	}
	for _, rec := range []string{"heading", "track"} {
		names, err := filepath.Glob(filepath.Join(p.Dir(), rec, "tuning_curves", "*"))
		if err != nil || len(names) == 0 {
			t.Fatalf("no tuning curves of %s: %v", rec, err)
		}
		for _, n := range names {
			b, err := os.ReadFile(n)
			if err != nil {
				t.Fatal(err)
			}
			sum := sha256.Sum256(b)
			out["file "+rec+"/tuning_curves/"+filepath.Base(n)] = hex.EncodeToString(sum[:])
		}
	}
	return out
}

// TestSameNumbers guards every number of a comparison against the values
// of the implementation before it was made faster (expected.json; see the
// comment on updateNumbers).
//
// The comparison runs twice: gather using the results the run kept
// (KeepResults, as stria compare does) and reading them back from disk (as
// stria gather does after array tasks).
func TestSameNumbers(t *testing.T) {
	for _, keep := range []bool{true, false} {
		t.Run(fmt.Sprintf("keep results %v", keep), func(t *testing.T) {
			p := sameNumbersPlan(t)
			p.KeepResults = keep
			checkSameNumbers(t, sameNumbersDigests(t, p))
		})
		if *updateNumbers {
			return
		}
	}
}

func checkSameNumbers(t *testing.T, got map[string]string) {
	path := filepath.Join(sameNumbersDir, "expected.json")
	if *updateNumbers {
		b, err := json.MarshalIndent(got, "", "  ")
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, append(b, '\n'), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var want map[string]string
	if err := json.Unmarshal(raw, &want); err != nil {
		t.Fatal(err)
	}
	var keys []string
	for k := range want {
		keys = append(keys, k)
	}
	for k := range got {
		if _, ok := want[k]; !ok {
			keys = append(keys, k)
		}
	}
	slices.Sort(keys)
	for _, k := range keys {
		if got[k] != want[k] {
			t.Errorf("%s: digest %.12s, want %.12s (expected.json)", k, got[k], want[k])
		}
	}
}
