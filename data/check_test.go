package data

import (
	"encoding/binary"
	"math"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
)

func smallRecording() (*Recording, []int) {
	// 8 trials x 3 neurons; 4 conditions with 2 trials each; neuron 2 constant.
	y := NewMatrix(8, 3)
	for t := 0; t < 8; t++ {
		y.Data[t*3] = float32(t)
		y.Data[t*3+1] = float32(t % 3)
		y.Data[t*3+2] = 5
	}
	rec := &Recording{Y: y, Stim: []float64{0, 90, 180, 270, 1, 91, 181, 271},
		Neurons: []string{"a", "b", "c"}, Source: Source{Responses: "resp.csv"}}
	return rec, []int{0, 1, 2, 3, 0, 1, 2, 3}
}

func TestCheckWarnings(t *testing.T) {
	rec, cond := smallRecording()
	rep, err := Check(rec, cond, 4)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(rep.Constant, []int{2}) || len(rep.FewTrials) != 0 {
		t.Errorf("Constant %v FewTrials %v, want [2] and none", rep.Constant, rep.FewTrials)
	}
	if len(rep.Warnings) != 1 || !strings.Contains(rep.Warnings[0], `neuron 2 ("c")`) {
		t.Errorf("warnings %q", rep.Warnings)
	}
	rep, err = CheckWith(rec, cond, CheckOptions{NBins: 4, MinTrials: 3})
	if err != nil || len(rep.FewTrials) != 4 {
		t.Errorf("MinTrials 3: FewTrials %v, %v; want all four", rep.FewTrials, err)
	}
	rec.Block = []int{0, 0, 0, 0, 1, 1, 1, 2}
	rep, _ = Check(rec, cond, 4)
	if !strings.Contains(strings.Join(rep.Warnings, "|"), "1 of 3 block ids hold a single trial") {
		t.Errorf("warnings %q", rep.Warnings)
	}
}

func TestCheckErrors(t *testing.T) {
	ax := &Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 8}
	cases := []struct {
		name   string
		change func(r *Recording, cond []int) ([]int, CheckOptions)
		want   []string
	}{
		{"nan", func(r *Recording, c []int) ([]int, CheckOptions) {
			r.Y.Data[5*3+1] = float32(math.NaN())
			r.Y.Data[7*3] = float32(math.Inf(1))
			return c, CheckOptions{NBins: 4}
		}, []string{"resp.csv", "2 non-finite", `trial 5, neuron 1 ("b"): NaN`, `trial 7, neuron 0 ("a"): +Inf`, "0-based"}},
		{"stim nan", func(r *Recording, c []int) ([]int, CheckOptions) {
			r.Stim[3] = math.NaN()
			return c, CheckOptions{NBins: 4}
		}, []string{"stimulus of trial 3 (0-based) is NaN"}},
		{"empty bins", func(r *Recording, c []int) ([]int, CheckOptions) {
			return []int{0, 1, 2, 3, 0, 1, 2, 3}, CheckOptions{NBins: 8, Axis: ax}
		}, []string{"4 of 8 stimulus bins have no trials", "bin 4 [180, 225) deg", "bin 7 [315, 360) deg"}},
		{"cond range", func(r *Recording, c []int) ([]int, CheckOptions) {
			c[6] = 9
			return c, CheckOptions{NBins: 4}
		}, []string{"trial 6 (0-based) has condition 9"}},
		{"cond length", func(r *Recording, c []int) ([]int, CheckOptions) {
			return c[:3], CheckOptions{NBins: 4}
		}, []string{"3 condition ids for 8 trials"}},
		{"stim length", func(r *Recording, c []int) ([]int, CheckOptions) {
			r.Stim = r.Stim[:2]
			return c, CheckOptions{NBins: 4}
		}, []string{"resp.csv has 8 trials but 2 stimulus values"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rec, cond := smallRecording()
			cond, opt := c.change(rec, cond)
			rep, err := CheckWith(rec, cond, opt)
			if rep == nil {
				t.Error("nil report")
			}
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
		})
	}
}

func TestCheckCounts(t *testing.T) {
	rec, cond := smallRecording() // whole numbers >= 0: accepted as counts
	if _, err := CheckWith(rec, cond, CheckOptions{NBins: 4, Counts: true}); err != nil {
		t.Fatalf("counts refused: %v", err)
	}
	cases := []struct {
		name string
		set  map[int]float32 // element -> value
		want []string
	}{
		{"negative", map[int]float32{4*3 + 2: -1}, []string{"resp.csv", "1 response value(s) are not counts", `trial 4, neuron 2 ("c"): -1`, "poisson"}},
		{"fraction", map[int]float32{1: 0.5, 7*3 + 1: 2.25}, []string{"2 response value(s)", `trial 0, neuron 1 ("b"): 0.5`, `trial 7, neuron 1 ("b"): 2.25`}},
		// Non-finite values are reported first, as without Counts.
		{"nan first", map[int]float32{0: -3, 5: float32(math.NaN())}, []string{"1 non-finite response value(s)", `trial 1, neuron 2 ("c"): NaN`}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rec, cond := smallRecording()
			for i, v := range c.set {
				rec.Y.Data[i] = v
			}
			if _, err := CheckWith(rec, cond, CheckOptions{NBins: 4}); err != nil && c.name != "nan first" {
				t.Errorf("without Counts: %v", err)
			}
			_, err := CheckWith(rec, cond, CheckOptions{NBins: 4, Counts: true})
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
		})
	}
}

