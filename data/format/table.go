package format

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
)

// Table is a delimited text file with a header row and one row per trial.
// The delimiter comes from the extension: ".csv" is comma-separated, ".tsv"
// tab-separated (case-insensitive).
//
// Cells are kept as text and parsed when a column is asked for. An empty
// cell reads as NaN (pandas writes missing values as empty cells), and so do
// "NaN", "nan" and friends; validation (Check) then refuses the data, naming
// the trial and the neuron.
type Table struct {
	Path   string
	Header []string // column names, leading and trailing spaces removed

	rows  [][]string // rows[t][c]: trial t, column c
	lines []int      // lines[t]: 1-based line where trial t's row starts
	index map[string]int
}

// Len returns the number of data rows (trials).
func (t *Table) Len() int { return len(t.rows) }

// ReadTable reads a .csv or .tsv file with a header row. A UTF-8 byte order
// mark (as spreadsheet programs write) is skipped. Errors name the file and
// line: a row with the wrong number of fields, a duplicate column name, an
// unsupported extension, a file without data rows.
func ReadTable(path string) (*Table, error) {
	var comma rune
	switch strings.ToLower(filepath.Ext(path)) {
	case ".csv":
		comma = ','
	case ".tsv":
		comma = '\t'
	default:
		return nil, fmt.Errorf("data: %s: unknown table extension %q (use .csv for commas or .tsv for tabs)", path, filepath.Ext(path))
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("data: %w", err)
	}
	return parseTable(b, path, comma)
}

func parseTable(b []byte, path string, comma rune) (*Table, error) {
	b = bytes.TrimPrefix(b, []byte("\xef\xbb\xbf"))
	r := csv.NewReader(bytes.NewReader(b))
	r.Comma = comma
	r.ReuseRecord = false
	head, err := r.Read()
	if err == io.EOF {
		return nil, formatErr(path, "file is empty (it needs a header row and one row per trial)")
	}
	if err != nil {
		return nil, tableErr(path, err)
	}
	t := &Table{Path: path, Header: make([]string, len(head)), index: make(map[string]int, len(head))}
	for c, h := range head {
		h = strings.TrimSpace(h)
		t.Header[c] = h
		if h == "" {
			continue // allowed, but cannot be selected by name
		}
		if c0, dup := t.index[h]; dup {
			return nil, formatErr(path, "line 1: column name %q appears twice (columns %d and %d, 1-based)", h, c0+1, c+1)
		}
		t.index[h] = c
	}
	for {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, tableErr(path, err)
		}
		line, _ := r.FieldPos(0)
		t.rows = append(t.rows, rec)
		t.lines = append(t.lines, line)
	}
	if len(t.rows) == 0 {
		return nil, formatErr(path, "no data rows after the header")
	}
	return t, nil
}

func tableErr(path string, err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		if pe.Err == csv.ErrFieldCount {
			return formatErr(path, "line %d: wrong number of fields (every row must have as many fields as the header)", pe.Line)
		}
		return formatErr(path, "line %d, column %d: %v", pe.Line, pe.Column, pe.Err)
	}
	return fmt.Errorf("data: %s: %w", path, err)
}

// col returns the index of the named column or an error listing the names.
func (t *Table) col(name string) (int, error) {
	if c, ok := t.index[strings.TrimSpace(name)]; ok && name != "" {
		return c, nil
	}
	return 0, fmt.Errorf("data: %s has no column %q (columns: %s)", t.Path, name, listNames(t.Header, 12))
}

func listNames(names []string, max int) string {
	q := make([]string, 0, max+1)
	for i, n := range names {
		if i == max {
			q = append(q, fmt.Sprintf("... %d more", len(names)-max))
			break
		}
		q = append(q, strconv.Quote(n))
	}
	return strings.Join(q, ", ")
}

// parseCell parses one numeric cell; empty cells are NaN.
func parseCell(s string) (float64, bool) {
	s = strings.TrimSpace(s)
	if s == "" {
		return math.NaN(), true
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		var ne *strconv.NumError
		if errors.As(err, &ne) && ne.Err == strconv.ErrRange {
			return v, true // +-Inf or 0 for out-of-range values; Check reports Inf
		}
		return 0, false
	}
	return v, true
}

func (t *Table) cellErr(row, c int, what string) error {
	return formatErr(t.Path, "line %d (trial %d, 0-based), column %q (field %d, 1-based): cannot read %q as %s",
		t.lines[row], row, t.Header[c], c+1, truncate(t.rows[row][c], 40), what)
}

// Column returns the named column as numbers, one per trial. The error for a
// cell that is not a number names the file, the line, the trial and the
// column.
func (t *Table) Column(name string) ([]float64, error) {
	c, err := t.col(name)
	if err != nil {
		return nil, err
	}
	v := make([]float64, len(t.rows))
	for i, rec := range t.rows {
		x, ok := parseCell(rec[c])
		if !ok {
			return nil, t.cellErr(i, c, "a number")
		}
		v[i] = x
	}
	return v, nil
}

// Columns returns the named columns as a trials x len(names) float32 Matrix.
func (t *Table) Columns(names []string) (*Matrix, error) {
	idx := make([]int, len(names))
	for j, n := range names {
		c, err := t.col(n)
		if err != nil {
			return nil, err
		}
		idx[j] = c
	}
	m := NewMatrix(len(t.rows), len(names))
	for i, rec := range t.rows {
		row := m.Row(i)
		for j, c := range idx {
			x, ok := parseCell(rec[c])
			if !ok {
				return nil, t.cellErr(i, c, "a number")
			}
			row[j] = float32(x)
		}
	}
	return m, nil
}

// IntColumn returns the named column as integers (condition or block ids).
// A number with a zero fraction such as "3.0" is accepted, since pandas
// writes integer columns that way when they hold missing values; an empty
// cell, a fraction or a value beyond +-2^53 is an error naming the line.
func (t *Table) IntColumn(name string) ([]int, error) {
	c, err := t.col(name)
	if err != nil {
		return nil, err
	}
	v := make([]int, len(t.rows))
	for i, rec := range t.rows {
		s := strings.TrimSpace(rec[c])
		if n, err := strconv.Atoi(s); err == nil {
			v[i] = n
			continue
		}
		x, ok := parseCell(s)
		if !ok || s == "" || !isIntValue(x) {
			return nil, t.cellErr(i, c, "an integer")
		}
		v[i] = int(x)
	}
	return v, nil
}

func isIntValue(x float64) bool {
	return x == math.Trunc(x) && math.Abs(x) <= 1<<53
}
