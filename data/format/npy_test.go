package format

import (
	"bytes"
	"encoding/json"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// fixtureDir holds the files written by testdata/data/gen_npy.py (numpy).
const fixtureDir = "../../testdata/data"

func fixture(name string) string { return filepath.Join(fixtureDir, name) }

type npyExpect struct {
	Shape        []int     `json:"shape"`
	Dtype        string    `json:"dtype"`
	FortranOrder bool      `json:"fortran_order"`
	Version      []int     `json:"version"`
	Values       []float64 `json:"values"`
}

type expectFile struct {
	Numpy  string                          `json:"numpy"`
	NPY    map[string]npyExpect            `json:"npy"`
	NPZ    map[string]map[string]npyExpect `json:"npz"`
	Tables map[string]struct {
		Columns []string              `json:"columns"`
		Values  map[string][]*float64 `json:"values"`
	} `json:"tables"`
}

func loadExpected(t testing.TB) *expectFile {
	t.Helper()
	b, err := os.ReadFile(fixture("expected.json"))
	if err != nil {
		t.Fatal(err)
	}
	var e expectFile
	if err := json.Unmarshal(b, &e); err != nil {
		t.Fatal(err)
	}
	return &e
}

// TestReadNPYFixtures reads every valid numpy-written fixture and compares
// with the values numpy.load returned (expected.json; numpy 1.24.2,
// testdata/data/gen_npy.py). Tolerance: exact. The expected values are exact
// float64 copies of each array's elements, and converting them to float32
// rounds to nearest in both numpy and Go, so any difference is a bug.
func TestReadNPYFixtures(t *testing.T) {
	e := loadExpected(t)
	if len(e.NPY) < 25 {
		t.Fatalf("only %d .npy fixtures in expected.json", len(e.NPY))
	}
	for name, want := range e.NPY {
		t.Run(name, func(t *testing.T) {
			m, err := ReadNPY(fixture(name))
			if err != nil {
				t.Fatal(err)
			}
			rows, cols := want.Shape[0], 1
			if len(want.Shape) == 2 {
				cols = want.Shape[1]
			}
			if m.Rows != rows || m.Cols != cols {
				t.Fatalf("shape %dx%d, want %v", m.Rows, m.Cols, want.Shape)
			}
			if len(m.Data) != len(want.Values) {
				t.Fatalf("%d values, want %d", len(m.Data), len(want.Values))
			}
			for i, v := range want.Values {
				if m.Data[i] != float32(v) {
					t.Fatalf("value %d (row %d, col %d) = %v, want %v (numpy)", i, i/max(cols, 1), i%max(cols, 1), m.Data[i], float32(v))
				}
			}
			if rows > 0 && (cols == 1 || rows == 1) {
				// float64 path: exact float64 values.
				v, err := readNPY64File(fixture(name))
				if err != nil {
					t.Fatal(err)
				}
				for i := range v {
					if v[i] != want.Values[i] {
						t.Fatalf("ReadNPY64 value %d = %v, want %v (numpy)", i, v[i], want.Values[i])
					}
				}
			}
		})
	}
}

// TestReadNPYBroken checks that hand-broken files (gen_npy.py describes how
// each was made) give an error naming the file and the problem, not a panic.
func TestReadNPYBroken(t *testing.T) {
	cases := []struct {
		file string
		want []string // fragments of the error message
	}{
		{"broken_truncated.npy", []string{"header says 3x4 float32 = 48 bytes, file has 43 bytes of data"}},
		{"broken_magic.npy", []string{"not a .npy file"}},
		{"broken_version.npy", []string{"version 4.0 is not supported"}},
		{"broken_extra.npy", []string{"file has 52 bytes of data"}},
		{"broken_lying_shape.npy", []string{"header says 4600x24000 float32 = 441600000 bytes, file has 48 bytes of data"}},
		{"broken_header_len.npy", []string{"header length 4294967295 bytes"}},
		{"broken_3d.npy", []string{"3 dimensions", "2x3x2"}},
		{"broken_complex.npy", []string{"'<c8'", "not supported"}},
		{"broken_structured.npy", []string{"structured"}},
		{"broken_nokey.npy", []string{"'fortran_order'"}},
		{"broken_dict.npy", []string{"expected ',' or '}'"}},
		{"broken_object.npy", []string{"'|O'", "not supported"}},
		{"no_such_file.npy", []string{"no such file"}},
	}
	for _, c := range cases {
		t.Run(c.file, func(t *testing.T) {
			_, err := ReadNPY(fixture(c.file))
			if err == nil {
				t.Fatal("no error")
			}
			msg := err.Error()
			if !strings.Contains(msg, c.file) {
				t.Errorf("error %q does not name the file", msg)
			}
			for _, w := range c.want {
				if !strings.Contains(msg, w) {
					t.Errorf("error %q does not contain %q", msg, w)
				}
			}
			if c.file != "no_such_file.npy" && !errors.Is(err, ErrFormat) {
				t.Errorf("error %q does not wrap ErrFormat", msg)
			}
		})
	}
}

// TestReadNPZ checks .npz reading against numpy.savez and
// numpy.savez_compressed (expected.json, numpy 1.24.2). Tolerance: exact, as
// in TestReadNPYFixtures.
func TestReadNPZ(t *testing.T) {
	e := loadExpected(t)
	for file, arrays := range e.NPZ {
		for name, want := range arrays {
			t.Run(file+"/"+name, func(t *testing.T) {
				m, err := ReadNPZ(fixture(file), name)
				if err != nil {
					t.Fatal(err)
				}
				if len(m.Data) != len(want.Values) {
					t.Fatalf("%d values, want %d", len(m.Data), len(want.Values))
				}
				for i, v := range want.Values {
					if m.Data[i] != float32(v) {
						t.Fatalf("value %d = %v, want %v", i, m.Data[i], v)
					}
				}
				if len(want.Shape) == 1 {
					var v []float64
					err := WithNPZEntry(fixture(file), name, func(r io.Reader, size int64, label string) error {
						var err error
						_, _, v, err = ReadNPY64(r, size, label)
						return err
					})
					if err != nil {
						t.Fatal(err)
					}
					for i := range v {
						if v[i] != want.Values[i] {
							t.Fatalf("ReadNPY64 value %d = %v, want %v", i, v[i], want.Values[i])
						}
					}
				}
			})
		}
	}
	if _, err := ReadNPZ(fixture("single.npz"), ""); err != nil {
		t.Errorf("single.npz with empty name: %v", err)
	}
	names, err := NPZNames(fixture("rec.npz"))
	if err != nil || strings.Join(names, ",") != "cond,resp,stim" {
		t.Errorf("NPZNames = %v, %v; want [cond resp stim]", names, err)
	}
	bad := []struct{ file, name, want string }{
		{"rec.npz", "", "holds 3 arrays (cond, resp, stim)"},
		{"rec.npz", "spikes", `no array "spikes" (it has: cond, resp, stim)`},
		{"broken_entry.npz", "resp", "broken_entry.npz[resp]"},
		{"broken_notzip.npz", "resp", "not a valid .npz"},
	}
	for _, c := range bad {
		_, err := ReadNPZ(fixture(c.file), c.name)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("ReadNPZ(%s, %q) error = %v, want it to contain %q", c.file, c.name, err, c.want)
		}
	}
}

