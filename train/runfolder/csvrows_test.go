package runfolder

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"testing"
)

// TestWriteCSVRowsOneWriter: a table written by blocks of rows on several
// goroutines has the bytes one csv.Writer writes over all rows in turn
// (the former code of every large table), on 1, 2 and 3 cores, for tables
// of no rows, of less than one block, of exactly one block, of one row
// more, and of several rounds of blocks; with fields that need quoting
// (commas, quotes, line breaks, a leading space) and empty ones.
func TestWriteCSVRowsOneWriter(t *testing.T) {
	// The source of truth: one csv.Writer over every row.
	fill := func(row []string, i int) {
		row[0] = strconv.Itoa(i)
		row[1] = FormatScore(float64(i) / 7)
		switch i % 5 {
		case 0:
			row[2] = fmt.Sprintf("cell, \"%d\"", i)
		case 1:
			row[2] = "two\nlines"
		case 2:
			row[2] = " leading space"
		case 3:
			row[2] = ""
		default:
			row[2] = "plain"
		}
	}
	header := []string{"i", "value", "note"}
	oneWriter := func(n int) []byte {
		var b bytes.Buffer
		cw := csv.NewWriter(&b)
		cw.Write(header)
		row := make([]string, len(header))
		for i := 0; i < n; i++ {
			fill(row, i)
			cw.Write(row)
		}
		cw.Flush()
		return b.Bytes()
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2, 3} {
		for _, n := range []int{0, 1, csvBlock - 1, csvBlock, csvBlock + 1, 5*csvBlock + 3} {
			t.Run(fmt.Sprintf("%d cores, %d rows", procs, n), func(t *testing.T) {
				runtime.GOMAXPROCS(procs)
				path := filepath.Join(t.TempDir(), "t.csv")
				if err := WriteCSVRows(path, header, n, fill); err != nil {
					t.Fatal(err)
				}
				got, err := os.ReadFile(path)
				if err != nil {
					t.Fatal(err)
				}
				if want := oneWriter(n); !bytes.Equal(got, want) {
					t.Errorf("got %d bytes, want the %d bytes of one csv.Writer", len(got), len(want))
				}
			})
		}
	}
}

// TestWriteCSVRowsOneEmptyField: a table of one column whose rows are
// empty fields, which csv.Writer quotes ("") so that they read back as a
// row, has the bytes of one csv.Writer too.
func TestWriteCSVRowsOneEmptyField(t *testing.T) {
	path := filepath.Join(t.TempDir(), "t.csv")
	if err := WriteCSVRows(path, []string{"x"}, csvBlock+2, func(row []string, i int) { row[0] = "" }); err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var want bytes.Buffer
	cw := csv.NewWriter(&want)
	cw.Write([]string{"x"})
	for i := 0; i < csvBlock+2; i++ {
		cw.Write([]string{""})
	}
	cw.Flush()
	if !bytes.Equal(got, want.Bytes()) {
		t.Errorf("got %d bytes, want the %d bytes of one csv.Writer", len(got), want.Len())
	}
}
