package figure

import (
	"bytes"
	"encoding/xml"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// svgInfo is what the tests read back from an SVG file.
type svgInfo struct {
	width, height string         // root attributes
	texts         []string       // contents of all <text> elements
	strokes       map[string]int // stroke colour -> number of <path> elements
}

// readSVG parses an SVG file as XML (failing the test if it does not parse).
func readSVG(t *testing.T, path string) svgInfo {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	info := svgInfo{strokes: map[string]int{}}
	d := xml.NewDecoder(f)
	inText := false
	for {
		tok, err := d.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("%s does not parse as XML: %v", path, err)
		}
		switch e := tok.(type) {
		case xml.StartElement:
			for _, a := range e.Attr {
				switch {
				case e.Name.Local == "svg" && a.Name.Local == "width":
					info.width = a.Value
				case e.Name.Local == "svg" && a.Name.Local == "height":
					info.height = a.Value
				case e.Name.Local == "path" && a.Name.Local == "style":
					for _, kv := range strings.Split(a.Value, ";") {
						if c, ok := strings.CutPrefix(kv, "stroke:"); ok {
							info.strokes[c]++
						}
					}
				}
			}
			if e.Name.Local == "text" {
				inText = true
				info.texts = append(info.texts, "")
			}
		case xml.EndElement:
			if e.Name.Local == "text" {
				inText = false
			}
		case xml.CharData:
			if inText {
				info.texts[len(info.texts)-1] += string(e)
			}
		}
	}
	return info
}

func (s svgInfo) hasText(want string) bool {
	for _, t := range s.texts {
		if t == want {
			return true
		}
	}
	return false
}

// readPNG decodes a PNG file and checks its pixel size.
func readPNG(t *testing.T, path string, w, h int) image.Image {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("%s does not decode as PNG: %v", path, err)
	}
	if got := img.Bounds().Size(); got.X != w || got.Y != h {
		t.Errorf("%s is %dx%d pixels, want %dx%d", path, got.X, got.Y, w, h)
	}
	return img
}

// pixelStats returns the share of non-white pixels and the number of pixels
// exactly equal to each palette colour.
func pixelStats(img image.Image) (ink float64, perColour []int) {
	perColour = make([]int, len(Palette))
	b := img.Bounds()
	n, nonWhite := 0, 0
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			c := color.RGBAModel.Convert(img.At(x, y)).(color.RGBA)
			n++
			if c.R < 250 || c.G < 250 || c.B < 250 {
				nonWhite++
			}
			for i, p := range Palette {
				if c == p {
					perColour[i]++
				}
			}
		}
	}
	return float64(nonWhite) / float64(n), perColour
}

// Documented sizes (doc.go): 3.5 x 2.6 in and 3.5 x 3.3 in at 300 dpi.
const (
	wantW, wantH   = 1050, 780 // 3.5*300, 2.6*300 [doc.go]
	wantScatterH   = 990       // 3.3*300 [doc.go]
	wantSVGW       = "252pt"   // 3.5*72 [doc.go]
	wantSVGH       = "187.2pt" // 2.6*72 [doc.go]
	wantSVGScatter = "237.6pt" // 3.3*72 [doc.go]
)

var heading = AxisLabels{Label: "heading", Unit: "deg", Periodic: true, Period: 360}

// checkFigure runs the content checks shared by all figures: sizes, labels,
// number of series colours in SVG and PNG, and that the PNG is not blank.
func checkFigure(t *testing.T, base string, svgH string, pngH int, texts []string, series int) {
	t.Helper()
	s := readSVG(t, base+".svg")
	if s.width != wantSVGW || s.height != svgH {
		t.Errorf("SVG size %s x %s, want %s x %s", s.width, s.height, wantSVGW, svgH)
	}
	for _, want := range texts {
		if !s.hasText(want) {
			t.Errorf("SVG has no text %q; texts: %q", want, s.texts)
		}
	}
	for i, p := range Palette {
		hex := strings.ToUpper(hexOf(p))
		if got := s.strokes[hex] > 0; got != (i < series) {
			t.Errorf("SVG stroke %s used %d times; want series %d of %d present: %v", hex, s.strokes[hex], i+1, series, i < series)
		}
	}
	img := readPNG(t, base+".png", wantW, pngH)
	ink, per := pixelStats(img)
	if ink < 0.02 || ink > 0.6 {
		t.Errorf("PNG non-white share %.3f, want between 0.02 and 0.6", ink)
	}
	for i := range min(series, len(Palette)) {
		if per[i] < 100 {
			t.Errorf("PNG has %d pixels of series colour %d (%s), want >= 100", per[i], i+1, hexOf(Palette[i]))
		}
	}
}

