package figure

import (
	"bytes"
	"fmt"
	"math"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Figure sizes and resolution; see the package documentation.
const (
	Width         = 3.5 * vg.Inch // single-column width
	Height        = 2.6 * vg.Inch // height of most figures
	ScatterHeight = 3.3 * vg.Inch // height of Scatter, for a near-square data area
	DPI           = 300           // PNG resolution in dots per inch

	LabelSize  = 9 * vg.Length(1)   // axis labels, pt
	TickSize   = 8 * vg.Length(1)   // tick labels, pt
	LegendSize = 8 * vg.Length(1)   // legend text, pt
	LineWidth  = 1.2 * vg.Length(1) // series lines, pt
)

// sans is the typeface of all text: Liberation Sans, registered by gonum/plot.
var sans = font.Font{Typeface: "Liberation", Variant: "Sans"}

// dashes are used, in turn, once the palette's colours have all been used.
var dashes = [][]vg.Length{
	nil,
	{vg.Points(4), vg.Points(2)},
	{vg.Points(1), vg.Points(1.5)},
	{vg.Points(5), vg.Points(1.5), vg.Points(1), vg.Points(1.5)},
}

// SeriesStyle returns the line style of series i (0-based): colour
// Palette[i mod len(Palette)], width LineWidth, solid for the first
// len(Palette) series, then dashed, dotted and dash-dotted.
func SeriesStyle(i int) draw.LineStyle {
	if i < 0 {
		panic("figure: negative series index")
	}
	n := len(Palette)
	return draw.LineStyle{
		Color:  Palette[i%n],
		Width:  LineWidth,
		Dashes: dashes[(i/n)%len(dashes)],
	}
}

// newPlot returns a plot with stria's fonts, no title and the legend at the top right.
func newPlot(xLabel, yLabel string) *plot.Plot {
	p := plot.New()
	p.X.Label.Text = xLabel
	p.Y.Label.Text = yLabel
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font = font.From(sans, LabelSize)
		a.Label.TextStyle.Color = Ink
		a.Label.Padding = vg.Points(3)
		a.Tick.Label.Font = font.From(sans, TickSize)
		a.Tick.Label.Color = Ink
		a.Padding = vg.Points(3)
		a.LineStyle.Width = vg.Points(0.6)
		a.Tick.LineStyle.Width = vg.Points(0.6)
		a.Tick.Length = vg.Points(3)
		a.Tick.Marker = niceTicks{}
	}
	p.Legend.TextStyle.Font = font.From(sans, LegendSize)
	p.Legend.TextStyle.Color = Ink
	p.Legend.Top = true
	p.Legend.ThumbnailWidth = vg.Points(14)
	p.Legend.Padding = vg.Points(1)
	p.Legend.YOffs = -vg.Points(2)
	return p
}

// axisLabel joins a label and a unit as "label (unit)".
func axisLabel(label, unit string) string {
	if label == "" {
		label = "stimulus"
	}
	if unit == "" {
		return label
	}
	return label + " (" + unit + ")"
}

// headroom extends the y axis of p upwards by frac of its range, leaving an
// empty band at the top for the legend.
func headroom(p *plot.Plot, frac float64) {
	lo, hi := p.Y.Min, p.Y.Max
	if !(hi > lo) || math.IsInf(hi, 0) || math.IsInf(lo, 0) {
		return
	}
	p.Y.Max = hi + frac*(hi-lo)
}

// emptyRanges gives p unit axes when nothing was added to it.
func emptyRanges(p *plot.Plot) {
	if math.IsInf(p.X.Min, 0) || math.IsInf(p.X.Max, 0) || !(p.X.Max >= p.X.Min) {
		p.X.Min, p.X.Max = 0, 1
	}
	if math.IsInf(p.Y.Min, 0) || math.IsInf(p.Y.Max, 0) || !(p.Y.Max >= p.Y.Min) {
		p.Y.Min, p.Y.Max = 0, 1
	}
}

// periodicTicks marks a periodic axis at quarters of its period.
type periodicTicks struct{ period float64 }

func (t periodicTicks) Ticks(min, max float64) []plot.Tick {
	step := t.period / 4
	var ticks []plot.Tick
	for i := math.Ceil(min/step - 1e-9); i*step <= max+1e-9*t.period; i++ {
		v := i * step
		if v == 0 {
			v = 0 // no "-0"
		}
		ticks = append(ticks, plot.Tick{Value: v, Label: strconv.FormatFloat(v, 'g', 4, 64)})
	}
	return ticks
}

// niceTicks labels 4 to 8 ticks at multiples of 1, 2 or 5 times a power of ten.
type niceTicks struct{}

func (niceTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || math.IsInf(hi-lo, 0) {
		return []plot.Tick{{Value: lo, Label: strconv.FormatFloat(lo, 'g', 4, 64)}}
	}
	rough := (hi - lo) / 5
	mag := math.Pow(10, math.Floor(math.Log10(rough)))
	step := mag
	for _, m := range []float64{1, 2, 5, 10} {
		step = m * mag
		if (hi-lo)/step <= 7 {
			break
		}
	}
	dec := max(0, -int(math.Floor(math.Log10(step)+1e-9)))
	var ticks []plot.Tick
	for i := math.Ceil(lo/step - 1e-9); i*step <= hi+1e-9*step; i++ {
		v := i * step
		if v == 0 {
			v = 0 // no "-0"
		}
		ticks = append(ticks, plot.Tick{Value: v, Label: strconv.FormatFloat(v, 'f', dec, 64)})
	}
	return ticks
}

// render draws p on an SVG and a PNG canvas of size w x h and returns both files' bytes.
func render(p *plot.Plot, w, h vg.Length) (svg, png []byte, err error) {
	sc := vgsvg.New(w, h)
	p.Draw(draw.New(sc))
	var sb bytes.Buffer
	if _, err := sc.WriteTo(&sb); err != nil {
		return nil, nil, err
	}
	// Name metric-compatible fallbacks for viewers without Liberation Sans.
	svg = bytes.ReplaceAll(sb.Bytes(), []byte("font-family:Liberation Sans;"),
		[]byte("font-family:'Liberation Sans',Arial,Helvetica,sans-serif;"))

	ic := vgimg.NewWith(vgimg.UseWH(w, h), vgimg.UseDPI(DPI))
	p.Draw(draw.New(ic))
	var pb bytes.Buffer
	if _, err := (vgimg.PngCanvas{Canvas: ic}).WriteTo(&pb); err != nil {
		return nil, nil, err
	}
	return svg, pb.Bytes(), nil
}

// Image is a rendered figure: the bytes of its SVG and PNG files.
type Image struct {
	SVG, PNG []byte
}

// finish renders p at size w x h.
func finish(p *plot.Plot, w, h vg.Length) (*Image, error) {
	svg, png, err := render(p, w, h)
	if err != nil {
		return nil, fmt.Errorf("figure: render: %w", err)
	}
	return &Image{SVG: svg, PNG: png}, nil
}
