package figure

import (
	"math"
	"math/rand/v2"
	"path/filepath"
	"strconv"
	"testing"
)

// TestHistogramIn: values outside RatioRange are counted in the legend, not
// drawn, and the x axis keeps its range: no tick label below -1 (the y axis
// counts neurons, so its labels are >= 0; an axis stretched to -724 would
// carry labels such as -600).
func TestHistogramIn(t *testing.T) {
	base := filepath.Join(t.TempDir(), "fev")
	a, _ := scores(rand.New(rand.NewPCG(5, 5)), 300)
	a[0], a[1], a[2], a[3] = -724, -3, 2.5, math.NaN() // 2 below -1, 1 above 1.5, 1 NaN [set here]
	if err := toFiles(base)(HistogramIn(a, "FEV", 0, RatioRange)); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH, []string{"FEV", "n = 299 (1 NaN excluded)", "outside the axis: 2 below -1, 1 above 1.5"}, 0)
	s := readSVG(t, base+".svg")
	for _, txt := range s.texts {
		if v, err := strconv.ParseFloat(txt, 64); err == nil && v < -1 {
			t.Errorf("tick label %q below the fixed range [-1, 1.5]", txt)
		}
	}
	// Counting [counted from the input]: bins of 0.1 over [-1, 1.5]; 1.5
	// itself goes in the last bin, -1 in the first.
	c, bad, below, above := countsIn([]float64{-1, -1.01, 1.5, 1.51, 0.05, math.Inf(1)}, -1, 1.5, 25)
	if bad != 1 || below != 1 || above != 1 || c[0] != 1 || c[24] != 1 || c[10] != 1 {
		t.Errorf("countsIn: bad %d below %d above %d, c[0] %v c[10] %v c[24] %v", bad, below, above, c[0], c[10], c[24])
	}
}

func TestHistogramsIn(t *testing.T) {
	base := filepath.Join(t.TempDir(), "ccn")
	a, b := scores(rand.New(rand.NewPCG(6, 6)), 200)
	b[0], b[1], b[2] = 40, math.NaN(), -9
	if err := toFiles(base)(HistogramsIn(map[string][]float64{"tuning fit": a, "encoder": b}, []string{"tuning fit", "encoder"}, "cc_norm", 0, RatioRange)); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH, []string{"tuning fit, n = 200", "encoder, n = 199 (1 NaN excluded; 1 below -1, 1 above 1.5)"}, 2)
	defer func() {
		if recover() == nil {
			t.Error("HistogramIn with an empty range did not panic")
		}
	}()
	HistogramIn(a, "x", 0, Range{1, 1})
}