func hexOf(c color.RGBA) string {
	const digits = "0123456789ABCDEF"
	b := []byte{'#', 0, 0, 0, 0, 0, 0}
	for i, v := range []uint8{c.R, c.G, c.B} {
		b[1+2*i], b[2+2*i] = digits[v>>4], digits[v&15]
	}
	return string(b)
}

func TestFilters(t *testing.T) {
	dir := t.TempDir()
	base := filepath.Join(dir, "filters")
	const C, K = 3, 9
	f := make([]float64, C*K)
	for c := range C {
		for k := range K {
			f[c*K+k] = math.Cos(float64(k-4)*0.6+float64(c)) * math.Exp(-float64((k-4)*(k-4))/8)
		}
	}
	if err := toFiles(base)(Filters(f, C, K, 6, heading)); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH, []string{"heading offset (deg)", "weight (a.u.)", "ch 1", "ch 2", "ch 3"}, C)

}

func TestTapOffsets(t *testing.T) {
	// nn/conv.go: "same" padding puts (K-1)/2 (integer division) on the left,
	// so tap j reads input offset j-(K-1)/2 [derived from nn's padding rule].
	for _, tc := range []struct {
		k    int
		w    float64
		want []float64
	}{
		{9, 6, []float64{-24, -18, -12, -6, 0, 6, 12, 18, 24}},
		{4, 1, []float64{-1, 0, 1, 2}},
		{1, 3, []float64{0}},
	} {
		got := TapOffsets(tc.k, tc.w)
		for j := range tc.want {
			if got[j] != tc.want[j] { // exact: small integers times the bin width
				t.Errorf("TapOffsets(%d, %g)[%d] = %g, want %g", tc.k, tc.w, j, got[j], tc.want[j])
			}
		}
	}
}

// tuningData is a synthetic direction-tuned neuron (von Mises, eval/methods.md §7).
func tuningData(r *rand.Rand) (centers, mean, sem, fx, fy []float64) {
	vm := func(deg float64) float64 {
		return 4 + 18*math.Exp(2*(math.Cos((deg-135)*math.Pi/180)-1))
	}
	for b := range 30 {
		x := 6 + 12*float64(b)
		centers = append(centers, x)
		mean = append(mean, vm(x)+r.NormFloat64())
		sem = append(sem, 0.6+0.4*r.Float64())
	}
	for i := 0; i <= 360; i += 2 {
		fx = append(fx, float64(i))
		fy = append(fy, vm(float64(i)))
	}
	return
}

func TestTuning(t *testing.T) {
	dir := t.TempDir()
	base := filepath.Join(dir, "tuning")
	c, m, s, fx, fy := tuningData(rand.New(rand.NewPCG(1, 1)))
	m[3] = math.NaN() // skipped, must not fail
	s[5] = math.NaN() // point without bar
	curves := []Curve{{Name: "encoder", X: c, Y: m}, {Name: "von Mises", X: fx, Y: fy}}
	if err := toFiles(base)(Tuning(c, m, s, curves, heading, "rate (spikes/s)")); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH,
		[]string{"heading (deg)", "rate (spikes/s)", "encoder", "von Mises", "data (mean ± s.e.m.)", "0", "90", "180", "270", "360"}, 2)
}

func scores(r *rand.Rand, n int) (a, b []float64) {
	a, b = make([]float64, n), make([]float64, n)
	for i := range a {
		a[i] = 0.6 + 0.15*r.NormFloat64()
		b[i] = a[i] + 0.05 + 0.08*r.NormFloat64()
	}
	return a, b
}

func TestHistogram(t *testing.T) {
	base := filepath.Join(t.TempDir(), "hist")
	a, _ := scores(rand.New(rand.NewPCG(2, 2)), 400)
	a[0], a[1], a[2] = math.NaN(), math.NaN(), math.Inf(1)
	if err := toFiles(base)(Histogram(a, "CC_norm", 25)); err != nil {
		t.Fatal(err)
	}
	// 400 values, 3 non-finite: n = 397 [counted from the input above]
	checkFigure(t, base, wantSVGH, wantH, []string{"CC_norm", "neurons", "n = 397 (3 NaN excluded)"}, 0)
	img := readPNG(t, base+".png", wantW, wantH)
	if _, per := pixelStats(img); per[0] < 10000 {
		t.Errorf("histogram bars: %d pixels of %s, want >= 10000", per[0], hexOf(Palette[0]))
	}
}

