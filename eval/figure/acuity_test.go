package figure

import (
	"bytes"
	"math"
	"path/filepath"
	"strings"
	"testing"
)

// acuityData is information and thresholds of 12 pairs on a heading axis.
func acuityData() (stim, info, sd, shuf []float64) {
	for i := 0; i < 12; i++ {
		s := 15 + 30*float64(i)
		stim = append(stim, s)
		info = append(info, 0.02+0.01*math.Cos(s*math.Pi/180))
		sd = append(sd, 0.003)
		shuf = append(shuf, 0.015+0.005*math.Cos(s*math.Pi/180))
	}
	return
}

func TestAgainstStimulus(t *testing.T) {
	dir := t.TempDir()
	stim, info, sd, shuf := acuityData()
	thr := make([]float64, len(info))
	for i, v := range info {
		thr[i] = 1 / math.Sqrt(v)
	}
	thr[4] = math.Inf(1) // no information detected: not drawn, counted
	base := filepath.Join(dir, "info")
	if err := toFiles(base)(AgainstStimulus([]Band{{Name: "recorded", X: stim, Y: info, SD: sd}, {Name: "trial-shuffled", X: stim, Y: shuf}}, heading, "information (1/deg²)")); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH, []string{"heading (deg)", "information (1/deg²)", "recorded", "trial-shuffled", "90", "360"}, 2)
	base = filepath.Join(dir, "thr")
	if err := toFiles(base)(AgainstStimulus([]Band{{Name: "recorded", X: stim, Y: thr}}, heading, "threshold (deg)")); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH, []string{"recorded (1 not drawn)", "threshold (deg)"}, 1)
}

func TestSaturationFigure(t *testing.T) {
	dir := t.TempDir()
	n := []float64{5, 10, 20, 40, 80}
	a, eps := 0.001, 10.0
	var y, sd, fx, fy []float64
	for _, k := range n {
		y = append(y, a*k/(1+eps*a*k))
		sd = append(sd, 0.0005)
	}
	for k := 0.0; k <= 80; k += 4 {
		fx, fy = append(fx, k), append(fy, a*k/(1+eps*a*k))
	}
	cases := []struct {
		name  string
		asym  float64
		texts []string
	}{
		{"on scale", 0.1, []string{"neurons", "saturation fit", "1/eps = 0.1 (extrapolated)"}},
		{"off scale", 5, []string{"1/eps = 5 (extrapolated), off scale"}},
		{"no saturation", math.Inf(1), []string{"no saturation detected (1/eps infinite)"}},
		{"no fit", math.NaN(), []string{"recorded"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			base := filepath.Join(dir, strings.ReplaceAll(c.name, " ", "_"))
			if err := toFiles(base)(Saturation([]Band{{Name: "recorded", X: n, Y: y, SD: sd}}, fx, fy, c.asym, "information (1/deg²)")); err != nil {
				t.Fatal(err)
			}
			checkFigure(t, base, wantSVGH, wantH, c.texts, 1)
		})
	}
}

func TestAgainstSize(t *testing.T) {
	base := filepath.Join(t.TempDir(), "err")
	n := []float64{10, 100, 1000, 10000}
	if err := toFiles(base)(AgainstSize([]Band{{Name: "lda", X: n, Y: []float64{40, 10, 3, 1}, SD: []float64{3, 1, 0.3, math.NaN()}},
		{Name: "model-gaussian", X: n, Y: []float64{38, 8, 2, 0.7}}}, "mean absolute error (deg)")); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH, []string{"neurons", "mean absolute error (deg)", "lda", "model-gaussian", "100", "10000"}, 2)
}

func TestConfusion(t *testing.T) {
	B := 6
	centers := []float64{30, 90, 150, 210, 270, 330}
	counts := make([]int, B*B)
	for r := 0; r < B-1; r++ { // the last condition has no trials: a blank row
		counts[r*B+r] = 8
		counts[r*B+(r+1)%B] = 2
	}
	share := ConfusionShare(counts, B)
	if share[0] != 0.8 || share[1] != 0.2 || !math.IsNaN(share[(B-1)*B]) {
		t.Errorf("shares %v, want 0.8 and 0.2 in row 0 and NaN in the empty row", share[:2])
	}
	a, err := Confusion(counts, centers, heading)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := Confusion(counts, centers, heading)
	if !bytes.Equal(a.SVG, b.SVG) || !bytes.Equal(a.PNG, b.PNG) {
		t.Error("the same confusion matrix drawn twice differs")
	}
	base := filepath.Join(t.TempDir(), "conf")
	if err := toFiles(base)(a, nil); err != nil {
		t.Fatal(err)
	}
	s := readSVG(t, base+".svg")
	for _, want := range []string{"decoded heading (deg)", "true heading (deg)"} {
		if !s.hasText(want) {
			t.Errorf("confusion SVG lacks %q; texts %q", want, s.texts)
		}
	}
	if s.height != wantSVGScatter {
		t.Errorf("confusion SVG height %s, want the square size %s", s.height, wantSVGScatter)
	}
	readPNG(t, base+".png", wantW, 990)
	for _, f := range []func(){
		func() { ConfusionShare(counts[:5], B) },
		func() { Confusion([]int{1}, []float64{0}, heading) },
		func() { AgainstSize([]Band{{Name: "x", X: []float64{1}, Y: nil}}, "y") },
		func() { Saturation(nil, []float64{1}, nil, 1, "y") },
	} {
		func() {
			defer func() {
				if r := recover(); r == nil || !strings.HasPrefix(r.(string), "figure: ") {
					t.Errorf("recovered %v, want a panic starting \"figure: \"", r)
				}
			}()
			f()
		}()
	}
}
