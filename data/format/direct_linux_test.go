//go:build linux

package format

import (
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"golang.org/x/sys/unix"
)

// TestDirectReaderRows: rows read past the page cache are the values the
// whole-file reader gives, for ranges at the start, in the middle and at
// the end of files whose rows and size are not multiples of the 4 KiB
// alignment (and one whose rows are).
func TestDirectReaderRows(t *testing.T) {
	for _, sz := range []struct{ T, N int }{{37, 1001}, {5, 1024}, {300, 7}} {
		rng := rand.New(rand.NewPCG(uint64(sz.T), uint64(sz.N)))
		v := make([]float32, sz.T*sz.N)
		for i := range v {
			v[i] = float32(rng.NormFloat64())
		}
		path := filepath.Join(t.TempDir(), "y.npy")
		if err := WriteNPY(path, []int{sz.T, sz.N}, v); err != nil {
			t.Fatal(err)
		}
		s, err := OpenNPYStream(path)
		if err != nil {
			t.Fatal(err)
		}
		d := s.Direct(true)
		if d == nil {
			s.Close()
			t.Skip("the file system of the test's temporary folder refuses O_DIRECT")
		}
		buf := d.Buffer(8)
		for _, r := range [][2]int{{0, 1}, {0, min(8, sz.T)}, {3, 4}, {sz.T - 1, sz.T}, {max(sz.T-8, 0), sz.T}, {2, 2}} {
			got, err := d.ReadRows32(buf, r[0], r[1])
			if err != nil {
				t.Fatalf("%d x %d, rows %v: %v", sz.T, sz.N, r, err)
			}
			want := v[r[0]*sz.N : r[1]*sz.N]
			if len(got) != len(want) {
				t.Fatalf("%d x %d, rows %v: %d values, want %d", sz.T, sz.N, r, len(got), len(want))
			}
			for i := range want {
				if got[i] != want[i] {
					t.Fatalf("%d x %d, rows %v: value %d = %v, want %v", sz.T, sz.N, r, i, got[i], want[i])
				}
			}
		}
		d.Close()
		s.Close()
	}
}

// TestDirectChoice: Direct(false) reads a large file past the page cache
// only when most of it is not in the cache, and never a stream of some
// of the columns or of another type than float32.
func TestDirectChoice(t *testing.T) {
	defer func(m int64) { DirectMinBytes = m }(DirectMinBytes)
	const T, N = 64, 4096 // 1 MiB
	path := filepath.Join(t.TempDir(), "y.npy")
	if err := WriteNPY(path, []int{T, N}, make([]float32, T*N)); err != nil {
		t.Fatal(err)
	}
	s, err := OpenNPYStream(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if d := s.Direct(true); d == nil {
		t.Skip("the file system of the test's temporary folder refuses O_DIRECT")
	} else {
		d.Close()
	}
	if s.Columns(0, N/2).Direct(true) != nil {
		t.Error("Direct for a stream of half the columns")
	}
	DirectMinBytes = 2 << 20
	if d := s.Direct(false); d != nil {
		d.Close()
		t.Error("Direct for a file below DirectMinBytes")
	}
	DirectMinBytes = 1 << 20
	// In the cache (just written and read): through it.
	if _, err := os.ReadFile(path); err != nil {
		t.Fatal(err)
	}
	if f := residentFraction(s.f, T*N*4+128); f < 0.5 {
		t.Skipf("a file just read is %.2f in the page cache: cannot test the choice here", f)
	}
	if d := s.Direct(false); d != nil {
		d.Close()
		t.Error("Direct for a file in the page cache")
	}
	// Out of it: past it.
	if err := unix.Fadvise(int(s.f.Fd()), 0, 0, unix.FADV_DONTNEED); err != nil {
		t.Skip(err)
	}
	if f := residentFraction(s.f, T*N*4+128); f >= 0.5 {
		t.Skipf("after FADV_DONTNEED the file is still %.2f in the page cache: cannot test the choice here", f)
	}
	d := s.Direct(false)
	if d == nil {
		t.Fatal("no Direct for a large file out of the page cache")
	}
	d.Close()
}