// TestWriteNPYMatchesNumpy checks that WriteNPY writes byte for byte what
// numpy.save wrote for the same array (f4_c_le_v1.npy and stim_1d.npy from
// gen_npy.py, numpy 1.24.2): same header dict, padding to 64 bytes, data.
func TestWriteNPYMatchesNumpy(t *testing.T) {
	e := loadExpected(t)
	dir := t.TempDir()

	w32 := e.NPY["f4_c_le_v1.npy"]
	d32 := make([]float32, len(w32.Values))
	for i, v := range w32.Values {
		d32[i] = float32(v)
	}
	p := filepath.Join(dir, "a.npy")
	if err := WriteNPY(p, w32.Shape, d32); err != nil {
		t.Fatal(err)
	}
	sameBytes(t, p, fixture("f4_c_le_v1.npy"))

	w64 := e.NPY["stim_1d.npy"]
	p = filepath.Join(dir, "b.npy")
	if err := WriteNPY64(p, w64.Shape, w64.Values); err != nil {
		t.Fatal(err)
	}
	sameBytes(t, p, fixture("stim_1d.npy"))

	// Only the two files: no temporary file is left behind.
	ents, _ := os.ReadDir(dir)
	if len(ents) != 2 {
		t.Errorf("%d entries in the folder after writing, want 2", len(ents))
	}
	// Overwriting replaces the file; a missing folder is an error.
	if err := WriteNPY(p, []int{2}, []float32{1, 2}); err != nil {
		t.Fatal(err)
	}
	m, err := ReadNPY(p)
	if err != nil || m.Rows != 2 || m.Data[1] != 2 {
		t.Errorf("after overwrite: %v, %v", m, err)
	}
	if err := WriteNPY(filepath.Join(dir, "nope", "c.npy"), []int{1}, []float32{1}); err == nil {
		t.Error("writing into a missing folder: no error")
	}
}

