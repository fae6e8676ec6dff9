package format

import (
	"bytes"
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestNPYStreamRead(t *testing.T) {
	const T, N = 13, 9
	rng := rand.New(rand.NewPCG(1, 2))
	v := make([]float64, T*N)
	for i := range v {
		v[i] = rng.NormFloat64()
	}
	dir := t.TempDir()
	p64 := filepath.Join(dir, "y64.npy")
	if err := WriteNPY64(p64, []int{T, N}, v); err != nil {
		t.Fatal(err)
	}
	want, err := ReadNPY(p64) // the whole-file reader
	if err != nil {
		t.Fatal(err)
	}
	s, err := OpenNPYStream(p64)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if s.Rows() != T || s.Cols() != N || s.ElemType() != "float64" {
		t.Fatalf("got %d x %d %s, want %d x %d float64", s.Rows(), s.Cols(), s.ElemType(), T, N)
	}
	buf := make([]float32, 5*N)
	for lo := 0; lo < T; lo += 5 {
		hi := min(lo+5, T)
		got, err := s.ReadRows32(buf, lo, hi)
		if err != nil {
			t.Fatal(err)
		}
		for i, x := range got {
			if x != want.Data[lo*N+i] {
				t.Fatalf("rows [%d, %d) element %d = %v, want %v", lo, hi, i, x, want.Data[lo*N+i])
			}
		}
	}
	b64 := make([]float64, 4*N)
	got64, err := s.ReadRows64(b64, 9, 13)
	if err != nil {
		t.Fatal(err)
	}
	for i, x := range got64 {
		if x != v[9*N+i] {
			t.Fatalf("ReadRows64 element %d = %v, want %v", i, x, v[9*N+i])
		}
	}

	t.Run("fortran order refused", func(t *testing.T) {
		h := NPYHeaderBytes("<f4", []int{3, 2})
		h = bytes.Replace(h, []byte("'fortran_order': False"), []byte("'fortran_order': True "), 1)
		p := filepath.Join(dir, "f.npy")
		if err := os.WriteFile(p, append(h, make([]byte, 24)...), 0o644); err != nil {
			t.Fatal(err)
		}
		_, err := OpenNPYStream(p)
		if !errors.Is(err, ErrFormat) || !strings.Contains(err.Error(), "Fortran") {
			t.Fatalf("got error %v, want a format error about Fortran order", err)
		}
	})
	t.Run("truncated refused", func(t *testing.T) {
		b, _ := os.ReadFile(p64)
		p := filepath.Join(dir, "short.npy")
		if err := os.WriteFile(p, b[:len(b)-8], 0o644); err != nil {
			t.Fatal(err)
		}
		if _, err := OpenNPYStream(p); !errors.Is(err, ErrFormat) {
			t.Fatalf("got error %v, want a format error", err)
		}
	})
}

// TestStreamColumns: a column view reads what the whole rows hold in its
// columns, across row boundaries, into float32 and float64.
func TestStreamColumns(t *testing.T) {
	dir := t.TempDir()
	const T, N = 7, 11
	v := make([]float32, T*N)
	for i := range v {
		v[i] = float32(i)
	}
	path := filepath.Join(dir, "y.npy")
	if err := WriteNPY(path, []int{T, N}, v); err != nil {
		t.Fatal(err)
	}
	s, err := OpenNPYStream(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	for _, r := range [][2]int{{0, N}, {3, 8}, {10, 11}, {0, 1}} {
		c := s.Columns(r[0], r[1])
		w := r[1] - r[0]
		got := make([]float32, T*w)
		if _, err := c.ReadRows32(got, 0, T); err != nil {
			t.Fatal(err)
		}
		got64 := make([]float64, T*w)
		if _, err := c.ReadRows64(got64, 0, T); err != nil {
			t.Fatal(err)
		}
		for tr := 0; tr < T; tr++ {
			for n := 0; n < w; n++ {
				want := v[tr*N+r[0]+n]
				if got[tr*w+n] != want || got64[tr*w+n] != float64(want) {
					t.Fatalf("columns %v: trial %d, column %d: got %v and %v, want %v", r, tr, n, got[tr*w+n], got64[tr*w+n], want)
				}
			}
		}
		if e, _ := c.ReadElem(2, w-1); e != v[2*N+r[1]-1] {
			t.Errorf("columns %v: ReadElem got %v, want %v", r, e, v[2*N+r[1]-1])
		}
	}
}
