package data_test

import (
	"fmt"
	"os"
	"path/filepath"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/format"
)

// The order of calls that keeps a fit from mixing two versions of its input:
// load, bin, check (with the content hashes), run every pass over the
// values under Guard, and make sure no input changed before writing
// anything as final.
func Example_guard() {
	dir, _ := os.MkdirTemp("", "example")
	defer os.RemoveAll(dir)
	resp := filepath.Join(dir, "resp.npy")
	stim := filepath.Join(dir, "stim.npy")
	format.WriteNPY(resp, []int{4, 2}, []float32{0, 1, 2, 3, 4, 5, 6, 7})
	format.WriteNPY64(stim, []int{4}, []float64{0, 90, 180, 270})

	rec, err := data.Load(data.Source{Responses: resp, Stimulus: stim})
	if err != nil {
		fmt.Println(err)
		return
	}
	ax := data.Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 4}
	cond, err := rec.Bin(ax)
	if err != nil {
		fmt.Println(err)
		return
	}
	if _, err := data.CheckWith(rec, cond, data.CheckOptions{NBins: 4, Axis: &ax, Counts: true, Hash: true}); err != nil {
		fmt.Println(err)
		return
	}
	var total float64
	err = format.Guard(func() { // the fit and the scoring
		for _, v := range rec.Y.Data {
			total += float64(v)
		}
	})
	if err == nil {
		err = rec.Unchanged() // before the results are written as final
	}
	fmt.Println(total, err)
	for _, f := range rec.Files() {
		fmt.Println(filepath.Base(f.Path), f.Size, f.Hash[:15])
	}
	// Output:
	// 28 <nil>
	// resp.npy 160 crc32pair-4MiB:
	// stim.npy 160 crc32pair-4MiB:
}