func sameBytes(t *testing.T, got, want string) {
	t.Helper()
	a, err1 := os.ReadFile(got)
	b, err2 := os.ReadFile(want)
	if err1 != nil || err2 != nil {
		t.Fatal(err1, err2)
	}
	if !bytes.Equal(a, b) {
		t.Errorf("%s differs from %s:\n got %q\nwant %q", got, want, a[:min(len(a), 80)], b[:min(len(b), 80)])
	}
}

// TestWriteNPYRoundTrip writes shapes with 0, 1, 2 and 3 dimensions and
// reads the 1-D and 2-D ones back; special values survive bit for bit.
func TestWriteNPYRoundTrip(t *testing.T) {
	dir := t.TempDir()
	vals := []float32{0, -0, 1.5, float32(math.Inf(-1)), float32(math.NaN()), math.MaxFloat32}
	for _, shape := range [][]int{{6}, {2, 3}, {6, 1}, {0, 4}} {
		n := 1
		for _, d := range shape {
			n *= d
		}
		p := filepath.Join(dir, "x.npy")
		if err := WriteNPY(p, shape, vals[:n]); err != nil {
			t.Fatal(err)
		}
		b, _ := os.ReadFile(p)
		if hl := bytes.IndexByte(b, '\n') + 1; hl%64 != 0 {
			t.Errorf("shape %v: data starts at byte %d, not a multiple of 64 (NEP 1)", shape, hl)
		}
		m, err := ReadNPY(p)
		if err != nil {
			t.Fatal(err)
		}
		for i := range m.Data {
			if math.Float32bits(m.Data[i]) != math.Float32bits(vals[i]) {
				t.Errorf("shape %v value %d: got %v want %v", shape, i, m.Data[i], vals[i])
			}
		}
	}
	if err := WriteNPY(filepath.Join(dir, "s.npy"), nil, []float32{7}); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadNPY(filepath.Join(dir, "s.npy")); err == nil || !strings.Contains(err.Error(), "0 dimensions") {
		t.Errorf("scalar: error %v, want one about 0 dimensions", err)
	}
}

func TestWriteNPYPanicsOnShape(t *testing.T) {
	defer func() {
		if r := recover(); r == nil || !strings.HasPrefix(r.(string), "data: ") {
			t.Errorf("recover() = %v, want a data: panic", r)
		}
	}()
	WriteNPY(filepath.Join(t.TempDir(), "x.npy"), []int{2, 2}, []float32{1, 2, 3})
}

// TestHalfToFloat32 checks binary16 decoding on values from the IEEE 754
// binary16 layout [computed by hand]: 0x3c00 = 1, 0xc000 = -2,
// 0x7bff = 65504 (largest), 0x0001 = 2^-24 (smallest subnormal), 0x7c00 = +Inf.
func TestHalfToFloat32(t *testing.T) {
	cases := []struct {
		h    uint16
		want float32
	}{{0x3c00, 1}, {0xc000, -2}, {0x7bff, 65504}, {0x0001, 1.0 / (1 << 24)}, {0x3555, 0.333251953125}, {0x8000, float32(math.Copysign(0, -1))}}
	for _, c := range cases {
		if got := halfToFloat32(c.h); math.Float32bits(got) != math.Float32bits(c.want) {
			t.Errorf("halfToFloat32(%#x) = %v, want %v", c.h, got, c.want)
		}
	}
	if !math.IsInf(float64(halfToFloat32(0x7c00)), 1) || !math.IsNaN(float64(halfToFloat32(0x7e00))) {
		t.Error("Inf/NaN halves")
	}
}

