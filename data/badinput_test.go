package data

import (
	"archive/zip"
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
)

// The bad-input catalogue: every way a recording can be wrong that stria
// refuses, each with the files to write, the source and check settings, and
// what the error must say. Every row must fail with an error that names
// the file (the first entry of want is the file name, checked for every
// row) and the field, line, trial or neuron; never with a panic, and without
// writing anything.
//
// To add a row: write the files with the helpers below (npy32, npy64,
// npyRaw, npz, or plain text for .csv/.tsv), give the Source with bare file
// names (they are resolved in a fresh folder), and list the fragments the
// message must contain. Leave axis nil for 4 bins on a periodic 0..360 deg
// axis.
//
// Rows marked "also:" repeat a case that a focused test checks in more
// detail (TestReadNPYBroken, TestReadTableErrors, TestLoadErrors,
// TestCheckErrors, TestCheckCounts, TestCheckUnitHints).

// badInput is one row of the catalogue.
type badInput struct {
	name  string
	files map[string][]byte
	src   Source       // file names relative to the row's folder
	axis  *Axis        // nil: direction 0..360 deg, periodic, 4 bins
	opt   CheckOptions // NBins and Axis are set from axis
	want  []string     // want[0]: the file the error names
}

// npyRaw is an .npy file with the header of descr and shape and the given
// data bytes (which may disagree with the header).
func npyRaw(descr string, shape []int, data []byte) []byte {
	return append(format.NPYHeaderBytes(descr, shape), data...)
}

// npy32 is a little-endian float32 .npy of the given shape.
func npy32(shape []int, v ...float32) []byte {
	b := format.NPYHeaderBytes("<f4", shape)
	for _, x := range v {
		b = binary.LittleEndian.AppendUint32(b, math.Float32bits(x))
	}
	return b
}

// npy64 is a little-endian float64 .npy vector.
func npy64(v ...float64) []byte {
	b := format.NPYHeaderBytes("<f8", []int{len(v)})
	for _, x := range v {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(x))
	}
	return b
}

// npz is a zip archive holding the named .npy entries (stored).
func npz(entries ...any) []byte {
	var buf bytes.Buffer
	z := zip.NewWriter(&buf)
	for i := 0; i < len(entries); i += 2 {
		w, err := z.CreateHeader(&zip.FileHeader{Name: entries[i].(string) + ".npy", Method: zip.Store})
		if err != nil {
			panic(err)
		}
		w.Write(entries[i+1].([]byte))
	}
	if err := z.Close(); err != nil {
		panic(err)
	}
	return buf.Bytes()
}

// good8 is a valid 8 x 3 response matrix (whole numbers >= 0) and stim8 a
// stimulus covering the four default bins twice.
var (
	good8 = func() []byte {
		v := make([]float32, 24)
		for i := range v {
			v[i] = float32(i % 5)
		}
		return npy32([]int{8, 3}, v...)
	}()
	stim8 = npy64(0, 90, 180, 270, 10, 100, 190, 280)
)

// with returns good8 with element i set to x.
func with(i int, x float32) []byte {
	v := make([]float32, 24)
	for j := range v {
		v[j] = float32(j % 5)
	}
	v[i] = x
	return npy32([]int{8, 3}, v...)
}

// csvRec is resp.csv with a stimulus column, a condition column, a block
// column and three neurons over 8 trials; row r (0-based) replaces data row
// r when given.
func csvRec(rows map[int]string) []byte {
	lines := []string{"stim,cond,block,n0,n1,n2"}
	for t := 0; t < 8; t++ {
		line := fmt.Sprintf("%d,%d,%d,%d,%d,%d", []int{0, 90, 180, 270}[t%4], t%4, t/4, t%3, t%5+1, t)
		if r, ok := rows[t]; ok {
			line = r
		}
		lines = append(lines, line)
	}
	return []byte(strings.Join(lines, "\n") + "\n")
}

func files(kv ...any) map[string][]byte {
	m := map[string][]byte{}
	for i := 0; i < len(kv); i += 2 {
		switch v := kv[i+1].(type) {
		case string:
			m[kv[i].(string)] = []byte(v)
		case []byte:
			m[kv[i].(string)] = v
		}
	}
	return m
}

