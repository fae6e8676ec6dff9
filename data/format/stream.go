package format

import (
	"bufio"
	"encoding/binary"
	"fmt"
	"io"
	"os"
	"unsafe"
)

// NPYStream reads a 2-D .npy array (trials x neurons) a block of rows at a
// time with positioned reads (pread), into a buffer the caller reuses:
// nothing is mapped and nothing of the size of the file is allocated, so a
// recording larger than memory can be passed over. It is what the
// streaming statistics (AccumulateParts) read with.
//
// The array must be in C order (a Fortran-order array is accepted only
// when it has one row or one column, where both orders agree); element
// types are those of ReadNPY. Little-endian float32 rows are read straight
// into the destination; other types go through a byte buffer of the
// stream and are converted element by element. The file size is checked
// against the header when the stream is opened.
//
// Reads may run concurrently: they are positioned and share no state but
// the open file.
type NPYStream struct {
	f          *os.File
	name       string
	h          *npyHeader
	off        int64 // offset of the first data byte
	rows, cols int
	rowBytes   int64
	// colOff is the first column of the file this stream shows (see
	// Columns); cols are shown from there.
	colOff int
}

// Columns returns a stream of the same file showing only columns
// (neurons) [c0, c1): its Cols is c1-c0 and its column c is the file's
// c0+c. It shares the open file (close either, once). It panics if the
// range is outside [0, Cols].
func (s *NPYStream) Columns(c0, c1 int) *NPYStream {
	if c0 < 0 || c1 < c0 || c1 > s.cols {
		panic(fmt.Sprintf("data: NPYStream.Columns [%d, %d) out of range [0, %d)", c0, c1, s.cols))
	}
	v := *s
	v.colOff, v.cols = s.colOff+c0, c1-c0
	return &v
}

// ColumnOffset is the file column of the stream's column 0 (0 unless the
// stream comes from Columns).
func (s *NPYStream) ColumnOffset() int { return s.colOff }

// contiguous reports whether the stream shows whole rows of the file.
func (s *NPYStream) contiguous() bool {
	return int64(s.cols)*int64(s.h.size) == s.rowBytes
}

// pieces calls read(i, k, t, c) for the runs of the span of n elements
// starting at element (t, c) that are contiguous in the file: element i
// of the span is the first of the run of k, at (t, c) of the stream.
func (s *NPYStream) pieces(n, t, c int, read func(i, k, t, c int) error) error {
	if s.contiguous() {
		return read(0, n, t, c)
	}
	for i := 0; i < n; {
		k := min(n-i, s.cols-c)
		if err := read(i, k, t, c); err != nil {
			return err
		}
		i += k
		t, c = t+1, 0
	}
	return nil
}

// OpenNPYStream opens path for row-block reads. Errors name the file and
// wrap ErrFormat for a malformed or unsupported header or a size that
// does not match it.
func OpenNPYStream(path string) (*NPYStream, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("data: %w", err)
	}
	s, err := newNPYStream(f, path)
	if err != nil {
		f.Close()
		return nil, err
	}
	return s, nil
}

func newNPYStream(f *os.File, path string) (*NPYStream, error) {
	st, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("data: %w", err)
	}
	if st.IsDir() {
		return nil, fmt.Errorf("data: %s is a directory, not a .npy file", path)
	}
	h, used, err := readNPYHeader(bufio.NewReaderSize(f, 4096), st.Size(), path)
	if err != nil {
		return nil, err
	}
	if len(h.shape) != 2 {
		return nil, formatErr(path, "array has %d dimensions (shape %s); a trials x neurons matrix must be 2-D", len(h.shape), shapeString(h.shape))
	}
	rows, cols := h.shape[0], h.shape[1]
	if err := h.checkSize(st.Size()-used, path); err != nil {
		return nil, err
	}
	if h.fortran && rows > 1 && cols > 1 {
		return nil, formatErr(path, "array is in Fortran (column-major) order; reading it by blocks of trials needs C order (numpy: np.save(path, np.ascontiguousarray(a)))")
	}
	return &NPYStream{f: f, name: path, h: h, off: used, rows: rows, cols: cols, rowBytes: int64(cols) * int64(h.size)}, nil
}

// Rows is the number of rows (trials) of the array.
func (s *NPYStream) Rows() int { return s.rows }

// Cols is the number of columns (neurons) of the array.
func (s *NPYStream) Cols() int { return s.cols }

// Name is the path the stream was opened with.
func (s *NPYStream) Name() string { return s.name }

// ElemType is the element type of the file, e.g. "float32".
func (s *NPYStream) ElemType() string { return s.h.typeName() }

// Close closes the file.
func (s *NPYStream) Close() error { return s.f.Close() }

// direct reports whether the file bytes are the host representation of
// float32 (size 4) or float64 (size 8) values.
func (s *NPYStream) direct(size int) bool {
	return s.h.kind == npyFloat && s.h.size == size && HostLittle && s.h.order == binary.LittleEndian
}