// TestReadArray reads a 3-D array (which ReadNPY refuses) with its shape.
func TestReadArray(t *testing.T) {
	shape, v, err := ReadArray(filepath.Join(fixtureDir, "broken_3d.npy"))
	if err != nil {
		t.Fatal(err)
	}
	// numpy.load("testdata/data/broken_3d.npy") with numpy 1.24.2: shape
	// (2, 3, 2), float32; values as float32 widened to float64.
	want := []float32{-0.3651694357395172, 0.32604098320007324, 0.09770094603300095, -2.1403560638427734, -2.405299425125122,
		0.7946707606315613, 0.5231245756149292, -1.884926199913025, -0.7767447829246521, -0.011190096847712994, -0.9802159667015076, 2.8020355701446533}
	if !slices.Equal(shape, []int{2, 3, 2}) || len(v) != len(want) {
		t.Fatalf("shape %v, %d values", shape, len(v))
	}
	for i := range want {
		if v[i] != float64(want[i]) {
			t.Errorf("value %d: got %v want %v", i, v[i], want[i])
		}
	}
	// A float64 round trip through WriteNPY64 keeps every bit.
	p := filepath.Join(t.TempDir(), "w.npy")
	in := []float64{1.5, -2, 3e-300, 4, 5, 6, 7, 8}
	if err := WriteNPY64(p, []int{2, 2, 2}, in); err != nil {
		t.Fatal(err)
	}
	shape, v, err = ReadArray(p)
	if err != nil || !slices.Equal(shape, []int{2, 2, 2}) || !slices.Equal(v, in) {
		t.Errorf("round trip: %v %v %v", shape, v, err)
	}
	if _, _, err := ReadArray(filepath.Join(fixtureDir, "broken_truncated.npy")); err == nil {
		t.Error("truncated file accepted")
	}
}

// readNPY64File reads a whole .npy file through ReadNPY64 (the float64 path
// of data.ReadVector).
func readNPY64File(path string) ([]float64, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, err
	}
	_, _, v, err := ReadNPY64(f, st.Size(), path)
	return v, err
}

// TestWriteNPY64Rows: a file written a block of rows at a time reads back
// as WriteNPY64 of the whole array writes it, byte for byte, and fill is
// called for consecutive blocks in ascending order (it is computed while
// the block before is written).
func TestWriteNPY64Rows(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct {
		name       string
		rows, cols int
	}{{"one block", 3, 5}, {"many blocks", 3100, 700}, {"empty", 0, 4}} {
		t.Run(tc.name, func(t *testing.T) {
			all := make([]float64, tc.rows*tc.cols)
			for i := range all {
				all[i] = float64(i)*0.5 - 3
			}
			a, b := filepath.Join(dir, tc.name+"a.npy"), filepath.Join(dir, tc.name+"b.npy")
			if err := WriteNPY64(a, []int{tc.rows, tc.cols}, all); err != nil {
				t.Fatal(err)
			}
			next, calls := 0, 0
			err := WriteNPY64Rows(b, tc.rows, tc.cols, func(dst []float64, r0, r1 int) {
				if r0 != next || r1 <= r0 || len(dst) != (r1-r0)*tc.cols {
					t.Errorf("fill(%d values, %d, %d) after rows up to %d", len(dst), r0, r1, next)
				}
				next = r1
				calls++
				copy(dst, all[r0*tc.cols:r1*tc.cols])
			})
			if err != nil {
				t.Fatal(err)
			}
			if next != tc.rows {
				t.Errorf("fill reached row %d, want %d", next, tc.rows)
			}
			if tc.name == "many blocks" && calls < 3 {
				t.Errorf("fill was called %d times, want at least 3 blocks", calls)
			}
			ba, _ := os.ReadFile(a)
			bb, _ := os.ReadFile(b)
			if !bytes.Equal(ba, bb) {
				t.Errorf("got %d bytes, want the %d bytes of WriteNPY64", len(bb), len(ba))
			}
		})
	}
}
