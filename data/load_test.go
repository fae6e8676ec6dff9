package data

import (
	"strings"
	"testing"
)

func TestLoadCSV(t *testing.T) {
	rec, err := Load(Source{Responses: fixture("rec.csv"), StimulusColumn: "stim", ConditionColumn: "cond", BlockColumn: "block"})
	if err != nil {
		t.Fatal(err)
	}
	// rec.csv (gen_npy.py): columns stim,cond,block,n0,n1,n2 and 4 rows.
	if strings.Join(rec.Neurons, ",") != "n0,n1,n2" {
		t.Errorf("neurons %v, want n0 n1 n2 (stimulus, condition and block columns excluded)", rec.Neurons)
	}
	if rec.Y.Rows != 4 || rec.Y.Cols != 3 || rec.Y.Data[3] != 2.5 {
		t.Errorf("Y = %+v", rec.Y)
	}
	if rec.Stim[3] != 270 || rec.Cond[2] != 2 || rec.Block[3] != 1 {
		t.Errorf("stim %v cond %v block %v", rec.Stim, rec.Cond, rec.Block)
	}
	rec, err = Load(Source{Responses: fixture("rec.csv"), NeuronColumns: []string{"n2", "n0"}, StimulusColumn: "stim"})
	if err != nil || rec.Y.Cols != 2 || rec.Y.Data[1] != 1.5 || rec.Cond != nil || rec.Block != nil {
		t.Errorf("explicit neuron columns: %+v, %v", rec, err)
	}
}

func TestLoadNPZ(t *testing.T) {
	src := Source{Responses: fixture("rec_compressed.npz"), ResponsesArray: "resp", StimulusColumn: "stim", ConditionColumn: "cond"}
	rec, err := Load(src)
	if err != nil {
		t.Fatal(err)
	}
	// rec_compressed.npz (gen_npy.py): resp 6x4, stim [10 100 190 280 11 101], cond [0 1 2 3 0 1].
	if rec.Y.Rows != 6 || rec.Y.Cols != 4 || rec.Stim[4] != 11 || rec.Cond[3] != 3 || rec.Neurons != nil {
		t.Errorf("got %+v", rec)
	}
	// Stimulus from a separate .npy file; responses from .npz.
	_, err = Load(Source{Responses: fixture("rec.npz"), ResponsesArray: "resp", Stimulus: fixture("stim_1d.npy")})
	for _, w := range []string{"rec.npz has 6 trials", "stimulus from ../testdata/data/stim_1d.npy has 8 values"} {
		if err == nil || !strings.Contains(err.Error(), w) {
			t.Errorf("length mismatch error %v, want it to contain %q", err, w)
		}
	}
}

func TestLoadErrors(t *testing.T) {
	cases := []struct {
		src  Source
		want string
	}{
		{Source{}, "no responses file"},
		{Source{Responses: fixture("pandas_index.csv"), StimulusColumn: "stim"}, "column 1 (1-based) has no name"},
		{Source{Responses: fixture("rec.csv")}, "column name must be given"},
		{Source{Responses: fixture("rec.csv"), StimulusColumn: "stim", ConditionColumn: "n0"}, "integer"},
		{Source{Responses: fixture("f4_c_le_v1.npy"), Stimulus: fixture("f4_c_be_v1.npy")}, "expected a vector, got a 3x4 matrix"},
		{Source{Responses: fixture("empty_0x3.npy"), Stimulus: fixture("stim_1d.npy")}, "0x3"},
		{Source{Responses: fixture("rec.xlsx")}, "unknown file type"},
		{Source{Responses: fixture("rec.npz"), ResponsesArray: "resp", Stimulus: fixture("rec.npz"), StimulusColumn: "stim",
			Condition: fixture("stim_1d.npy")}, "not a whole number"},
	}
	for _, c := range cases {
		_, err := Load(c.src)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("Load(%+v) error = %v, want it to contain %q", c.src, err, c.want)
		}
	}
}

func TestReadIntVector(t *testing.T) {
	// rec.npz cond = [0 1 2 3 0 1] (int64, gen_npy.py); rec.csv block = 0,0,1,1.
	v, err := ReadIntVector(fixture("rec.npz"), "cond")
	if err != nil || len(v) != 6 || v[3] != 3 || v[5] != 1 {
		t.Errorf("npz: %v, %v", v, err)
	}
	v, err = ReadIntVector(fixture("rec.csv"), "block")
	if err != nil || len(v) != 4 || v[2] != 1 {
		t.Errorf("csv: %v, %v", v, err)
	}
	_, err = ReadIntVector(fixture("stim_1d.npy"), "")
	if err == nil || !strings.Contains(err.Error(), "5.999 at trial 1 (0-based) is not a whole number") {
		t.Errorf("non-integer ids: %v", err)
	}
}