func (s *NPYStream) checkRange(fn string, n, lo, hi int) {
	if lo < 0 || hi < lo || hi > s.rows {
		panic(fmt.Sprintf("data: NPYStream.%s rows [%d, %d) out of range [0, %d)", fn, lo, hi, s.rows))
	}
	if n < (hi-lo)*s.cols {
		panic(fmt.Sprintf("data: NPYStream.%s dst length %d, want at least %d rows x %d columns", fn, n, hi-lo, s.cols))
	}
}

// pos is the file offset of element (t, c).
func (s *NPYStream) pos(t, c int) int64 {
	return s.off + int64(t)*s.rowBytes + int64(c+s.colOff)*int64(s.h.size)
}

// readErr wraps an error of a read starting at element (t, c).
func (s *NPYStream) readErr(err error, t, c int) error {
	if err == io.EOF || err == io.ErrUnexpectedEOF {
		return formatErr(s.name, "file ends before the data of trial %d (0-based) the header announces: was it truncated while being read?", t)
	}
	return fmt.Errorf("data: %s: reading trial %d, neuron %d (0-based) onwards: %w", s.name, t, c+s.colOff, err)
}

// ReadRows32 reads rows [lo, hi) into dst[:(hi-lo)*Cols] as float32 in C
// order (element (t, n) at (t-lo)*Cols+n) and returns that slice. Types
// other than little-endian float32 are converted as ReadNPY converts them.
// It allocates nothing for little-endian float32 files; other types are
// read in chunks of 64 KiB through a temporary buffer and converted. It
// panics if the range is outside [0, Rows] or dst is shorter than
// (hi-lo)*Cols.
func (s *NPYStream) ReadRows32(dst []float32, lo, hi int) ([]float32, error) {
	s.checkRange("ReadRows32", len(dst), lo, hi)
	out := dst[:(hi-lo)*s.cols]
	return out, s.ReadSpan32(out, lo, 0)
}

// ReadSpan32 reads len(dst) consecutive elements starting at element
// (t, c) (continuing into the next rows) into dst as float32.
func (s *NPYStream) ReadSpan32(dst []float32, t, c int) error {
	if len(dst) == 0 {
		return nil
	}
	if s.direct(4) {
		return s.pieces(len(dst), t, c, func(i, k, t, c int) error {
			b := unsafe.Slice((*byte)(unsafe.Pointer(&dst[i])), 4*k)
			if _, err := s.f.ReadAt(b, s.pos(t, c)); err != nil {
				return s.readErr(err, t, c)
			}
			return nil
		})
	}
	get := s.h.getter()
	return s.pieces(len(dst), t, c, func(i, k, t, c int) error {
		return s.convert(k, t, c, func(e int, b []byte) { dst[i+e] = float32(get(b)) })
	})
}

// ReadRows64 is ReadRows32 for float64 destinations; little-endian
// float64 files are read straight into dst, other types are converted.
func (s *NPYStream) ReadRows64(dst []float64, lo, hi int) ([]float64, error) {
	s.checkRange("ReadRows64", len(dst), lo, hi)
	n := (hi - lo) * s.cols
	out := dst[:n]
	if n == 0 {
		return out, nil
	}
	if s.direct(8) {
		return out, s.pieces(n, lo, 0, func(i, k, t, c int) error {
			b := unsafe.Slice((*byte)(unsafe.Pointer(&out[i])), 8*k)
			if _, err := s.f.ReadAt(b, s.pos(t, c)); err != nil {
				return s.readErr(err, t, c)
			}
			return nil
		})
	}
	get := s.h.getter()
	return out, s.pieces(n, lo, 0, func(i, k, t, c int) error {
		return s.convert(k, t, c, func(e int, b []byte) { out[i+e] = get(b) })
	})
}

// convert reads n elements starting at element (t, c) in chunks and hands
// element i's bytes to set.
func (s *NPYStream) convert(n, t, c int, set func(i int, b []byte)) error {
	size := s.h.size
	const chunk = 1 << 16
	buf := make([]byte, chunk-chunk%size)
	per := len(buf) / size
	pos := s.pos(t, c)
	for i := 0; i < n; i += per {
		k := min(per, n-i)
		b := buf[:k*size]
		if _, err := s.f.ReadAt(b, pos); err != nil {
			return s.readErr(err, t, c)
		}
		for e := 0; e < k; e++ {
			set(i+e, b[e*size:])
		}
		pos += int64(len(b))
	}
	return nil
}

// ReadElem reads element (t, n) as float32.
func (s *NPYStream) ReadElem(t, n int) (float32, error) {
	size := s.h.size
	b := make([]byte, size)
	if _, err := s.f.ReadAt(b, s.pos(t, n)); err != nil {
		return 0, fmt.Errorf("data: %s: reading trial %d, neuron %d: %w", s.name, t, n+s.colOff, err)
	}
	return float32(s.h.getter()(b)), nil
}
