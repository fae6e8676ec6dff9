package runfolder

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"sync"
)

// Modes of the files and folders runfolder writes.
const (
	FileMode   os.FileMode = 0o644
	FolderMode os.FileMode = 0o755
)

// WriteFile writes path atomically: write fills a temporary file in the
// same folder (through a buffer), which is synced, given mode 0644 and
// renamed over path. On any error the temporary file is removed and path
// is left as it was. Errors name path.
func WriteFile(path string, write func(w io.Writer) error) error {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".tmp*")
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	tmp := f.Name()
	bw := bufio.NewWriterSize(f, 1<<20)
	err = write(bw)
	if err == nil {
		err = bw.Flush()
	}
	if err == nil {
		err = f.Chmod(FileMode)
	}
	if err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}

// WriteBytes writes b to path atomically (see WriteFile).
func WriteBytes(path string, b []byte) error {
	return WriteFile(path, func(w io.Writer) error { _, err := w.Write(b); return err })
}

// WriteJSON writes v as JSON indented by two spaces, with a final newline,
// atomically.
func WriteJSON(path string, v any) error {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return WriteBytes(path, append(b, '\n'))
}

// ReadJSON reads a JSON file into v; errors name the file.
func ReadJSON(path string, v any) error {
	b, err := os.ReadFile(path)
	if err != nil {
		return err
	}
	if err := json.Unmarshal(b, v); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	return nil
}

// mkdir creates dir and its parents with mode 0755.
func mkdir(dir string) error { return os.MkdirAll(dir, FolderMode) }

// WriteTable writes a CSV table (header and rows) atomically through
// encoding/csv.
func WriteTable(path string, header []string, rows [][]string) error {
	return WriteCSV(path, header, func(cw *csv.Writer) error {
		for _, r := range rows {
			if err := cw.Write(r); err != nil {
				return err
			}
		}
		return nil
	})
}

// WriteCSV writes a header and the rows that emit writes, atomically.
func WriteCSV(path string, header []string, emit func(cw *csv.Writer) error) error {
	return WriteFile(path, func(w io.Writer) error {
		cw := csv.NewWriter(w)
		if err := cw.Write(header); err != nil {
			return err
		}
		if err := emit(cw); err != nil {
			return err
		}
		cw.Flush()
		return cw.Error()
	})
}

// csvBlock is the number of rows WriteCSVRows formats as one block.
const csvBlock = 1 << 14

// WriteCSVRows writes a header and n rows atomically through encoding/csv;
// fill sets every field of row i (row has len(header) fields and is
// reused from row to row, so fill must set each one). Blocks of csvBlock
// rows are formatted on all cores, each block by its own csv.Writer into
// a buffer (a record's text does not depend on the records before it),
// and the buffers are written in row order: the file has the bytes of one
// csv.Writer writing every row in turn, for any number of cores. fill is
// called concurrently for rows of different blocks, so it must only read
// what it shares. Memory: a buffer of csvBlock rows per core.
func WriteCSVRows(path string, header []string, n int, fill func(row []string, i int)) error {
	workers := runtime.GOMAXPROCS(0)
	bufs := make([]bytes.Buffer, workers)
	rows := make([][]string, workers)
	for i := range rows {
		rows[i] = make([]string, len(header))
	}
	errs := make([]error, workers)
	return WriteFile(path, func(w io.Writer) error {
		cw := csv.NewWriter(w)
		if err := cw.Write(header); err != nil {
			return err
		}
		cw.Flush()
		if err := cw.Error(); err != nil {
			return err
		}
		for r0 := 0; r0 < n; r0 += workers * csvBlock {
			var wg sync.WaitGroup
			for k := range bufs {
				i0 := min(r0+k*csvBlock, n)
				i1 := min(i0+csvBlock, n)
				bufs[k].Reset()
				wg.Add(1)
				go func() {
					defer wg.Done()
					errs[k] = formatRows(&bufs[k], rows[k], i0, i1, fill)
				}()
			}
			wg.Wait()
			for k := range bufs {
				if errs[k] != nil {
					return errs[k]
				}
				if _, err := w.Write(bufs[k].Bytes()); err != nil {
					return err
				}
			}
		}
		return nil
	})
}

// formatRows writes rows [i0, i1) to b through a csv.Writer, each first
// filled into row by fill.
func formatRows(b *bytes.Buffer, row []string, i0, i1 int, fill func(row []string, i int)) error {
	cw := csv.NewWriter(b)
	for i := i0; i < i1; i++ {
		fill(row, i)
		if err := cw.Write(row); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// ReadTable reads a CSV file with a header row through encoding/csv;
// every row must have as many fields as the header. Errors name the file.
func ReadTable(path string) (header []string, rows [][]string, err error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close()
	all, err := csv.NewReader(bufio.NewReader(f)).ReadAll()
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", path, err)
	}
	if len(all) == 0 {
		return nil, nil, fmt.Errorf("%s: empty file", path)
	}
	return all[0], all[1:], nil
}

// Table is a CSV table read back, with its columns found by name.
type Table struct {
	Path   string // the file, named in errors
	header []string
	Rows   [][]string // the data rows, header excluded
}

// ReadColumns reads a CSV table whose columns are then found by name.
func ReadColumns(path string) (*Table, error) {
	h, rows, err := ReadTable(path)
	if err != nil {
		return nil, err
	}
	return &Table{Path: path, header: h, Rows: rows}, nil
}

// Col returns the index of a column; the error names the file.
func (t *Table) Col(name string) (int, error) {
	for i, h := range t.header {
		if h == name {
			return i, nil
		}
	}
	return 0, fmt.Errorf("%s: no column %q", t.Path, name)
}

// Cols returns the indices of several columns.
func (t *Table) Cols(names ...string) ([]int, error) {
	out := make([]int, len(names))
	for i, n := range names {
		k, err := t.Col(n)
		if err != nil {
			return nil, err
		}
		out[i] = k
	}
	return out, nil
}

// Float parses row i's column k; the error names file, line and column.
func (t *Table) Float(i, k int) (float64, error) {
	v, err := strconv.ParseFloat(t.Rows[i][k], 64)
	if err != nil {
		return 0, fmt.Errorf("%s: line %d, column %s: %q is not a number", t.Path, i+2, t.header[k], t.Rows[i][k])
	}
	return v, nil
}

// Int parses row i's column k as a whole number.
func (t *Table) Int(i, k int) (int, error) {
	v, err := strconv.Atoi(t.Rows[i][k])
	if err != nil {
		return 0, fmt.Errorf("%s: line %d, column %s: %q is not a whole number", t.Path, i+2, t.header[k], t.Rows[i][k])
	}
	return v, nil
}

// FormatScore formats a score with 8 significant digits (NaN as NaN).
func FormatScore(v float64) string { return strconv.FormatFloat(v, 'g', 8, 64) }

// FormatExact formats v in the shortest form that reads back to the same
// float64.
func FormatExact(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// Num is a float64 that writes NaN and infinities as JSON null.
type Num float64

// MarshalJSON implements json.Marshaler.
func (v Num) MarshalJSON() ([]byte, error) {
	f := float64(v)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

// UnmarshalJSON implements json.Unmarshaler (null reads as NaN).
func (v *Num) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*v = Num(math.NaN())
		return nil
	}
	f, err := strconv.ParseFloat(string(b), 64)
	*v = Num(f)
	return err
}

// errNotExist reports whether err says a file is missing.
func errNotExist(err error) bool { return errors.Is(err, os.ErrNotExist) }

// MakeFolder creates dir and its parents with mode 0755.
func MakeFolder(dir string) error { return mkdir(dir) }
