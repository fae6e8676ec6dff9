package data_test

import (
	"fmt"

	"github.com/strialab/stria/data"
)

// Binning motion directions into 6-degree bins on a periodic axis.
func ExampleAxis_Bin() {
	ax := data.Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, BinWidth: 6}
	for _, v := range []float64{0, 5.999, 6, 359.9, 360, -0.1, 720.5} {
		b, _ := ax.Bin(v)
		fmt.Printf("%g -> %d\n", v, b)
	}
	fmt.Println(ax.BinLabel(59))
	// Output:
	// 0 -> 0
	// 5.999 -> 0
	// 6 -> 1
	// 359.9 -> 59
	// 360 -> 0
	// -0.1 -> 59
	// 720.5 -> 0
	// bin 59 [354, 360) deg
}

// A stratified hold-out split: two of each condition's ten trials go to the
// test set.
func ExampleHoldOut() {
	cond := make([]int, 30)
	for t := range cond {
		cond[t] = t % 3
	}
	s, err := data.HoldOut(cond, nil, 3, 0.2, 1)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(len(s.Train), len(s.Test))
	// Output:
	// 24 6
}