func TestCheckUnitHints(t *testing.T) {
	deg := &Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 12}
	rec, _ := smallRecording()
	for i := range rec.Stim {
		rec.Stim[i] = float64(i%4) * math.Pi / 2 // radians, 0 .. 3 pi/2
	}
	cond, err := deg.BinTrials(rec.Stim)
	if err != nil {
		t.Fatal(err)
	}
	_, err = CheckWith(rec, cond, CheckOptions{NBins: 12, Axis: deg})
	for _, w := range []string{"11 of 12 stimulus bins have no trials", "use wider bins", "between 0 and 4.712", "look like radians", "x 180/pi", "axis.max 6.283"} {
		if err == nil || !strings.Contains(err.Error(), w) {
			t.Errorf("radians on a degree axis: error %v, want %q", err, w)
		}
	}
	// Degrees on a radian axis wrap into every bin: only a warning says so.
	rad := &Axis{Name: "direction", Unit: "rad", Min: 0, Max: 2 * math.Pi, Periodic: true, Bins: 4}
	rec, _ = smallRecording() // stimulus 0, 90, 180, 270 degrees and 1, 91, ...
	cond, err = rad.BinTrials(rec.Stim)
	if err != nil {
		t.Fatal(err)
	}
	rep, _ := CheckWith(rec, cond, CheckOptions{NBins: 4, Axis: rad})
	if w := strings.Join(rep.Warnings, "|"); !strings.Contains(w, "6 of 8 stimulus values lie more than two periods outside the direction axis 0..6.283 (the first: 90)") {
		t.Errorf("degrees on a radian axis: warnings %q", rep.Warnings)
	}
	// In range: no hint, no warning.
	rec, cond = smallRecording()
	rep, err = CheckWith(rec, cond, CheckOptions{NBins: 4, Axis: &Axis{Min: 0, Max: 360, Periodic: true, Bins: 4}})
	if err != nil || strings.Contains(strings.Join(rep.Warnings, "|"), "periods") {
		t.Errorf("degrees on a degree axis: %v %q", err, rep.Warnings)
	}
}

// TestScanPieces compares the piecewise parallel scan with a direct loop on
// a matrix of several pieces, with refused values on both sides of piece
// boundaries, for one, two and seven workers.
func TestScanPieces(t *testing.T) {
	rows, cols := 900, 3001 // 2.7 M values: three pieces, rows across the boundaries
	y := NewMatrix(rows, cols)
	for i := range y.Data {
		y.Data[i] = float32(i % 97)
	}
	piece := format.HashPieceBytes / 4
	bad := []int{3, piece - 1, piece, piece + 1, 2*piece - 2, len(y.Data) - 1}
	for k, i := range bad {
		y.Data[i] = []float32{float32(math.NaN()), -0.5}[k%2]
	}
	y.Data[12345] = float32(math.Inf(-1))
	var wantNF, wantNC []badValue
	for i, v := range y.Data {
		switch {
		case v != v || math.IsInf(float64(v), 0):
			wantNF = append(wantNF, badValue{i / cols, i % cols, float64(v)})
		case v < 0:
			wantNC = append(wantNC, badValue{i / cols, i % cols, float64(v)})
		}
	}
	// The file of y as an .npy, for the pass that hashes while it scans:
	// the header shifts the 4 MiB pieces against the values.
	file := format.NPYHeaderBytes("<f4", []int{rows, cols})
	off := len(file)
	for _, v := range y.Data {
		file = binary.LittleEndian.AppendUint32(file, math.Float32bits(v))
	}
	wantHash, _ := format.HashBytes(file)
	for _, run := range []struct {
		procs  int
		hashed bool
	}{{1, false}, {2, false}, {7, false}, {1, true}, {2, true}, {7, true}} {
		procs := run.procs
		prev := runtime.GOMAXPROCS(procs)
		var sc scan
		var err error
		if run.hashed {
			sc, err = scanResponses(y, 10, true, file, off)
			if sc.hash != wantHash {
				t.Errorf("%d workers: hash %s, want %s", procs, sc.hash, wantHash)
			}
		} else {
			sc, err = scanResponses(y, 10, true, nil, 0)
		}
		runtime.GOMAXPROCS(prev)
		if err != nil {
			t.Fatal(err)
		}
		if sc.bad != len(wantNF) || sc.notCount != len(wantNC) {
			t.Errorf("%d workers: %d non-finite and %d non-counts, want %d and %d", procs, sc.bad, sc.notCount, len(wantNF), len(wantNC))
		}
		for i := range wantNF {
			if i >= len(sc.first) || sc.first[i].t != wantNF[i].t || sc.first[i].n != wantNF[i].n {
				t.Errorf("%d workers: non-finite values %v, want %v", procs, sc.first, wantNF)
				break
			}
		}
		if !slices.Equal(sc.firstNC, wantNC) {
			t.Errorf("%d workers: non-counts %v, want %v", procs, sc.firstNC, wantNC)
		}
		for n := 0; n < cols; n += 499 {
			lo, hi := float32(math.Inf(1)), float32(math.Inf(-1))
			for r := 0; r < rows; r++ {
				v := y.Data[r*cols+n]
				if v-v == 0 || math.IsInf(float64(v), 0) {
					lo, hi = min(lo, v), max(hi, v)
				}
			}
			if sc.min[n] != lo || sc.max[n] != hi {
				t.Errorf("%d workers: neuron %d min/max %v %v, want %v %v", procs, n, sc.min[n], sc.max[n], lo, hi)
			}
		}
	}
}