func TestHistograms(t *testing.T) {
	base := filepath.Join(t.TempDir(), "hists")
	a, b := scores(rand.New(rand.NewPCG(3, 3)), 300)
	_, c := scores(rand.New(rand.NewPCG(4, 4)), 300)
	b[7] = math.NaN()
	series := map[string][]float64{"tuning fit": a, "encoder": b, "encoder (wide)": c}
	if err := toFiles(base)(Histograms(series, []string{"tuning fit", "encoder", "missing", "encoder (wide)"}, "CC_norm", 20)); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH,
		[]string{"CC_norm", "neurons", "tuning fit, n = 300", "encoder, n = 299 (1 NaN excluded)", "encoder (wide), n = 300"}, 3)
}

func TestScatter(t *testing.T) {
	base := filepath.Join(t.TempDir(), "scatter")
	a := []float64{0.1, 0.2, 0.3, 0.4, 0.5, math.NaN(), 0.7, 0.8}
	b := []float64{0.2, 0.1, 0.35, 0.4, 0.9, 0.5, 0.6, math.NaN()}
	// Finite pairs: 6; b > a at indices 0, 2, 4 (0.4 = 0.4 is a tie, not above): 3 of 6 [counted by hand].
	if err := toFiles(base)(Scatter(a, b, "tuning fit", "encoder", "CC_norm")); err != nil {
		t.Fatal(err)
	}
	s := readSVG(t, base+".svg")
	for _, want := range []string{"CC_norm, tuning fit", "CC_norm, encoder", "n = 6 (2 NaN excluded)", "encoder > tuning fit: 3 of 6 (50.0 %)", "identity"} {
		if !s.hasText(want) {
			t.Errorf("SVG has no text %q; texts %q", want, s.texts)
		}
	}
	if s.width != wantSVGW || s.height != wantSVGScatter {
		t.Errorf("SVG size %s x %s, want %s x %s", s.width, s.height, wantSVGW, wantSVGScatter)
	}
	if s.strokes[hexOf(Guide)] == 0 {
		t.Errorf("no identity line (stroke %s)", hexOf(Guide))
	}
	img := readPNG(t, base+".png", wantW, wantScatterH)
	if _, per := pixelStats(img); per[0] < 6*50 {
		t.Errorf("scatter points: %d pixels of %s, want >= 300", per[0], hexOf(Palette[0]))
	}

	base2 := filepath.Join(t.TempDir(), "scatter-many")
	x, y := scores(rand.New(rand.NewPCG(5, 5)), 2000)
	if err := toFiles(base2)(Scatter(x, y, "tuning fit", "encoder", "CC_norm")); err != nil {
		t.Fatal(err)
	}
	img = readPNG(t, base2+".png", wantW, wantScatterH)
	if ink, per := pixelStats(img); ink < 0.05 || per[0] < 20000 {
		t.Errorf("dense scatter: non-white share %.3f, %d pixels of palette colour 1", ink, per[0])
	}
}

func TestPreferred(t *testing.T) {
	base := filepath.Join(t.TempDir(), "preferred")
	r := rand.New(rand.NewPCG(6, 6))
	p := make([]float64, 600)
	for i := range p {
		p[i] = 720*r.Float64() - 360 // wraps into 0..360
	}
	p[0] = math.NaN()
	if err := toFiles(base)(Preferred(p, heading, 24)); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH, []string{"preferred heading (deg)", "neurons", "n = 599 (1 NaN excluded)", "0", "360"}, 0)
}

func TestWrapCounts(t *testing.T) {
	// Period 360, 4 bins of 90 deg: -10 -> 350 (bin 3), 370 -> 10 (bin 0),
	// 360 -> 0 (bin 0), 90 -> bin 1, -1e-14 -> 0 (rounds to 360, wrapped) [computed by hand].
	ax := AxisLabels{Periodic: true, Period: 360}
	base := filepath.Join(t.TempDir(), "wrap")
	if err := toFiles(base)(Preferred([]float64{-10, 370, 360, 90, -1e-14}, ax, 4)); err != nil {
		t.Fatal(err)
	}
	v := []float64{350, 10, 0, 90, 0}
	got, bad := counts(v, 0, 360, 4)
	want := []float64{3, 1, 0, 1}
	for i := range want {
		if got[i] != want[i] || bad != 0 {
			t.Fatalf("counts = %v (bad %d), want %v", got, bad, want)
		}
	}
	if n := readSVG(t, base+".svg"); !n.hasText("n = 5") {
		t.Errorf("texts %q lack n = 5", n.texts)
	}
}

