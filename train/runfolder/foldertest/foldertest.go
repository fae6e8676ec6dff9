// Package foldertest holds the checks that the tests of the folder-format
// packages (train/runfolder and its sub-packages) share: file modes, no
// temporary files left, two folders equal byte for byte, tables that parse
// as CSV. It is imported only by tests, and imports nothing of stria so
// that runfolder's own tests can use it.
package foldertest

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"
)

// FileModes returns the mode of every file and folder under dir, by path
// relative to dir.
func FileModes(t testing.TB, dir string) map[string]fs.FileMode {
	t.Helper()
	m := map[string]fs.FileMode{}
	filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			t.Fatal(err)
		}
		info, err := d.Info()
		if err != nil {
			t.Fatal(err)
		}
		rel, _ := filepath.Rel(dir, p)
		m[rel] = info.Mode()
		return nil
	})
	return m
}

// CheckFolder checks that every file under dir has mode file and every
// folder mode folder, and that no temporary file is left.
func CheckFolder(t testing.TB, dir string, file, folder fs.FileMode) {
	t.Helper()
	for rel, mode := range FileModes(t, dir) {
		if strings.Contains(rel, ".tmp") {
			t.Errorf("temporary file %s left", rel)
		}
		want := file
		if mode.IsDir() {
			want = folder | fs.ModeDir
		}
		if rel != "." && mode != want {
			t.Errorf("%s has mode %v, want %v", rel, mode, want)
		}
	}
}

// SameFolders compares every file of a and b byte for byte; files named
// marker (the completion marker) are compared without their "finished"
// time, which must parse as RFC 3339.
func SameFolders(t testing.TB, a, b, marker string) {
	t.Helper()
	files := func(dir string) []string {
		var out []string
		filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
			if err == nil && !d.IsDir() {
				rel, _ := filepath.Rel(dir, p)
				out = append(out, rel)
			}
			return nil
		})
		return out
	}
	fa, fb := files(a), files(b)
	if !slices.Equal(fa, fb) {
		t.Fatalf("files differ:\n%v\n%v", fa, fb)
	}
	for _, rel := range fa {
		x, _ := os.ReadFile(filepath.Join(a, rel))
		y, _ := os.ReadFile(filepath.Join(b, rel))
		if filepath.Base(rel) == marker {
			x, y = WithoutTime(t, x), WithoutTime(t, y)
		}
		if !bytes.Equal(x, y) {
			t.Errorf("%s differs after reading back and writing again:\n%.300s\n---\n%.300s", rel, x, y)
		}
	}
}

// WithoutTime returns a completion marker's JSON with its "finished" time
// removed, after checking that the time parses as RFC 3339.
func WithoutTime(t testing.TB, b []byte) []byte {
	t.Helper()
	var c map[string]any
	if err := json.Unmarshal(b, &c); err != nil {
		t.Fatal(err)
	}
	f, _ := c["finished"].(string)
	if _, err := time.Parse(time.RFC3339, f); err != nil {
		t.Errorf("completion marker finished %q: %v", f, err)
	}
	delete(c, "finished")
	out, _ := json.Marshal(c)
	return out
}

// ReadAllCSV parses a file with encoding/csv, failing the test if it does
// not parse.
func ReadAllCSV(t testing.TB, path string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatalf("%s does not parse as CSV: %v", path, err)
	}
	return rows
}
