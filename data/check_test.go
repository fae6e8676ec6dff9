package data

import (
	"math"
	"slices"
	"strings"
	"testing"
)

func smallRecording() (*Recording, []int) {
	// 8 trials x 3 neurons; 4 conditions with 2 trials each; neuron 2 constant.
	y := NewMatrix(8, 3)
	for t := 0; t < 8; t++ {
		y.Data[t*3] = float32(t)
		y.Data[t*3+1] = float32(t % 3)
		y.Data[t*3+2] = 5
	}
	rec := &Recording{Y: y, Stim: []float64{0, 90, 180, 270, 1, 91, 181, 271},
		Neurons: []string{"a", "b", "c"}, Source: Source{Responses: "resp.csv"}}
	return rec, []int{0, 1, 2, 3, 0, 1, 2, 3}
}

func TestCheckWarnings(t *testing.T) {
	rec, cond := smallRecording()
	rep, err := Check(rec, cond, 4)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(rep.Constant, []int{2}) || len(rep.FewTrials) != 0 {
		t.Errorf("Constant %v FewTrials %v, want [2] and none", rep.Constant, rep.FewTrials)
	}
	if len(rep.Warnings) != 1 || !strings.Contains(rep.Warnings[0], `neuron 2 ("c")`) {
		t.Errorf("warnings %q", rep.Warnings)
	}
	rep, err = CheckWith(rec, cond, CheckOptions{NBins: 4, MinTrials: 3})
	if err != nil || len(rep.FewTrials) != 4 {
		t.Errorf("MinTrials 3: FewTrials %v, %v; want all four", rep.FewTrials, err)
	}
	rec.Block = []int{0, 0, 0, 0, 1, 1, 1, 2}
	rep, _ = Check(rec, cond, 4)
	if !strings.Contains(strings.Join(rep.Warnings, "|"), "1 of 3 block ids hold a single trial") {
		t.Errorf("warnings %q", rep.Warnings)
	}
}

func TestCheckErrors(t *testing.T) {
	ax := &Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: 8}
	cases := []struct {
		name   string
		change func(r *Recording, cond []int) ([]int, CheckOptions)
		want   []string
	}{
		{"nan", func(r *Recording, c []int) ([]int, CheckOptions) {
			r.Y.Data[5*3+1] = float32(math.NaN())
			r.Y.Data[7*3] = float32(math.Inf(1))
			return c, CheckOptions{NBins: 4}
		}, []string{"resp.csv", "2 non-finite", `trial 5, neuron 1 ("b"): NaN`, `trial 7, neuron 0 ("a"): +Inf`, "0-based"}},
		{"stim nan", func(r *Recording, c []int) ([]int, CheckOptions) {
			r.Stim[3] = math.NaN()
			return c, CheckOptions{NBins: 4}
		}, []string{"stimulus of trial 3 (0-based) is NaN"}},
		{"empty bins", func(r *Recording, c []int) ([]int, CheckOptions) {
			return []int{0, 1, 2, 3, 0, 1, 2, 3}, CheckOptions{NBins: 8, Axis: ax}
		}, []string{"4 of 8 stimulus bins have no trials", "bin 4 [180, 225) deg", "bin 7 [315, 360) deg"}},
		{"cond range", func(r *Recording, c []int) ([]int, CheckOptions) {
			c[6] = 9
			return c, CheckOptions{NBins: 4}
		}, []string{"trial 6 (0-based) has condition 9"}},
		{"cond length", func(r *Recording, c []int) ([]int, CheckOptions) {
			return c[:3], CheckOptions{NBins: 4}
		}, []string{"3 condition ids for 8 trials"}},
		{"stim length", func(r *Recording, c []int) ([]int, CheckOptions) {
			r.Stim = r.Stim[:2]
			return c, CheckOptions{NBins: 4}
		}, []string{"resp.csv has 8 trials but 2 stimulus values"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rec, cond := smallRecording()
			cond, opt := c.change(rec, cond)
			rep, err := CheckWith(rec, cond, opt)
			if rep == nil {
				t.Error("nil report")
			}
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
		})
	}
}
