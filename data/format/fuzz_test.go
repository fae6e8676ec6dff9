package format

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func addFixtures(f *testing.F, suffixes ...string) {
	ents, err := os.ReadDir(fixtureDir)
	if err != nil {
		f.Fatal(err)
	}
	for _, e := range ents {
		for _, s := range suffixes {
			if strings.HasSuffix(e.Name(), s) {
				b, err := os.ReadFile(fixture(e.Name()))
				if err != nil {
					f.Fatal(err)
				}
				f.Add(b)
			}
		}
	}
}

// FuzzReadNPY: any byte string gives a matrix or an error, never a panic,
// and never more elements than the input has bytes (the size check happens
// before allocation).
func FuzzReadNPY(f *testing.F) {
	addFixtures(f, ".npy")
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := readNPYMatrix(bytes.NewReader(b), int64(len(b)), "fuzz.npy")
		if err == nil {
			if m.Rows*m.Cols != len(m.Data) || len(m.Data) > len(b) {
				t.Fatalf("matrix %dx%d with %d values from %d bytes", m.Rows, m.Cols, len(m.Data), len(b))
			}
		} else if !strings.Contains(err.Error(), "fuzz.npy") {
			t.Fatalf("error %q does not name the file", err)
		}
		r, c, v, err64 := ReadNPY64(bytes.NewReader(b), int64(len(b)), "fuzz.npy")
		if (err == nil) != (err64 == nil) {
			t.Fatalf("float32 and float64 readers disagree: %v / %v", err, err64)
		}
		if err64 == nil {
			if r != m.Rows || c != m.Cols {
				t.Fatal("shapes disagree")
			}
			for i := range v {
				if float32(v[i]) != m.Data[i] && !(math.IsNaN(v[i]) && m.Data[i] != m.Data[i]) {
					t.Fatalf("value %d: %v vs %v", i, v[i], m.Data[i])
				}
			}
		}
	})
}

// FuzzReadNPZ: any file content gives arrays or errors naming the file.
func FuzzReadNPZ(f *testing.F) {
	addFixtures(f, ".npz")
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, b []byte) {
		p := filepath.Join(dir, "fuzz.npz")
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		for _, name := range []string{"", "resp", "stim"} {
			m, err := ReadNPZ(p, name)
			if err == nil && m.Rows*m.Cols != len(m.Data) {
				t.Fatalf("matrix %dx%d with %d values", m.Rows, m.Cols, len(m.Data))
			}
			if err != nil && !strings.Contains(err.Error(), "fuzz.npz") {
				t.Fatalf("error %q does not name the file", err)
			}
		}
	})
}

// FuzzReadTable: any text gives a table or an error naming the file; every
// column read either succeeds with one value per row or names the file.
func FuzzReadTable(f *testing.F) {
	addFixtures(f, ".csv", ".tsv")
	f.Fuzz(func(t *testing.T, b []byte) {
		for _, comma := range []rune{',', '\t'} {
			tb, err := parseTable(b, "fuzz.csv", comma)
			if err != nil {
				if !strings.Contains(err.Error(), "fuzz.csv") {
					t.Fatalf("error %q does not name the file", err)
				}
				continue
			}
			var named []string
			for _, h := range tb.Header {
				if h == "" {
					continue
				}
				named = append(named, h)
				v, err := tb.Column(h)
				if err == nil && len(v) != tb.Len() {
					t.Fatalf("column %q has %d values for %d rows", h, len(v), tb.Len())
				}
				if err != nil && !strings.Contains(err.Error(), "fuzz.csv") {
					t.Fatalf("error %q does not name the file", err)
				}
				tb.IntColumn(h)
			}
			if m, err := tb.Columns(named); err == nil && (m.Rows != tb.Len() || m.Cols != len(named)) {
				t.Fatal("Columns shape")
			}
		}
	})
}
