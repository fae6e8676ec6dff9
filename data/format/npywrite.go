package format

import (
	"bufio"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"unsafe"
)

// WriteNPY writes data as a little-endian float32 array in C order with
// the given shape (any number of dimensions, including none for a scalar).
// The header is version 1.0 unless it would be longer than 65535 bytes
// (then 2.0), padded so the data starts at a multiple of 64 bytes (NEP 1).
//
// Writing is atomic: the array goes to a temporary file in the same folder,
// which is synced and then renamed over path, so a reader never sees half a
// file. WriteNPY panics if a dimension is negative or the product of shape
// is not len(data).
func WriteNPY(path string, shape []int, data []float32) error {
	checkShape("WriteNPY", shape, len(data))
	var raw []byte
	if len(data) > 0 && HostLittle {
		raw = unsafe.Slice((*byte)(unsafe.Pointer(&data[0])), 4*len(data))
	}
	return writeNPY(path, "<f4", shape, raw, len(data), func(b []byte, i int) {
		binary.LittleEndian.PutUint32(b, math.Float32bits(data[i]))
	}, 4)
}

// WriteNPY64 is like WriteNPY for float64 data ("<f8").
func WriteNPY64(path string, shape []int, data []float64) error {
	checkShape("WriteNPY64", shape, len(data))
	var raw []byte
	if len(data) > 0 && HostLittle {
		raw = unsafe.Slice((*byte)(unsafe.Pointer(&data[0])), 8*len(data))
	}
	return writeNPY(path, "<f8", shape, raw, len(data), func(b []byte, i int) {
		binary.LittleEndian.PutUint64(b, math.Float64bits(data[i]))
	}, 8)
}

func checkShape(fn string, shape []int, n int) {
	p := 1
	for _, d := range shape {
		if d < 0 {
			panic(fmt.Sprintf("data: %s negative dimension in shape %v", fn, shape))
		}
		p *= d
	}
	if p != n {
		panic(fmt.Sprintf("data: %s shape %v holds %d elements, data has %d", fn, shape, p, n))
	}
}

// NPYHeaderBytes returns the magic, version, length and padded header dict.
func NPYHeaderBytes(descr string, shape []int) []byte {
	var sb strings.Builder
	sb.WriteString("{'descr': '")
	sb.WriteString(descr)
	sb.WriteString("', 'fortran_order': False, 'shape': (")
	for i, d := range shape {
		if i > 0 {
			sb.WriteString(", ")
		}
		fmt.Fprintf(&sb, "%d", d)
	}
	if len(shape) == 1 {
		sb.WriteString(",")
	}
	sb.WriteString("), }")
	dict := sb.String()
	pre := 10
	major := byte(1)
	if len(dict)+1+63 > math.MaxUint16 {
		pre, major = 12, 2
	}
	total := pre + len(dict) + 1
	total += (64 - total%64) % 64
	hlen := total - pre
	b := make([]byte, 0, total)
	b = append(b, npyMagic...)
	b = append(b, major, 0)
	if major == 1 {
		b = binary.LittleEndian.AppendUint16(b, uint16(hlen))
	} else {
		b = binary.LittleEndian.AppendUint32(b, uint32(hlen))
	}
	b = append(b, dict...)
	for len(b) < total-1 {
		b = append(b, ' ')
	}
	return append(b, '\n')
}

// writeNPY writes header and data atomically. raw, if non-nil, is the data
// already in little-endian byte order; otherwise put encodes element i.
func writeNPY(path, descr string, shape []int, raw []byte, n int, put func(b []byte, i int), size int) (err error) {
	return writeNPYBody(path, descr, shape, raw, n, put, size, nil)
}

