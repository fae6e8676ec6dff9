package runfolder

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math"
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

// BenchmarkWriteCSVRows writes a table shaped like a comparison's
// fold_scores.csv at 24,000 neurons, 5 models and 5 folds (600,000 rows,
// 73 MB), and reports the CPU time of all threads per table beside the
// wall time.
func BenchmarkWriteCSVRows(b *testing.B) {
	const n = 600_000
	header := append(append([]string{"model", "fold", "neuron"}, ScoreColumns...), ColCeiling, "excluded")
	vals := make([]float64, n*len(ScoreColumns))
	for i := range vals {
		vals[i] = math.Sin(float64(i)) * 0.7
	}
	fill := func(row []string, i int) {
		row[0], row[1], row[2] = "vonmises2", strconv.Itoa(i/120_000+1), strconv.Itoa(i%24_000)
		for k := range ScoreColumns {
			row[3+k] = FormatScore(vals[i*len(ScoreColumns)+k])
		}
		row[len(row)-2], row[len(row)-1] = "usable", ""
	}
	path := filepath.Join(b.TempDir(), "t.csv")
	cpu0 := cpuSeconds()
	b.ResetTimer()
	for b.Loop() {
		if err := WriteCSVRows(path, header, n, fill); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric((cpuSeconds()-cpu0)*1e9/float64(b.N), "cpu-ns/op")
}
