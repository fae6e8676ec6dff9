package acuityfolder

import (
	"github.com/strialab/stria/train/runfolder"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

// testAcuityFolder is a small acuity folder with awkward values: a
// negative information, an infinite threshold, NaN spreads.
func testAcuityFolder() *AcuityFolder {
	nan, inf := math.NaN(), math.Inf(1)
	return &AcuityFolder{
		Info: AcuityInfo{Format: FormatAcuity, Stria: "test", Created: "2026-01-01T00:00:00Z", Seed: 3,
			Axis:    runfolder.AxisInfo{Name: "heading", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 3, Centers: []float64{60, 180, 300}, Edges: []float64{0, 120, 240, 360}},
			Sources: map[string]string{"responses": "r.npy"}, Neurons: 7, Trials: 30, Folds: 2, MaxSize: 16,
			InfoSizes: []int{2, 4}, Repeats: 2, DecodeSizes: []int{3, 7}, DecodeRepeats: 1,
			Saturation: AcuitySaturation{A: 0.1, Eps: 2, Asymptote: 0.5, Lo: 0.25, Hi: InfNum(inf), Boot: 100, RMS: 0.01, Extrapolation: true},
			Decoders:   []AcuityDecoderInfo{{Name: "lda", Description: "d, with \"quotes\"", Trials: 30, Accuracy: 0.5, MAE: 30, SEM: 4, RMSE: 50}},
			Seconds:    map[string]float64{"total": 1}, Cautions: []string{"c"}, Warnings: []string{}},
		Pairs: []InfoPair{
			{A: 0, B: 1, Stim: 120, Ds: 120, TA: 10, TB: 10, Size: 4, Info: -0.001, InfoSD: 0.002, SE: 0.003, Threshold: inf, Shuffled: 0.01, ShuffledSD: nan, ShuffledThreshold: 10},
			{A: 2, B: 0, Stim: 0, Ds: 120, TA: 10, TB: 10, Size: 4, Info: 0.04, InfoSD: 0.002, SE: 0.003, Threshold: 5, Shuffled: 0.01, ShuffledSD: 0.1, ShuffledThreshold: 10},
		},
		Sizes:       []InfoSize{{Size: 2, Info: 0.01, InfoSD: 0.001, Shuffled: 0.01, ShuffledSD: 0.001, Fit: 0.011}, {Size: 4, Info: 0.02, InfoSD: nan, Shuffled: 0.02, ShuffledSD: 0.002, Fit: nan}},
		Subsets:     []InfoSubset{{Repeat: 1, Size: 2, Pair: 0, Neurons: 2, Info: 1.0 / 3, Shuffled: -2}},
		DecodeSizes: []DecodeSize{{Decoder: "lda", Size: 3, Repeat: 1, MAE: 40, Accuracy: 0.4}, {Decoder: "lda", Size: 7, Repeat: 1, MAE: 30, Accuracy: 0.5}},
		Confusion:   [][]int{{5, 3, 2, 0, 10, 0, 1, 1, 8}},
	}
}

// nanFree replaces NaN by a fixed number, so that reflect.DeepEqual can
// compare the rest.
func nanFree(v []float64) {
	for i, x := range v {
		if math.IsNaN(x) {
			v[i] = -12345
		}
	}
}

func TestAcuityRoundTrip(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "acuity")
	want := testAcuityFolder()
	if err := BeginAcuity(dir, []byte("seed: 3\n")); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadAcuity(dir); err == nil || !strings.Contains(err.Error(), "incomplete") {
		t.Errorf("a folder without %s: got %v, want it refused as incomplete", runfolder.FileComplete, err)
	}
	if err := WriteAcuity(dir, want); err != nil {
		t.Fatal(err)
	}
	if !IsAcuity(dir) {
		t.Error("IsAcuity is false for an acuity folder")
	}
	got, err := ReadAcuity(dir)
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range []*AcuityFolder{want, got} {
		for i := range f.Pairs {
			p := &f.Pairs[i]
			v := []float64{p.Info, p.InfoSD, p.SE, p.Threshold, p.Shuffled, p.ShuffledSD, p.ShuffledThreshold}
			nanFree(v)
			p.Info, p.InfoSD, p.SE, p.Threshold, p.Shuffled, p.ShuffledSD, p.ShuffledThreshold = v[0], v[1], v[2], v[3], v[4], v[5], v[6]
		}
		for i := range f.Sizes {
			s := &f.Sizes[i]
			v := []float64{s.Info, s.InfoSD, s.Shuffled, s.ShuffledSD, s.Fit}
			nanFree(v)
			s.Info, s.InfoSD, s.Shuffled, s.ShuffledSD, s.Fit = v[0], v[1], v[2], v[3], v[4]
		}
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("read back\n%+v\nwant\n%+v", got, want)
	}
	b, err := os.ReadFile(filepath.Join(dir, FileAcuity))
	if err != nil || !strings.Contains(string(b), `"asymptote_hi95": "+Inf"`) {
		t.Errorf("%s: the infinite upper bound is not written \"+Inf\" (%v)", FileAcuity, err)
	}
	// Another folder's marker is refused, naming the format.
	if err := runfolder.Finish(dir, runfolder.FormatRun); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadAcuity(dir); err == nil || !strings.Contains(err.Error(), FormatAcuity) {
		t.Errorf("a folder marked %s: got %v, want an error naming %s", runfolder.FormatRun, err, FormatAcuity)
	}
	// A damaged table names the file and line.
	if err := runfolder.Finish(dir, FormatAcuity); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, FileDecodingVsSize)
	if err := os.WriteFile(path, []byte("decoder,size,repeat,mean_abs_error,accuracy\nlda,three,1,2,0.5\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadAcuity(dir); err == nil || !strings.Contains(err.Error(), FileDecodingVsSize) || !strings.Contains(err.Error(), "line 2") {
		t.Errorf("damaged table: got %v, want an error naming the file and line 2", err)
	}
}

// TestNamesKnownToRunfolder checks that every top-level name of an acuity
// folder is one runfolder.Empty may delete, and that runfolder tells the
// folder's kind by the same files.
func TestNamesKnownToRunfolder(t *testing.T) {
	for _, name := range []string{FileAcuity, FileInfoPairs, FileInfoVsSize, FileInfoSubsets, FileDecodingSummary, FileDecodingVsSize, FileConfusion} {
		if !runfolder.IsStriaName(name) {
			t.Errorf("got runfolder.IsStriaName(%q) false, want true", name)
		}
	}
	for _, name := range []string{FileAcuity, FileInfoPairs} {
		dir := t.TempDir()
		if err := os.WriteFile(filepath.Join(dir, name), nil, 0o644); err != nil {
			t.Fatal(err)
		}
		if k, err := runfolder.Kind(dir); k != KindAcuity || !IsAcuity(dir) {
			t.Errorf("a folder holding %s: got runfolder.Kind %q (%v), IsAcuity %v; want %q, true", name, k, err, IsAcuity(dir), KindAcuity)
		}
	}
}