// WriteNPY64Rows is WriteNPY64 for a rows x cols array produced a block of
// rows at a time: fill(dst, r0, r1) writes rows [r0, r1) into dst
// ((r1-r0) x cols). fill is called for consecutive blocks in ascending
// order, one call at a time, on another goroutine than the writes, so
// that the next block is computed while the last one is written. Memory
// is two blocks of about 8 MiB, whatever the size of the array (a readout
// of a million neurons). Each block is handed to the disk as soon as it
// is written (Linux: sync_file_range), so that the disk works while the
// next blocks are computed. Writing is atomic as for WriteNPY; a memory
// fault in fill (values mapped from a file that shrank) is an error, as
// in the writes.
func WriteNPY64Rows(path string, rows, cols int, fill func(dst []float64, r0, r1 int)) error {
	if rows < 0 || cols < 0 {
		panic(fmt.Sprintf("data: WriteNPY64Rows negative shape %d x %d", rows, cols))
	}
	R := max(1, rowsBlockBytes/(8*max(cols, 1)))
	R = min(R, max(rows, 1))
	bufs := [2][]float64{make([]float64, R*cols), make([]float64, R*cols)}
	var bytes []byte
	if !HostLittle {
		bytes = make([]byte, 8*R*cols)
	}
	return writeNPYBody(path, "<f8", []int{rows, cols}, nil, 0, nil, 8, func(w *bufio.Writer, f *os.File) error {
		// The filler takes a free buffer, fills the next block and hands it
		// over; the blocks arrive in order (one filler, FIFO channel).
		free := make(chan int, 2)
		free <- 0
		free <- 1
		full := make(chan int, 2)
		stop := make(chan struct{})
		var g GuardGroup
		g.Go(func() {
			defer close(full)
			for r0 := 0; r0 < rows; r0 += R {
				var i int
				select {
				case i = <-free:
				case <-stop:
					return
				}
				fill(bufs[i][:(min(r0+R, rows)-r0)*cols], r0, min(r0+R, rows))
				full <- i
			}
		})
		var err error
		r0 := 0
		for i := range full {
			r1 := min(r0+R, rows)
			if err == nil {
				err = writeFloat64s(w, bufs[i][:(r1-r0)*cols], bytes)
				if err == nil {
					// The disk starts on this block now, not when the
					// kernel's dirty-page threshold is reached (gigabytes
					// later), so the final Sync waits for less.
					if err = w.Flush(); err == nil {
						startWriteback(f)
					}
				}
				if err != nil {
					close(stop)
				}
			}
			r0 = r1
			free <- i
		}
		if gerr := g.Wait(); err == nil {
			err = gerr
		}
		return err
	})
}

// rowsBlockBytes is the size of one of WriteNPY64Rows' two blocks.
const rowsBlockBytes = 8 << 20

// writeFloat64s writes v little-endian to w; scratch holds 8 len(v)
// bytes on a big-endian host (nil on a little-endian one, where v's own
// bytes are written).
func writeFloat64s(w *bufio.Writer, v []float64, scratch []byte) error {
	if len(v) == 0 {
		return nil
	}
	var b []byte
	if HostLittle {
		b = unsafe.Slice((*byte)(unsafe.Pointer(&v[0])), 8*len(v))
	} else {
		b = scratch[:8*len(v)]
		for i, x := range v {
			binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(x))
		}
	}
	_, err := w.Write(b)
	return err
}

// writeNPYBody writes header and data atomically: body writes the data
// when it is not nil, else raw or put as for writeNPY.
func writeNPYBody(path, descr string, shape []int, raw []byte, n int, put func(b []byte, i int), size int, body func(w *bufio.Writer, f *os.File) error) (err error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".tmp-*")
	if err != nil {
		return fmt.Errorf("data: writing %s: %w", path, err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
		}
	}()
	w := bufio.NewWriterSize(f, 1<<16)
	if _, err = w.Write(NPYHeaderBytes(descr, shape)); err != nil {
		return fmt.Errorf("data: writing %s: %w", path, err)
	}
	// The values may be mapped from a file (a recording written back out):
	// a fault while reading them is an error, not a crash.
	if ferr := Guard(func() {
		switch {
		case body != nil:
			err = body(w, f)
		case raw != nil:
			_, err = w.Write(raw)
		default:
			var b [8]byte
			for i := 0; i < n && err == nil; i++ {
				put(b[:size], i)
				_, err = w.Write(b[:size])
			}
		}
	}); ferr != nil {
		err = ferr
	}
	if err == nil {
		err = w.Flush()
	}
	if err == nil {
		err = f.Sync()
	}
	if err == nil {
		err = f.Chmod(0o644)
	}
	if err != nil {
		return fmt.Errorf("data: writing %s: %w", path, err)
	}
	if err = f.Close(); err != nil {
		return fmt.Errorf("data: writing %s: %w", path, err)
	}
	if err = os.Rename(tmp, path); err != nil {
		return fmt.Errorf("data: writing %s: %w", path, err)
	}
	return nil
}
