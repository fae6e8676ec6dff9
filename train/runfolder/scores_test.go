package runfolder

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"testing"
)

// TestWriteNeuronScoresOneWriter: neuron_scores.csv, formatted by blocks
// of rows on several goroutines, has the bytes one csv.Writer writes over
// all rows (the former code), for tables of less than one block, of a
// few rounds of blocks and with names that need quoting.
func TestWriteNeuronScoresOneWriter(t *testing.T) {
	rng := rand.New(rand.NewPCG(6, 6))
	for _, n := range []int{0, 5, 3*(1<<14) + 77} {
		t.Run(fmt.Sprint(n), func(t *testing.T) {
			ns := &NeuronScores{Names: make([]string, n), Cols: make([][]float64, len(ScoreColumns)), Ceiling: make([]string, n), SplitHalfAll: make([]float64, n), Excluded: make([]string, n)}
			for k := range ns.Cols {
				ns.Cols[k] = make([]float64, n)
				for j := range ns.Cols[k] {
					ns.Cols[k][j] = rng.NormFloat64()
					if rng.IntN(20) == 0 {
						ns.Cols[k][j] = math.NaN()
					}
				}
			}
			for j := 0; j < n; j++ {
				ns.Names[j] = "cell " + strconv.Itoa(j)
				if j%7 == 0 {
					ns.Names[j] = fmt.Sprintf("cell, \"%d\"", j)
				}
				ns.Ceiling[j] = "usable"
				ns.SplitHalfAll[j] = rng.Float64()
				if j%11 == 0 {
					ns.Excluded[j] = "constant"
				}
			}
			dir := t.TempDir()
			if err := WriteNeuronScores(dir, ns); err != nil {
				t.Fatal(err)
			}
			got, err := os.ReadFile(filepath.Join(dir, FileNeuronScores))
			if err != nil {
				t.Fatal(err)
			}
			var want bytes.Buffer
			cw := csv.NewWriter(&want)
			header := append(append([]string{"neuron", "name"}, ScoreColumns...), ColCeiling, ColSplitHalfAll, "excluded")
			cw.Write(header)
			row := make([]string, len(header))
			for j := 0; j < n; j++ {
				row[0], row[1] = strconv.Itoa(j), ns.Names[j]
				for k := range ScoreColumns {
					row[2+k] = FormatScore(ns.Cols[k][j])
				}
				row[len(row)-3], row[len(row)-2], row[len(row)-1] = ns.Ceiling[j], FormatScore(ns.SplitHalfAll[j]), ns.Excluded[j]
				cw.Write(row)
			}
			cw.Flush()
			if !bytes.Equal(got, want.Bytes()) {
				t.Errorf("got %d bytes, want the %d bytes of one csv.Writer", len(got), want.Len())
			}
		})
	}
}
