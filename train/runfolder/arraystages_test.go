package runfolder

import (
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/strialab/stria/data/format"
)

// TestReadRows: rows read across the files of consecutive ranges (one of
// them empty) are the rows written; a file of another shape is an error
// naming it, its rows read as zero.
func TestReadRows(t *testing.T) {
	dir := t.TempDir()
	const F = 3
	starts := []int{0, 2, 2, 5}
	var files []string
	var want []float64
	for k := range 3 {
		n := starts[k+1] - starts[k]
		v := make([]float64, n*F)
		for i := range v {
			v[i] = float64(100*k + i)
		}
		want = append(want, v...)
		f := filepath.Join(dir, "w"+string(rune('a'+k))+".npy")
		if err := format.WriteNPY64Rows(f, n, F, func(dst []float64, r0, r1 int) { copy(dst, v[r0*F:r1*F]) }); err != nil {
			t.Fatal(err)
		}
		files = append(files, f)
	}
	var err error
	read, done := ReadRows(files, starts, F, &err)
	got := make([]float64, 5*F)
	read(got[:F], 0, 1)
	read(got[F:4*F], 1, 4) // across the empty range
	read(got[4*F:], 4, 5)
	done()
	if err != nil || !slices.Equal(got, want) {
		t.Fatalf("got %v (error %v) want %v", got, err, want)
	}
	// The last file holds 2 rows where 3 are expected.
	if err := format.WriteNPY64(files[2], []int{2, F}, make([]float64, 2*F)); err != nil {
		t.Fatal(err)
	}
	err = nil
	read, done = ReadRows(files, starts, F, &err)
	defer done()
	read(got[4*F:], 4, 5)
	if err == nil || !strings.Contains(err.Error(), files[2]) {
		t.Errorf("a file of another shape: error %v, want one naming %s", err, files[2])
	}
	if !slices.Equal(got[4*F:], make([]float64, F)) {
		t.Errorf("rows of a bad file: got %v want zeros", got[4*F:])
	}
}
