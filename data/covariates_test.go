package data

import (
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
)

// TestLoadCovariates: per-trial covariates load from a .npy (1-D or
// trials x covariates), from named CSV columns of the responses table
// (which are then not neurons) and from an .npz; bad shapes and missing
// names are refused with the file named.
func TestLoadCovariates(t *testing.T) {
	dir := t.TempDir()
	p := func(n string) string { return filepath.Join(dir, n) }
	y := []float32{1, 2, 3, 4, 5, 6, 7, 8}
	if err := format.WriteNPY(p("resp.npy"), []int{4, 2}, y); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(p("stim.npy"), []int{4}, []float64{0, 90, 180, 270}); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(p("speed.npy"), []int{4}, []float64{0, 5, 10, 2}); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(p("two.npy"), []int{4, 2}, []float64{0, 1, 5, 2, 10, 3, 2, 4}); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(p("wide.npy"), []int{2, 4}, []float64{0, 5, 10, 2, 1, 2, 3, 4}); err != nil {
		t.Fatal(err)
	}
	if err := format.WriteNPY64(p("short.npy"), []int{3}, []float64{0, 5, 10}); err != nil {
		t.Fatal(err)
	}
	csv := "stim,n1,speed,n2,pupil\n0,1,0,2,3\n90,3,5,4,2\n180,5,10,6,1\n270,7,2,8,0\n"
	if err := os.WriteFile(p("rec.csv"), []byte(csv), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name    string
		src     Source
		names   []string
		cols    [][]float64
		neurons []string
		err     string
	}{
		{name: "npy vector", src: Source{Responses: p("resp.npy"), Stimulus: p("stim.npy"), Covariates: p("speed.npy")},
			names: []string{"covariate_0"}, cols: [][]float64{{0, 5, 10, 2}}},
		{name: "npy named", src: Source{Responses: p("resp.npy"), Stimulus: p("stim.npy"), Covariates: p("two.npy"), CovariateColumns: []string{"speed", "pupil"}},
			names: []string{"speed", "pupil"}, cols: [][]float64{{0, 5, 10, 2}, {1, 2, 3, 4}}},
		{name: "csv columns of the responses", src: Source{Responses: p("rec.csv"), StimulusColumn: "stim", CovariateColumns: []string{"speed", "pupil"}},
			names: []string{"speed", "pupil"}, cols: [][]float64{{0, 5, 10, 2}, {3, 2, 1, 0}}, neurons: []string{"n1", "n2"}},
		{name: "transposed", src: Source{Responses: p("resp.npy"), Stimulus: p("stim.npy"), Covariates: p("wide.npy")},
			err: "save the transpose"},
		{name: "short", src: Source{Responses: p("resp.npy"), Stimulus: p("stim.npy"), Covariates: p("short.npy")},
			err: "short.npy has 3 values"},
		{name: "names do not match columns", src: Source{Responses: p("resp.npy"), Stimulus: p("stim.npy"), Covariates: p("two.npy"), CovariateColumns: []string{"speed"}},
			err: "two.npy holds 2 covariate columns but covariate_columns names 1"},
		{name: "csv without names", src: Source{Responses: p("rec.csv"), StimulusColumn: "stim", Covariates: p("rec.csv")},
			err: "data.covariate_columns"},
		{name: "missing column", src: Source{Responses: p("rec.csv"), StimulusColumn: "stim", CovariateColumns: []string{"pupl"}},
			err: "pupl"},
		{name: "neuron and covariate", src: Source{Responses: p("rec.csv"), StimulusColumn: "stim", NeuronColumns: []string{"n1", "speed"}, CovariateColumns: []string{"speed"}},
			err: "also a covariate column"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rec, err := Load(tc.src)
			if tc.err != "" {
				if err == nil || !strings.Contains(err.Error(), tc.err) {
					t.Fatalf("got error %v, want one containing %q", err, tc.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(rec.CovariateNames, tc.names) {
				t.Errorf("got names %v, want %v", rec.CovariateNames, tc.names)
			}
			for k := range tc.cols {
				if !slices.Equal(rec.Covariates[k], tc.cols[k]) {
					t.Errorf("covariate %d: got %v, want %v", k, rec.Covariates[k], tc.cols[k])
				}
			}
			if tc.neurons != nil && !slices.Equal(rec.Neurons, tc.neurons) {
				t.Errorf("got neurons %v, want %v", rec.Neurons, tc.neurons)
			}
			if tc.src.Covariates != "" && tc.src.Covariates != tc.src.Responses {
				found := false
				for _, f := range rec.Files() {
					found = found || f.Path == tc.src.Covariates
				}
				if !found {
					t.Errorf("the covariate file is not among the recording's files %v", rec.Files())
				}
			}
		})
	}
}
