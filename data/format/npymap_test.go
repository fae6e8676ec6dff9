//go:build linux || darwin || freebsd

package format

import (
	"path/filepath"
	"slices"
	"testing"
)

// TestMappedEqualsRead maps every fixture of the fast layout (the mapping
// threshold lowered to zero) and compares with the plain read, then writes
// into a mapped matrix to check that the file is left alone (copy-on-write).
func TestMappedEqualsRead(t *testing.T) {
	files, _ := filepath.Glob(filepath.Join(fixtureDir, "*.npy"))
	saved := MapThreshold
	defer func() { MapThreshold = saved }()
	mapped := 0
	for _, f := range files {
		MapThreshold = 1 << 62
		want, errRead := ReadNPY(f)
		MapThreshold = 0
		got, errMap := ReadNPY(f)
		if (errRead == nil) != (errMap == nil) {
			t.Errorf("%s: read error %v, mapped error %v", f, errRead, errMap)
			continue
		}
		if errRead != nil {
			continue
		}
		if got.Rows != want.Rows || got.Cols != want.Cols || !slices.Equal(got.Data, want.Data) && !allNaNEqual(got.Data, want.Data) {
			t.Errorf("%s: mapped matrix differs from the read one", f)
		}
		mapped++
	}
	if mapped == 0 {
		t.Fatal("no fixture was read")
	}
	// Copy-on-write: a write to the mapped values does not reach the file.
	p := filepath.Join(t.TempDir(), "w.npy")
	if err := WriteNPY(p, []int{2, 2}, []float32{1, 2, 3, 4}); err != nil {
		t.Fatal(err)
	}
	MapThreshold = 0
	m, err := ReadNPY(p)
	if err != nil {
		t.Fatal(err)
	}
	m.Data[0] = 99
	MapThreshold = 1 << 62
	back, err := ReadNPY(p)
	if err != nil || back.Data[0] != 1 {
		t.Errorf("writing into a mapped matrix changed the file: %v %v", back, err)
	}
}

func allNaNEqual(a, b []float32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] && !(a[i] != a[i] && b[i] != b[i]) {
			return false
		}
	}
	return true
}