func TestEmptyAndConstant(t *testing.T) {
	// User data may be all NaN or constant: no panic, a figure with a note.
	dir := t.TempDir()
	nan := []float64{math.NaN(), math.NaN()}
	if err := toFiles(filepath.Join(dir, "h"))(Histogram(nan, "CC_norm", 10)); err != nil {
		t.Fatal(err)
	}
	if s := readSVG(t, filepath.Join(dir, "h.svg")); !s.hasText("no finite values (2 NaN)") {
		t.Errorf("texts %q", s.texts)
	}
	if err := toFiles(filepath.Join(dir, "c"))(Histogram([]float64{0.5, 0.5, 0.5}, "CC_norm", 10)); err != nil {
		t.Fatal(err)
	}
	if err := toFiles(filepath.Join(dir, "s"))(Scatter(nan, nan, "A", "B", "R2")); err != nil {
		t.Fatal(err)
	}
	if err := toFiles(filepath.Join(dir, "p"))(Preferred(nan, heading, 0)); err != nil {
		t.Fatal(err)
	}
	if err := toFiles(filepath.Join(dir, "t"))(Tuning([]float64{0, 1}, nan, nan, []Curve{{Name: "m", X: []float64{0}, Y: []float64{math.NaN()}}}, AxisLabels{}, "rate (spikes/s)")); err != nil {
		t.Fatal(err)
	}
	if err := toFiles(filepath.Join(dir, "hs"))(Histograms(nil, nil, "CC_norm", 0)); err != nil {
		t.Fatal(err)
	}
}

func TestPanics(t *testing.T) {
	dir := t.TempDir()
	for name, f := range map[string]func(){
		"filters shape": func() { toFiles(filepath.Join(dir, "f"))(Filters(make([]float64, 5), 2, 3, 1, heading)) },
		"tuning sem": func() {
			toFiles(filepath.Join(dir, "t"))(Tuning([]float64{1, 2}, []float64{1, 2}, []float64{1}, nil, heading, "y"))
		},
		"scatter len": func() { toFiles(filepath.Join(dir, "s"))(Scatter([]float64{1}, nil, "a", "b", "x")) },
	} {
		t.Run(name, func(t *testing.T) {
			defer func() {
				r := recover()
				if s, ok := r.(string); !ok || !strings.HasPrefix(s, "figure: ") {
					t.Errorf("recovered %v, want a \"figure: ...\" panic", r)
				}
			}()
			f()
		})
	}
}

func TestDeterministic(t *testing.T) {
	// The same figure drawn twice gives byte-identical SVG and PNG files.
	dir := t.TempDir()
	c, m, s, fx, fy := tuningData(rand.New(rand.NewPCG(7, 7)))
	a, b := scores(rand.New(rand.NewPCG(8, 8)), 500)
	draw := func(base string) {
		curves := []Curve{{Name: "encoder", X: c, Y: m}, {Name: "von Mises", X: fx, Y: fy}}
		if err := toFiles(base + "-t")(Tuning(c, m, s, curves, heading, "rate (spikes/s)")); err != nil {
			t.Fatal(err)
		}
		if err := toFiles(base + "-s")(Scatter(a, b, "A", "B", "CC_norm")); err != nil {
			t.Fatal(err)
		}
		if err := toFiles(base + "-h")(Histograms(map[string][]float64{"A": a, "B": b}, []string{"A", "B"}, "CC_norm", 20)); err != nil {
			t.Fatal(err)
		}
	}
	draw(filepath.Join(dir, "one"))
	draw(filepath.Join(dir, "two"))
	for _, kind := range []string{"-t", "-s", "-h"} {
		for _, ext := range []string{".svg", ".png"} {
			x, _ := os.ReadFile(filepath.Join(dir, "one"+kind+ext))
			y, _ := os.ReadFile(filepath.Join(dir, "two"+kind+ext))
			if len(x) == 0 || !bytes.Equal(x, y) {
				t.Errorf("%s%s differs between two draws (%d vs %d bytes)", kind, ext, len(x), len(y))
			}
		}
	}

}

func TestLoss(t *testing.T) {
	dir := t.TempDir()
	base := filepath.Join(dir, "loss")
	ep, tr, va := make([]float64, 50), make([]float64, 50), make([]float64, 50)
	for i := range ep {
		ep[i] = float64(i + 1)
		tr[i] = 1 / float64(i+1)
		va[i] = 1.2/float64(i+1) + 0.01*float64(i)
	}
	va[10] = math.NaN() // a gap, not a crash
	if err := toFiles(base)(Loss(ep, tr, va)); err != nil {
		t.Fatal(err)
	}
	checkFigure(t, base, wantSVGH, wantH, []string{"epoch", "loss", "train", "validation"}, 2)
	if err := toFiles(base + "-empty")(Loss(nil, nil, nil)); err != nil {
		t.Fatalf("no epochs: %v", err)
	}
}
