package figure

import (
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Band is a series with a spread for the acuity figures: Y[i] ± SD[i] at
// X[i] (SD may be nil or hold NaN: no bar).
type Band struct {
	Name     string
	X, Y, SD []float64
}

func checkBand(fn string, b Band) {
	if len(b.Y) != len(b.X) || (b.SD != nil && len(b.SD) != len(b.X)) {
		panic(fmt.Sprintf("figure: %s series %q has %d x, %d y and %d sd", fn, b.Name, len(b.X), len(b.Y), len(b.SD)))
	}
}

// addBand draws b in SeriesStyle(i): a line with markers, and error bars
// where SD is finite and positive. It returns the thumbnails for the
// legend (nil when nothing is finite).
func addBand(p *plot.Plot, b Band, i int) []plot.Thumbnailer {
	st := SeriesStyle(i)
	var thumbs []plot.Thumbnailer
	if l := addLines(p, b.X, b.Y, st); l != nil {
		thumbs = append(thumbs, l)
	}
	var pts plotter.XYs
	var bars plotterErrs
	for k := range b.X {
		if !finite(b.X[k]) || !finite(b.Y[k]) {
			continue
		}
		pts = append(pts, plotter.XY{X: b.X[k], Y: b.Y[k]})
		if b.SD != nil && finite(b.SD[k]) && b.SD[k] > 0 {
			bars.XYs = append(bars.XYs, plotter.XY{X: b.X[k], Y: b.Y[k]})
			bars.YErrors = append(bars.YErrors, struct{ Low, High float64 }{b.SD[k], b.SD[k]})
		}
	}
	if len(bars.XYs) > 0 {
		eb, err := plotter.NewYErrorBars(bars)
		if err != nil {
			panic("figure: " + err.Error()) // cannot happen: finite values
		}
		eb.LineStyle = draw.LineStyle{Color: st.Color, Width: vg.Points(0.8)}
		eb.CapWidth = vg.Points(2.5)
		p.Add(eb)
	}
	if len(pts) > 0 {
		s, _ := plotter.NewScatter(pts)
		s.GlyphStyle = draw.GlyphStyle{Color: st.Color, Radius: vg.Points(1.4), Shape: draw.CircleGlyph{}}
		p.Add(s)
		thumbs = append(thumbs, s)
	}
	return thumbs
}

// AgainstStimulus plots one or more series against the stimulus (e.g. the
// information or the threshold of every pair of neighbouring conditions,
// at the pair's midpoint, with and without noise correlations), each with
// its spread as error bars, in SeriesStyle(i) with legend Band.Name. On a
// periodic axis the x range is 0..Period with ticks at quarter periods.
// Non-finite values (a threshold of +Inf where no information was
// detected) are not drawn; the legend counts them. yLabel carries the
// unit.
//
// Panics if a series' lengths differ.
func AgainstStimulus(series []Band, ax AxisLabels, yLabel string) (*Image, error) {
	p := newPlot(axisLabel(ax.Label, ax.Unit), yLabel)
	for i, b := range series {
		checkBand("AgainstStimulus", b)
		bad := 0
		for k := range b.Y {
			if !finite(b.Y[k]) {
				bad++
			}
		}
		name := b.Name
		if bad > 0 {
			name += fmt.Sprintf(" (%d not drawn)", bad)
		}
		p.Legend.Add(name, addBand(p, b, i)...)
	}
	if ax.periodic() {
		p.X.Min = math.Min(p.X.Min, 0)
		p.X.Max = math.Max(p.X.Max, ax.Period)
		p.X.Tick.Marker = periodicTicks{ax.Period}
	}
	emptyRanges(p)
	if p.Y.Min > 0 {
		p.Y.Min = 0
	}
	headroom(p, 0.12*float64(min(len(series), 8)))
	return finish(p, Width, Height)
}

// Saturation plots information against population size: the measured
// series (mean ± sd over random subsets, SeriesStyle(i)), the fitted
// saturation curve fitY at fitX (near-black), and the fitted asymptote
// (dashed grey line) when it is finite and at most three times the largest
// value drawn; otherwise the legend gives its value as off the scale.
// asymptote is NaN when there is no fit. yLabel carries the unit.
//
// Panics if a series' lengths differ or len(fitX) != len(fitY).
func Saturation(series []Band, fitX, fitY []float64, asymptote float64, yLabel string) (*Image, error) {
	if len(fitX) != len(fitY) {
		panic(fmt.Sprintf("figure: Saturation fit has %d x and %d y", len(fitX), len(fitY)))
	}
	p := newPlot("neurons", yLabel)
	top := math.Inf(-1)
	for i, b := range series {
		checkBand("Saturation", b)
		p.Legend.Add(b.Name, addBand(p, b, i)...)
		for k := range b.Y {
			if finite(b.Y[k]) {
				top = math.Max(top, b.Y[k])
			}
		}
	}
	if l := addLines(p, fitX, fitY, draw.LineStyle{Color: Ink, Width: vg.Points(1)}); l != nil {
		p.Legend.Add("saturation fit", l)
	}
	if finite(asymptote) && asymptote > 0 {
		label := fmt.Sprintf("1/eps = %.3g (extrapolated)", asymptote)
		if asymptote <= 3*top && len(fitX) > 0 {
			l, _ := plotter.NewLine(plotter.XYs{{X: 0, Y: asymptote}, {X: fitX[len(fitX)-1], Y: asymptote}})
			l.LineStyle = draw.LineStyle{Color: Guide, Width: vg.Points(0.8), Dashes: []vg.Length{vg.Points(4), vg.Points(2)}}
			p.Add(l)
			p.Legend.Add(label, l)
		} else {
			p.Legend.Add(label + ", off scale")
		}
	} else if math.IsInf(asymptote, 1) {
		p.Legend.Add("no saturation detected (1/eps infinite)")
	}
	emptyRanges(p)
	p.X.Min = 0
	if p.Y.Min > 0 {
		p.Y.Min = 0
	}
	headroom(p, 0.12*float64(min(len(series)+2, 8)))
	return finish(p, Width, Height)
}

// AgainstSize plots series against the number of neurons on a logarithmic
// x axis (e.g. decoding error against population size), each as mean ± sd
// in SeriesStyle(i). Sizes must be positive. yLabel carries the unit.
//
// Panics if a series' lengths differ.
func AgainstSize(series []Band, yLabel string) (*Image, error) {
	p := newPlot("neurons", yLabel)
	p.X.Scale = plot.LogScale{}
	p.X.Tick.Marker = plot.LogTicks{Prec: -1}
	for i, b := range series {
		checkBand("AgainstSize", b)
		x := make([]float64, len(b.X))
		for k, v := range b.X {
			x[k] = v
			if !(v > 0) {
				x[k] = math.NaN()
			}
		}
		b.X = x
		p.Legend.Add(b.Name, addBand(p, b, i)...)
	}
	if math.IsInf(p.X.Min, 0) || !(p.X.Min > 0) {
		p.X.Min, p.X.Max = 1, 10
	}
	if p.X.Max <= p.X.Min {
		p.X.Min, p.X.Max = p.X.Min/2, p.X.Max*2
	}
	emptyRanges(p)
	if p.Y.Min > 0 {
		p.Y.Min = 0
	}
	headroom(p, 0.12*float64(min(len(series), 8)))
	return finish(p, Width, Height)
}

// confusionGrid is the heat map's grid: cell (c, r) is decoded condition
// c of true condition r, as the share of r's trials.
type confusionGrid struct {
	share   []float64
	centers []float64
}

func (g confusionGrid) Dims() (c, r int)   { return len(g.centers), len(g.centers) }
func (g confusionGrid) Z(c, r int) float64 { return g.share[r*len(g.centers)+c] }
func (g confusionGrid) X(c int) float64    { return g.centers[c] }
func (g confusionGrid) Y(r int) float64    { return g.centers[r] }

// ramp is a sequential palette from white to Palette[0] (blue), in steps.
type ramp []color.Color

func (r ramp) Colors() []color.Color { return r }

func blueRamp(steps int) ramp {
	out := make(ramp, steps)
	to := Palette[0]
	for i := range out {
		f := float64(i) / float64(steps-1)
		mix := func(a uint8) uint8 { return uint8(math.Round(255 + f*(float64(a)-255))) }
		out[i] = color.RGBA{R: mix(to.R), G: mix(to.G), B: mix(to.B), A: 0xff}
	}
	return out
}

// ConfusionShare returns the confusion matrix counts (B x B row-major, true
// condition by row) as the share of each true condition's trials (rows
// without trials are NaN).
func ConfusionShare(counts []int, B int) []float64 {
	if len(counts) != B*B {
		panic(fmt.Sprintf("figure: confusion matrix of %d counts, want %d x %d", len(counts), B, B))
	}
	share := make([]float64, B*B)
	for r := 0; r < B; r++ {
		tot := 0
		for c := 0; c < B; c++ {
			tot += counts[r*B+c]
		}
		for c := 0; c < B; c++ {
			share[r*B+c] = math.NaN()
			if tot > 0 {
				share[r*B+c] = float64(counts[r*B+c]) / float64(tot)
			}
		}
	}
	return share
}

// Confusion draws a confusion matrix as a heat map: the x axis is the
// decoded stimulus, the y axis the true one (both at the condition
// centres, which must be evenly spaced for the cells to tile), and each
// cell's shade the share of the true condition's trials decoded there
// (ConfusionShare), from white (0) to blue (1); a true condition without
// trials is left blank. The diagonal is where correct decisions fall.
// The figure is square (Width x ScatterHeight).
//
// Panics if len(counts) != len(centers)^2 or there are fewer than 2
// conditions.
func Confusion(counts []int, centers []float64, ax AxisLabels) (*Image, error) {
	B := len(centers)
	if B < 2 {
		panic("figure: Confusion needs at least 2 conditions")
	}
	share := ConfusionShare(counts, B)
	hm := plotter.NewHeatMap(confusionGrid{share: share, centers: centers}, blueRamp(64))
	hm.Min, hm.Max = 0, 1
	hm.NaN = color.RGBA{A: 0}
	p := newPlot("decoded "+axisLabel(ax.Label, ax.Unit), "true "+axisLabel(ax.Label, ax.Unit))
	p.Add(hm)
	if ax.periodic() {
		p.X.Tick.Marker = periodicTicks{ax.Period}
		p.Y.Tick.Marker = periodicTicks{ax.Period}
	}
	return finish(p, Width, ScatterHeight)
}