var badInputs = []badInput{
	// --- .npy responses (also: TestReadNPYBroken) ---
	{name: "npy truncated", files: files("resp.npy", npyRaw("<f4", []int{8, 3}, make([]byte, 40)), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "header says 8x3 float32 = 96 bytes, file has 40 bytes of data"}},
	{name: "npy shape lies (more data)", files: files("resp.npy", npyRaw("<f4", []int{2, 3}, make([]byte, 96)), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "header says 2x3 float32 = 24 bytes, file has 96 bytes"}},
	{name: "npy huge shape", files: files("resp.npy", npyRaw("<f4", []int{4600, 24000}, make([]byte, 48)), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "4600x24000 float32 = 441600000 bytes, file has 48"}},
	{name: "npy not npy", files: files("resp.npy", "stim,n0\n0,1\n", "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "not a .npy file"}},
	{name: "npy 3-D", files: files("resp.npy", npyRaw("<f4", []int{2, 2, 2}, make([]byte, 32)), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "3 dimensions", "2x2x2"}},
	{name: "npy complex", files: files("resp.npy", npyRaw("<c8", []int{8, 3}, make([]byte, 192)), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "'<c8'", "not supported"}},
	{name: "npy object", files: files("resp.npy", npyRaw("|O", []int{8, 3}, make([]byte, 192)), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "'|O'", "not supported"}},
	{name: "npy no trials", files: files("resp.npy", npy32([]int{0, 3}), "stim.npy", npy64()),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "0x3", "at least one trial"}},
	{name: "npy no neurons", files: files("resp.npy", npy32([]int{8, 0}), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "8x0", "one neuron"}},
	{name: "missing file", files: files("stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "no such file"}},
	{name: "missing stimulus file", files: files("resp.npy", good8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"stim.npy", "no such file"}},
	{name: "unknown extension", files: files("resp.xlsx", "x", "stim.npy", stim8),
		src: Source{Responses: "resp.xlsx", Stimulus: "stim.npy"}, want: []string{"resp.xlsx", "unknown file type"}},
	{name: "unknown stimulus extension", files: files("resp.npy", good8, "stim.mat", "x"),
		src: Source{Responses: "resp.npy", Stimulus: "stim.mat"}, want: []string{"stim.mat", "unknown file type for the stimulus"}},

	// --- .npz ---
	{name: "npz no such array", files: files("rec.npz", npz("resp", good8, "stim", stim8)),
		src: Source{Responses: "rec.npz", ResponsesArray: "spikes", Stimulus: "rec.npz", StimulusColumn: "stim"}, want: []string{"rec.npz", `no array "spikes"`, "resp, stim"}},
	{name: "npz which array", files: files("rec.npz", npz("resp", good8, "stim", stim8)),
		src: Source{Responses: "rec.npz", Stimulus: "rec.npz", StimulusColumn: "stim"}, want: []string{"rec.npz", "holds 2 arrays", "say which one"}},
	{name: "npz not a zip", files: files("rec.npz", "not a zip", "stim.npy", stim8),
		src: Source{Responses: "rec.npz", Stimulus: "stim.npy"}, want: []string{"rec.npz", "not a valid .npz"}},
	{name: "npz truncated entry", files: files("rec.npz", npz("resp", good8[:len(good8)-8], "stim", stim8)),
		src: Source{Responses: "rec.npz", ResponsesArray: "resp", Stimulus: "rec.npz", StimulusColumn: "stim"}, want: []string{"rec.npz[resp]", "file has 88 bytes of data"}},

	// --- stimulus ---
	{name: "stimulus length", files: files("resp.npy", good8, "stim.npy", npy64(0, 90, 180, 270, 0, 90, 180)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"stim.npy", "resp.npy has 8 trials (rows) but the stimulus from", "has 7 values"}},
	{name: "responses transposed", files: files("resp.npy", npy32([]int{3, 8}, make([]float32, 24)...), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "has 3 trials (rows)", "8 values", "neurons x trials", "transpose"}},
	{name: "stimulus is a matrix", files: files("resp.npy", good8, "stim.npy", npy32([]int{8, 2}, make([]float32, 16)...)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"stim.npy", "expected a vector, got a 8x2 matrix"}},
	{name: "stimulus NaN", files: files("resp.npy", good8, "stim.npy", npy64(0, 90, 180, math.NaN(), 0, 90, 180, 270)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"stim.npy", "trial 3 (0-based)", "NaN is not a finite number"}},
	{name: "stimulus Inf", files: files("resp.npy", good8, "stim.npy", npy64(0, 90, 180, 270, math.Inf(-1), 90, 180, 270)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"stim.npy", "trial 4 (0-based)", "-Inf"}},
	{name: "stimulus empty cell", files: files("resp.csv", csvRec(map[int]string{2: ",2,0,1,1,1"})),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", ConditionColumn: "cond", BlockColumn: "block"}, want: []string{"resp.csv", `column "stim"`, "trial 2 (0-based)", "NaN"}},
	{name: "stimulus not a number", files: files("resp.csv", csvRec(map[int]string{5: "east,1,1,1,1,1"})),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", ConditionColumn: "cond", BlockColumn: "block"}, want: []string{"resp.csv", "line 7 (trial 5, 0-based)", `column "stim"`, `"east"`}},
	{name: "stimulus outside a bounded axis", files: files("resp.npy", good8, "stim.npy", npy64(0, 1, 2, 3, 0, 1, 2, 3.5)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, axis: &Axis{Name: "position", Unit: "m", Min: 0, Max: 3, Bins: 3},
		want: []string{"stim.npy", "trial 7 (0-based)", "3.5 is outside the position axis range [0, 3]"}},
	{name: "stimulus in radians", files: files("resp.npy", good8, "stim.npy", npy64(0, 1.57, 3.14, 4.71, 0, 1.57, 3.14, 4.71)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, axis: &Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 12},
		want: []string{"stim.npy", "11 of 12 stimulus bins have no trials", "look like radians"}},
	{name: "stimulus column missing", files: files("resp.csv", csvRec(nil)),
		src: Source{Responses: "resp.csv", StimulusColumn: "angle"}, want: []string{"resp.csv", `no column "angle"`, `"stim"`}},
	{name: "stimulus column not given", files: files("resp.csv", csvRec(nil)),
		src: Source{Responses: "resp.csv"}, want: []string{"resp.csv", "column name must be given"}},
	{name: "stimulus not given (.npy)", files: files("resp.npy", good8),
		src: Source{Responses: "resp.npy"}, want: []string{"resp.npy", "no stimulus file is given (data.stimulus)"}},
	{name: "stimulus array not given (.npz)", files: files("rec.npz", npz("resp", good8, "stim", stim8)),
		src: Source{Responses: "rec.npz", ResponsesArray: "resp"}, want: []string{"rec.npz", "array name must be given (data.stimulus_column)"}},
	{name: "stimulus array missing (.npz)", files: files("rec.npz", npz("resp", good8, "stim", stim8)),
		src: Source{Responses: "rec.npz", ResponsesArray: "resp", StimulusColumn: "angle"}, want: []string{"rec.npz", `no array "angle"`}},
	{name: "empty bins", files: files("resp.npy", good8, "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, axis: &Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 8},
		want: []string{"stim.npy", "4 of 8 stimulus bins have no trials", "bin 1 [45, 90) deg", "use wider bins"}},

	// --- response values (also: TestCheckErrors, TestCheckCounts) ---
	{name: "response NaN", files: files("resp.npy", with(3*3+1, float32(math.NaN())), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "1 non-finite", "trial 3, neuron 1: NaN", "0-based"}},
	{name: "response Inf", files: files("resp.npy", with(23, float32(math.Inf(1))), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, want: []string{"resp.npy", "trial 7, neuron 2: +Inf"}},
	{name: "response empty cell", files: files("resp.csv", csvRec(map[int]string{4: "0,0,1,1,,4"})),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", ConditionColumn: "cond", BlockColumn: "block"}, want: []string{"resp.csv", `trial 4, neuron 1 ("n1"): NaN`}},
	{name: "response not a number", files: files("resp.csv", csvRec(map[int]string{1: "90,1,0,1,2,x7"})),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", ConditionColumn: "cond", BlockColumn: "block"}, want: []string{"resp.csv", "line 3 (trial 1, 0-based)", `column "n2"`, `"x7"`}},
	{name: "counts negative", files: files("resp.npy", with(2*3+2, -1), "stim.npy", stim8),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy"}, opt: CheckOptions{Counts: true}, want: []string{"resp.npy", "not counts", "trial 2, neuron 2: -1"}},
	{name: "counts fraction", files: files("resp.csv", csvRec(map[int]string{6: "180,2,1,0,2.5,6"})),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", ConditionColumn: "cond", BlockColumn: "block"}, opt: CheckOptions{Counts: true},
		want: []string{"resp.csv", "not counts", `trial 6, neuron 1 ("n1"): 2.5`}},

	// --- table structure (also: TestReadTableErrors, TestLoadErrors) ---
	{name: "csv ragged", files: files("resp.csv", csvRec(map[int]string{3: "270,3,0,0,4"})),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim"}, want: []string{"resp.csv", "line 5", "wrong number of fields"}},
	{name: "csv duplicate column", files: files("resp.csv", "stim,n0,n0\n0,1,2\n"),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim"}, want: []string{"resp.csv", `"n0" appears twice`, "columns 2 and 3"}},
	{name: "csv duplicate after trimming", files: files("resp.tsv", "stim\tn0\t n0 \n0\t1\t2\n"),
		src: Source{Responses: "resp.tsv", StimulusColumn: "stim"}, want: []string{"resp.tsv", `"n0" appears twice`}},
	{name: "csv unnamed column", files: files("resp.csv", ",stim,n0\n0,0,1\n"),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim"}, want: []string{"resp.csv", "column 1 (1-based) has no name"}},
	{name: "csv empty", files: files("resp.csv", ""),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim"}, want: []string{"resp.csv", "file is empty"}},
	{name: "csv header only", files: files("resp.csv", "stim,n0\n"),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim"}, want: []string{"resp.csv", "no data rows"}},
	{name: "csv bad quote", files: files("resp.csv", "stim,n0\n0,\"1\n"),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim"}, want: []string{"resp.csv", "line 2"}},
	{name: "neuron_columns twice", files: files("resp.csv", csvRec(nil)),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", NeuronColumns: []string{"n0", "n1", "n0"}}, want: []string{"resp.csv", `neuron_columns names "n0" twice`, "entries 0 and 2"}},
	{name: "neuron_columns stimulus", files: files("resp.csv", csvRec(nil)),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", NeuronColumns: []string{"n0", "stim"}}, want: []string{"resp.csv", `"stim"`, "also the stimulus column"}},
	{name: "neuron_columns block", files: files("resp.csv", csvRec(nil)),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", BlockColumn: "block", NeuronColumns: []string{"block", "n0"}}, want: []string{"resp.csv", "entry 0", "also the block column"}},
	{name: "neuron_columns empty", files: files("resp.csv", csvRec(nil)),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", NeuronColumns: []string{"n0", " "}}, want: []string{"resp.csv", "neuron_columns entry 1 (0-based)", "empty"}},
	{name: "neuron_columns unknown", files: files("resp.csv", csvRec(nil)),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", NeuronColumns: []string{"n0", "n9"}}, want: []string{"resp.csv", `no column "n9"`}},

	// --- condition and block ids ---
	{name: "condition fraction", files: files("resp.npy", good8, "stim.npy", stim8, "cond.npy", npy64(0, 1, 2, 3, 0, 1.5, 2, 3)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy", Condition: "cond.npy"}, want: []string{"cond.npy", "condition value 1.5 at trial 5 (0-based) is not a whole number"}},
	{name: "condition NaN", files: files("resp.npy", good8, "stim.npy", stim8, "cond.npy", npy64(0, 1, math.NaN(), 3, 0, 1, 2, 3)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy", Condition: "cond.npy"}, want: []string{"cond.npy", "NaN at trial 2 (0-based)"}},
	{name: "condition empty cell", files: files("resp.csv", csvRec(map[int]string{0: "0,,0,0,1,0"})),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", ConditionColumn: "cond"}, want: []string{"resp.csv", "line 2 (trial 0, 0-based)", `column "cond"`, "integer"}},
	{name: "condition length", files: files("resp.npy", good8, "stim.npy", stim8, "cond.npy", npy64(0, 1, 2, 3)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy", Condition: "cond.npy"}, want: []string{"cond.npy", "8 trials", "condition from", "has 4 values"}},
	{name: "condition column missing", files: files("resp.npy", good8, "stim.csv", "stim\n0\n90\n180\n270\n0\n90\n180\n270\n"),
		src: Source{Responses: "resp.npy", Stimulus: "stim.csv", StimulusColumn: "stim", ConditionColumn: "cond"}, want: []string{"stim.csv", `no column "cond"`}},
	{name: "block fraction", files: files("resp.csv", csvRec(map[int]string{7: "270,3,1.25,1,3,7"})),
		src: Source{Responses: "resp.csv", StimulusColumn: "stim", BlockColumn: "block"}, want: []string{"resp.csv", "line 9 (trial 7, 0-based)", `column "block"`, "integer"}},
	{name: "block Inf", files: files("resp.npy", good8, "stim.npy", stim8, "block.npy", npy64(0, 0, 0, 0, math.Inf(1), 1, 1, 1)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy", Block: "block.npy"}, want: []string{"block.npy", "+Inf at trial 4 (0-based)"}},
	{name: "block huge", files: files("resp.npy", good8, "stim.npy", stim8, "block.npy", npy64(0, 0, 0, 0, 1e300, 1, 1, 1)),
		src: Source{Responses: "resp.npy", Stimulus: "stim.npy", Block: "block.npy"}, want: []string{"block.npy", "1e+300 at trial 4 (0-based) is not a whole number"}},
}

// loadAndCheck is the data part of preparing a fit, as train does it:
// load, bin on the axis, check.
func loadAndCheck(src Source, ax Axis, opt CheckOptions) error {
	rec, err := Load(src)
	if err != nil {
		return err
	}
	cond, err := rec.Bin(ax)
	if err != nil {
		return err
	}
	opt.NBins, opt.Axis = ax.NumBins(), &ax
	_, err = CheckWith(rec, cond, opt)
	return err
}

func TestBadInputCatalogue(t *testing.T) {
	names := map[string]bool{}
	for _, c := range badInputs {
		if names[c.name] {
			t.Fatalf("two rows are called %q", c.name)
		}
		names[c.name] = true
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			for name, b := range c.files {
				if err := os.WriteFile(filepath.Join(dir, name), b, 0o644); err != nil {
					t.Fatal(err)
				}
			}
			before := listDir(t, dir)
			src := c.src
			for _, p := range []*string{&src.Responses, &src.Stimulus, &src.Condition, &src.Block} {
				if *p != "" {
					*p = filepath.Join(dir, *p)
				}
			}
			ax := Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 4}
			if c.axis != nil {
				ax = *c.axis
			}
			var err error
			func() {
				defer func() {
					if r := recover(); r != nil {
						t.Fatalf("panic: %v", r)
					}
				}()
				err = loadAndCheck(src, ax, c.opt)
			}()
			if err == nil {
				t.Fatal("accepted")
			}
			msg := err.Error()
			t.Log(strings.ReplaceAll(msg, dir+"/", ""))
			if !strings.Contains(msg, filepath.Join(dir, c.want[0])) {
				t.Errorf("error %q does not name the file %s", msg, c.want[0])
			}
			for _, w := range c.want[1:] {
				if !strings.Contains(msg, w) {
					t.Errorf("error %q does not contain %q", msg, w)
				}
			}
			if after := listDir(t, dir); !slices.Equal(before, after) {
				t.Errorf("the folder changed: %v -> %v", before, after)
			}
		})
	}
}

// listDir lists the names and sizes in dir.
func listDir(t *testing.T, dir string) []string {
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, e := range ents {
		info, err := e.Info()
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, fmt.Sprintf("%s:%d", e.Name(), info.Size()))
	}
	return out
}

// TestBadInputCatalogueGoodBase makes sure the catalogue's good building
// blocks pass, so that each row fails for its own reason.
func TestBadInputCatalogueGoodBase(t *testing.T) {
	dir := t.TempDir()
	for name, b := range files("resp.npy", good8, "stim.npy", stim8, "resp.csv", csvRec(nil), "rec.npz", npz("resp", good8, "stim", stim8)) {
		if err := os.WriteFile(filepath.Join(dir, name), b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	ax := Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 4}
	for _, src := range []Source{
		{Responses: "resp.npy", Stimulus: "stim.npy"},
		{Responses: "resp.csv", StimulusColumn: "stim", ConditionColumn: "cond", BlockColumn: "block"},
		{Responses: "resp.csv", StimulusColumn: "stim", NeuronColumns: []string{"n0", "n2"}},
		{Responses: "rec.npz", ResponsesArray: "resp", Stimulus: "rec.npz", StimulusColumn: "stim"},
	} {
		for _, p := range []*string{&src.Responses, &src.Stimulus} {
			if *p != "" {
				*p = filepath.Join(dir, *p)
			}
		}
		if err := loadAndCheck(src, ax, CheckOptions{Counts: true, Hash: true}); err != nil {
			t.Errorf("%+v: %v", src, err)
		}
	}
}
