package data

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func addFixtures(f *testing.F, suffixes ...string) {
	ents, err := os.ReadDir(fixtureDir)
	if err != nil {
		f.Fatal(err)
	}
	for _, e := range ents {
		for _, s := range suffixes {
			if strings.HasSuffix(e.Name(), s) {
				b, err := os.ReadFile(fixture(e.Name()))
				if err != nil {
					f.Fatal(err)
				}
				f.Add(b)
			}
		}
	}
}

// FuzzAxisBin: for any valid axis and finite value, Bin, OneHot and Soft
// agree: the bin is in range, it is the bin whose edges enclose the value
// (after wrapping), one-hot has a single 1 there and the soft code is
// non-negative and sums to 1.
func FuzzAxisBin(f *testing.F) {
	f.Add(0.0, 360.0, 6.0, 0, true, 359.9)
	f.Add(0.0, 360.0, 0.0, 60, true, -0.1)
	f.Add(0.0, 180.0, 0.0, 12, true, 720.5)
	f.Add(0.0, 200.0, 0.0, 20, false, 200.0)
	f.Add(0.0, 200.0, 10.0, 0, false, 200.1)
	f.Add(-3.3, 7.1, 0.0, 7, true, -1e-20)
	f.Add(-1e308, 1e308, 0.0, 3, true, 5.0)
	f.Add(0.0, 1e-300, 0.0, 100000, false, 5e-301)
	f.Fuzz(func(t *testing.T, lo, hi, width float64, bins int, periodic bool, v float64) {
		a := Axis{Min: lo, Max: hi, BinWidth: width, Bins: bins, Periodic: periodic}
		if a.Validate() != nil {
			if _, err := a.Bin(v); err == nil {
				t.Fatal("Bin on an invalid axis gave no error")
			}
			return
		}
		n := a.NumBins()
		i, err := a.Bin(v)
		inside := v >= lo && v <= hi
		if err != nil {
			if !math.IsNaN(v) && !math.IsInf(v, 0) && (periodic || inside) {
				t.Fatalf("Bin(%v) on %+v: %v", v, a, err)
			}
			return
		}
		if i < 0 || i >= n {
			t.Fatalf("Bin(%v) = %d outside [0, %d)", v, i, n)
		}
		if inside && v < hi {
			e := a.Edges()
			if !(e[i] <= v && (v < e[i+1] || (e[i+1] <= e[i]))) {
				t.Fatalf("Bin(%v) = %d but edges are [%v, %v)", v, i, e[i], e[i+1])
			}
		}
		hot := make([]float64, n)
		soft := make([]float64, n)
		if err := a.OneHot(hot, v); err != nil || hot[i] != 1 {
			t.Fatalf("OneHot(%v): %v, hot[%d] = %v", v, err, i, hot[i])
		}
		if err := a.Soft(soft, v); err != nil {
			t.Fatal(err)
		}
		sum := 0.0
		for _, x := range soft {
			if x < 0 || math.IsNaN(x) {
				t.Fatalf("Soft(%v) has weight %v", v, x)
			}
			sum += x
		}
		if math.Abs(sum-1) > 1e-9 {
			t.Fatalf("Soft(%v) sums to %v", v, sum)
		}
	})
}

// FuzzLoadCheck: any table goes through loading, binning and checking (with
// counts and hashes) to a recording or an error naming the file; never a
// panic.
func FuzzLoadCheck(f *testing.F) {
	addFixtures(f, ".csv")
	f.Add(csvRec(nil))
	f.Add(csvRec(map[int]string{2: ",2,0,1,1,1", 5: "90,1,1,-1,0.5,3"}))
	dir := f.TempDir()
	ax := Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 4}
	f.Fuzz(func(t *testing.T, b []byte) {
		p := filepath.Join(dir, "fuzz.csv")
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		for _, src := range []Source{
			{Responses: p, StimulusColumn: "stim"},
			{Responses: p, StimulusColumn: "stim", ConditionColumn: "cond", BlockColumn: "block", NeuronColumns: []string{"n0", "n1"}},
			{Responses: p, StimulusColumn: "stim", CovariateColumns: []string{"block", "cond"}},
		} {
			err := loadAndCheck(src, ax, CheckOptions{Counts: true, Hash: true})
			if err != nil && !strings.Contains(err.Error(), "fuzz.csv") {
				t.Fatalf("error %q does not name the file", err)
			}
		}
	})
}
