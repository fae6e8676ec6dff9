package figure

import (
	"fmt"
	"image/color"
	"math"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// AxisLabels describes the stimulus axis.
type AxisLabels struct {
	Label    string  // e.g. "heading"; "stimulus" when empty
	Unit     string  // e.g. "deg"; may be empty
	Periodic bool    // the axis wraps around
	Period   float64 // length of one period in axis units; used when Periodic
}

func (ax AxisLabels) periodic() bool {
	return ax.Periodic && ax.Period > 0 && !math.IsInf(ax.Period, 0)
}

// Curve is one model curve for Tuning: Y[i] is the model's value at X[i].
type Curve struct {
	Name string
	X, Y []float64
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// segments splits the points (x[i], y[i]) at non-finite values into runs of
// finite points.
func segments(x, y []float64) []plotter.XYs {
	var out []plotter.XYs
	var cur plotter.XYs
	for i := range x {
		if finite(x[i]) && finite(y[i]) {
			cur = append(cur, plotter.XY{X: x[i], Y: y[i]})
			continue
		}
		if len(cur) > 0 {
			out = append(out, cur)
			cur = nil
		}
	}
	if len(cur) > 0 {
		out = append(out, cur)
	}
	return out
}

// addLines adds one line per segment of (x, y) in style st and returns the
// first line for the legend (nil if nothing was finite).
func addLines(p *plot.Plot, x, y []float64, st draw.LineStyle) *plotter.Line {
	var first *plotter.Line
	for _, seg := range segments(x, y) {
		l, err := plotter.NewLine(seg)
		if err != nil {
			panic("figure: " + err.Error()) // cannot happen: seg is finite
		}
		l.LineStyle = st
		p.Add(l)
		if first == nil {
			first = l
		}
	}
	return first
}

// Filters plots first-layer filters against the tap offset in axis units.
//
// filters holds channels x k weights, row-major (channel c, tap j at
// filters[c*k+j]). Tap j is drawn at
//
//	offset = (j - (k-1)/2) * binWidth   with integer division,
//
// the position, relative to an output bin, of the input bin that tap j reads
// under nn's "same" padding (left pad (k-1)/2, any extra pad on the right;
// nn/conv.go). For odd k the filter is centred on 0; for even k the true
// centre lies half a bin to the right of 0, between taps k/2-1 and k/2.
// One line per channel in SeriesStyle(c), with markers at the taps, legend
// "ch 1" ... "ch C". The x axis is labelled "offset (unit)".
//
// Panics if channels < 1, k < 1 or len(filters) != channels*k.
func Filters(filters []float64, channels, k int, binWidth float64, ax AxisLabels) (*Image, error) {
	if channels < 1 || k < 1 {
		panic(fmt.Sprintf("figure: Filters with %d channels and %d taps", channels, k))
	}
	if len(filters) != channels*k {
		panic(fmt.Sprintf("figure: Filters len(filters) = %d, want channels*k = %d", len(filters), channels*k))
	}
	label := "offset"
	if ax.Label != "" {
		label = ax.Label + " offset"
	}
	p := newPlot(axisLabel(label, ax.Unit), "weight (a.u.)")
	x := TapOffsets(k, binWidth)
	zero, _ := plotter.NewLine(plotter.XYs{{X: x[0], Y: 0}, {X: x[k-1], Y: 0}})
	zero.LineStyle = draw.LineStyle{Color: Guide, Width: vg.Points(0.5)}
	p.Add(zero)
	for c := range channels {
		st := SeriesStyle(c)
		l := addLines(p, x, filters[c*k:(c+1)*k], st)
		var pts plotter.XYs
		for j, w := range filters[c*k : (c+1)*k] {
			if finite(w) {
				pts = append(pts, plotter.XY{X: x[j], Y: w})
			}
		}
		var thumbs []plot.Thumbnailer
		if l != nil {
			thumbs = append(thumbs, l)
		}
		if len(pts) > 0 {
			s, _ := plotter.NewScatter(pts)
			s.GlyphStyle = draw.GlyphStyle{Color: st.Color, Radius: vg.Points(1.3), Shape: draw.CircleGlyph{}}
			p.Add(s)
			thumbs = append(thumbs, s)
		}
		p.Legend.Add(fmt.Sprintf("ch %d", c+1), thumbs...)
	}
	emptyRanges(p)
	headroom(p, 0.12*float64(min(channels, 8)))
	return finish(p, Width, Height)
}

// TapOffsets returns the offsets, in axis units, that Filters draws taps
// 0..k-1 at: (j - (k-1)/2) * binWidth with integer division (see Filters).
func TapOffsets(k int, binWidth float64) []float64 {
	x := make([]float64, k)
	for j := range x {
		x[j] = float64(j-(k-1)/2) * binWidth
	}
	return x
}

// Tuning plots one neuron's tuning: the condition means mean[b] with error
// bars mean[b] ± sem[b] at centers[b] (near-black points, legend "data (mean
// ± s.e.m.)"), and the model curves in SeriesStyle(i), legend Curve.Name.
// Non-finite means are skipped; a non-finite or negative sem draws the point
// without a bar. On a periodic axis the x range is 0..Period with ticks at
// quarter periods. yLabel should carry the unit, e.g. "rate (spikes/s)".
//
// Panics if len(mean) or len(sem) != len(centers), or a curve's len(X) != len(Y).
func Tuning(centers, mean, sem []float64, curves []Curve, ax AxisLabels, yLabel string) (*Image, error) {
	if len(mean) != len(centers) || len(sem) != len(centers) {
		panic(fmt.Sprintf("figure: Tuning lengths centers %d, mean %d, sem %d", len(centers), len(mean), len(sem)))
	}
	for _, c := range curves {
		if len(c.X) != len(c.Y) {
			panic(fmt.Sprintf("figure: Tuning curve %q has %d x and %d y", c.Name, len(c.X), len(c.Y)))
		}
	}
	p := newPlot(axisLabel(ax.Label, ax.Unit), yLabel)
	for i, c := range curves {
		if l := addLines(p, c.X, c.Y, SeriesStyle(i)); l != nil {
			p.Legend.Add(c.Name, l)
		} else {
			p.Legend.Add(c.Name + " (no finite values)")
		}
	}
	var pts plotter.XYs
	var bars plotterErrs
	for b := range centers {
		if !finite(centers[b]) || !finite(mean[b]) {
			continue
		}
		pts = append(pts, plotter.XY{X: centers[b], Y: mean[b]})
		if s := sem[b]; finite(s) && s > 0 {
			bars.XYs = append(bars.XYs, plotter.XY{X: centers[b], Y: mean[b]})
			bars.YErrors = append(bars.YErrors, struct{ Low, High float64 }{s, s})
		}
	}
	if len(bars.XYs) > 0 {
		eb, err := plotter.NewYErrorBars(bars)
		if err != nil {
			panic("figure: " + err.Error()) // cannot happen: finite values
		}
		eb.LineStyle = draw.LineStyle{Color: Ink, Width: vg.Points(0.8)}
		eb.CapWidth = vg.Points(3)
		p.Add(eb)
	}
	if len(pts) > 0 {
		s, _ := plotter.NewScatter(pts)
		s.GlyphStyle = draw.GlyphStyle{Color: Ink, Radius: vg.Points(1.6), Shape: draw.CircleGlyph{}}
		p.Add(s)
		p.Legend.Add("data (mean ± s.e.m.)", s)
	} else {
		p.Legend.Add("data: no finite means")
	}
	if ax.periodic() {
		p.X.Min = math.Min(p.X.Min, 0)
		p.X.Max = math.Max(p.X.Max, ax.Period)
		p.X.Tick.Marker = periodicTicks{ax.Period}
	}
	emptyRanges(p)
	headroom(p, 0.12*float64(min(len(curves)+1, 8)))
	return finish(p, Width, Height)
}

// plotterErrs is the XYer and YErrorer given to plotter.NewYErrorBars.
type plotterErrs struct {
	plotter.XYs
	YErrors []struct{ Low, High float64 }
}

func (e plotterErrs) YError(i int) (float64, float64) { return e.YErrors[i].Low, e.YErrors[i].High }

// binRange returns the common bin range of the finite values in all series,
// widened by ±0.5 when all values are equal, and the number of finite values.
func binRange(series ...[]float64) (lo, hi float64, n int) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, s := range series {
		for _, v := range s {
			if finite(v) {
				lo, hi = math.Min(lo, v), math.Max(hi, v)
				n++
			}
		}
	}
	if n == 0 {
		return 0, 1, 0
	}
	if hi == lo {
		lo, hi = lo-0.5, hi+0.5
	}
	return lo, hi, n
}

// counts bins the finite values of v into bins equal bins over [lo, hi]; the
// last bin includes hi. It returns the counts and the number of values skipped
// as non-finite.
func counts(v []float64, lo, hi float64, bins int) ([]float64, int) {
	c := make([]float64, bins)
	bad := 0
	w := (hi - lo) / float64(bins)
	for _, x := range v {
		if !finite(x) {
			bad++
			continue
		}
		i := int(math.Floor((x - lo) / w))
		i = max(0, min(bins-1, i))
		c[i]++
	}
	return c, bad
}

// step returns the outline of a histogram with the given counts as a polyline.
func step(c []float64, lo, hi float64) plotter.XYs {
	w := (hi - lo) / float64(len(c))
	xy := make(plotter.XYs, 0, 2*len(c)+2)
	xy = append(xy, plotter.XY{X: lo, Y: 0})
	for i, v := range c {
		xy = append(xy, plotter.XY{X: lo + float64(i)*w, Y: v}, plotter.XY{X: lo + float64(i+1)*w, Y: v})
	}
	return append(xy, plotter.XY{X: hi, Y: 0})
}

// histogram adds filled bars for counts c over [lo, hi] in colour col.
func histogram(p *plot.Plot, c []float64, lo, hi float64, col color.RGBA) *plotter.Histogram {
	w := (hi - lo) / float64(len(c))
	h := &plotter.Histogram{Width: w}
	for i, v := range c {
		h.Bins = append(h.Bins, plotter.HistogramBin{Min: lo + float64(i)*w, Max: lo + float64(i+1)*w, Weight: v})
	}
	h.FillColor = col
	h.LineStyle = draw.LineStyle{Color: color.White, Width: vg.Points(0.4)}
	p.Add(h)
	return h
}

func countNote(n, bad int) string {
	if bad == 0 {
		return fmt.Sprintf("n = %d", n)
	}
	return fmt.Sprintf("n = %d (%d NaN excluded)", n, bad)
}

// Histogram draws the distribution of one per-neuron score over bins equal
// bins spanning its finite values. NaN and ±Inf are excluded and counted in
// the legend ("n = 480 (12 NaN excluded)"). The x axis is label, the y axis
// "neurons". bins < 1 is taken as 20. A few extreme values stretch the axis
// and squeeze the bulk into one or two bars: for scores with a known useful
// span use HistogramIn.
func Histogram(values []float64, label string, bins int) (*Image, error) {
	if bins < 1 {
		bins = 20
	}
	lo, hi, _ := binRange(values)
	return histogramOver(values, label, bins, Range{lo, hi}, false)
}

// Range is a fixed x range [Lo, Hi] for a score histogram.
type Range struct{ Lo, Hi float64 }

// RatioRange is the fixed x range for the noise-ceiling ratio scores (FEV,
// cc_norm, SPE) and for R^2: [-1, 1.5]. 1 is a perfect model; finite samples
// put noisy neurons a little above 1 (eval/methods.md §2: not clipped), and
// rarely beyond 1.5; below -1 a model misses by more than twice what it could
// explain, and where exactly does not matter for a population figure. With
// the default 25 bins the bars are 0.1 wide and 0 and 1 fall on bar edges.
var RatioRange = Range{Lo: -1, Hi: 1.5}

// HistogramIn is Histogram over the fixed range r (bins equal bins, 25 when
// bins < 1). Finite values outside r are not drawn; they are counted in the
// legend, e.g. "outside the axis: 12 below -1, 3 above 1.5", so the axis does
// not stretch to a few extreme neurons and none goes unreported. It panics if
// r is not a finite range with Lo < Hi.
func HistogramIn(values []float64, label string, bins int, r Range) (*Image, error) {
	checkRange(r)
	if bins < 1 {
		bins = 25
	}
	return histogramOver(values, label, bins, r, true)
}

func checkRange(r Range) {
	if !finite(r.Lo) || !finite(r.Hi) || !(r.Lo < r.Hi) {
		panic(fmt.Sprintf("figure: histogram range [%v, %v]", r.Lo, r.Hi))
	}
}

func histogramOver(values []float64, label string, bins int, r Range, fixed bool) (*Image, error) {
	c, bad, below, above := countsIn(values, r.Lo, r.Hi, bins)
	n := len(values) - bad
	p := newPlot(label, "neurons")
	h := histogram(p, c, r.Lo, r.Hi, Palette[0])
	if n > 0 {
		p.Legend.Add(countNote(n, bad), h)
		if out := outsideNote(below, above, r); out != "" {
			p.Legend.Add("outside the axis: " + out)
		}
	} else {
		p.Legend.Add(fmt.Sprintf("no finite values (%d NaN)", bad))
	}
	p.Y.Min = 0
	if fixed {
		p.X.Min, p.X.Max = r.Lo, r.Hi
	}
	emptyRanges(p)
	headroom(p, 0.18+0.1*b2f(below+above > 0))
	return finish(p, Width, Height)
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// countsIn bins the finite values of v in [lo, hi] into bins equal bins (the
// last bin includes hi) and returns the counts, the number of non-finite
// values and the numbers of finite values below lo and above hi.
func countsIn(v []float64, lo, hi float64, bins int) (c []float64, bad, below, above int) {
	c = make([]float64, bins)
	w := (hi - lo) / float64(bins)
	for _, x := range v {
		switch {
		case !finite(x):
			bad++
		case x < lo:
			below++
		case x > hi:
			above++
		default:
			i := int(math.Floor((x - lo) / w))
			c[max(0, min(bins-1, i))]++
		}
	}
	return c, bad, below, above
}

// outsideNote returns "12 below -1, 3 above 1.5" (only the non-zero parts).
func outsideNote(below, above int, r Range) string {
	var parts []string
	if below > 0 {
		parts = append(parts, fmt.Sprintf("%d below %g", below, r.Lo))
	}
	if above > 0 {
		parts = append(parts, fmt.Sprintf("%d above %g", above, r.Hi))
	}
	return strings.Join(parts, ", ")
}

// Histograms overlays the distributions of several series (e.g. one score
// for each model) as histogram outlines over the same bins equal bins,
// spanning the finite values of all series. Series are drawn in the order of
// order (names missing from series are skipped), in SeriesStyle(i); each
// legend entry is "name, n = ..." with its NaN count. bins < 1 is taken as 20.
// For scores with a known useful span use HistogramsIn.
func Histograms(series map[string][]float64, order []string, label string, bins int) (*Image, error) {
	if bins < 1 {
		bins = 20
	}
	var all [][]float64
	for _, name := range order {
		if s, ok := series[name]; ok {
			all = append(all, s)
		}
	}
	lo, hi, _ := binRange(all...)
	return histogramsOver(series, order, label, bins, Range{lo, hi}, false)
}

// HistogramsIn is Histograms over the fixed range r (bins equal bins, 25 when
// bins < 1). Each series' finite values outside r are not drawn and are
// counted in its legend entry: "encoder, n = 480 (2 NaN excluded; 12 below
// -1, 3 above 1.5)". It panics if r is not a finite range with Lo < Hi.
func HistogramsIn(series map[string][]float64, order []string, label string, bins int, r Range) (*Image, error) {
	checkRange(r)
	if bins < 1 {
		bins = 25
	}
	return histogramsOver(series, order, label, bins, r, true)
}

func histogramsOver(series map[string][]float64, order []string, label string, bins int, r Range, fixed bool) (*Image, error) {
	p := newPlot(label, "neurons")
	i := 0
	for _, name := range order {
		s, ok := series[name]
		if !ok {
			continue
		}
		c, bad, below, above := countsIn(s, r.Lo, r.Hi, bins)
		l, _ := plotter.NewLine(step(c, r.Lo, r.Hi))
		l.LineStyle = SeriesStyle(i)
		l.LineStyle.Width = vg.Points(1.4)
		p.Add(l)
		note := countNote(len(s)-bad, bad)
		if out := outsideNote(below, above, r); out != "" {
			if bad > 0 {
				note = strings.TrimSuffix(note, ")") + "; " + out + ")"
			} else {
				note += " (" + out + ")"
			}
		}
		p.Legend.Add(name+", "+note, l)
		i++
	}
	p.Y.Min = 0
	if fixed {
		p.X.Min, p.X.Max = r.Lo, r.Hi
	}
	emptyRanges(p)
	headroom(p, 0.12*float64(min(i, 8))+0.04)
	return finish(p, Width, Height)
}

// Scatter plots per-neuron scores of model A (x) against model B (y), with
// the identity diagonal (grey, dashed) and the same range on both axes.
// Neurons where either score is not finite are left out and counted. The
// legend gives n and the share of neurons above the diagonal, "B > A: 312
// of 500 (62.4 %)"; ties count as not above. Axis labels are "label, nameA"
// and "label, nameB".
//
// Panics if len(a) != len(b).
func Scatter(a, b []float64, nameA, nameB, label string) (*Image, error) {
	if len(a) != len(b) {
		panic(fmt.Sprintf("figure: Scatter len(a) = %d, len(b) = %d", len(a), len(b)))
	}
	p := newPlot(label+", "+nameA, label+", "+nameB)
	var pts plotter.XYs
	above := 0
	for i := range a {
		if finite(a[i]) && finite(b[i]) {
			pts = append(pts, plotter.XY{X: a[i], Y: b[i]})
			if b[i] > a[i] {
				above++
			}
		}
	}
	lo, hi, _ := binRange(a, b)
	if len(pts) > 0 {
		lo, hi, _ = binRange(xs(pts), ys(pts))
	}
	pad := 0.05 * (hi - lo)
	lo, hi = lo-pad, hi+pad
	id, _ := plotter.NewLine(plotter.XYs{{X: lo, Y: lo}, {X: hi, Y: hi}})
	id.LineStyle = draw.LineStyle{Color: Guide, Width: vg.Points(0.8), Dashes: []vg.Length{vg.Points(3), vg.Points(2)}}
	p.Add(id)
	n := len(pts)
	if n > 0 {
		s, _ := plotter.NewScatter(pts)
		s.GlyphStyle = draw.GlyphStyle{Color: Palette[0], Radius: vg.Points(1.2), Shape: draw.CircleGlyph{}}
		p.Add(s)
		p.Legend.Add(countNote(n, len(a)-n), s)
		p.Legend.Add(fmt.Sprintf("%s > %s: %d of %d (%.1f %%)", nameB, nameA, above, n, 100*float64(above)/float64(n)))
	} else {
		p.Legend.Add(fmt.Sprintf("no neuron with both scores finite (%d excluded)", len(a)))
	}
	p.Legend.Add("identity", id)
	// The legend goes in the emptier of the top-left and bottom-right corners.
	if crowd(pts, lo, hi, true) <= crowd(pts, lo, hi, false) {
		p.Legend.Left = true
		p.Legend.XOffs = vg.Points(4)
	} else {
		p.Legend.Top = false
		p.Legend.YOffs = vg.Points(4)
	}
	p.X.Min, p.X.Max = lo, hi
	p.Y.Min, p.Y.Max = lo, hi
	return finish(p, Width, ScatterHeight)
}

// crowd counts the points in the top-left (or bottom-right) corner box of
// width 0.7 and height 0.3 of the range [lo, hi], where a legend would sit.
func crowd(pts plotter.XYs, lo, hi float64, topLeft bool) int {
	r := hi - lo
	n := 0
	for _, q := range pts {
		u, v := (q.X-lo)/r, (q.Y-lo)/r
		if topLeft && u < 0.7 && v > 0.7 || !topLeft && u > 0.3 && v < 0.3 {
			n++
		}
	}
	return n
}

func xs(p plotter.XYs) []float64 {
	v := make([]float64, len(p))
	for i := range p {
		v[i] = p[i].X
	}
	return v
}

func ys(p plotter.XYs) []float64 {
	v := make([]float64, len(p))
	for i := range p {
		v[i] = p[i].Y
	}
	return v
}

// Preferred draws the histogram of the neurons' preferred stimuli over the
// axis in bins equal bins. On a periodic axis values are wrapped into
// [0, Period) and the bins span exactly 0..Period (ticks at quarter periods);
// otherwise they span the finite values. Non-finite values are excluded and
// counted in the legend. bins < 1 is taken as 24.
func Preferred(preferred []float64, ax AxisLabels, bins int) (*Image, error) {
	if bins < 1 {
		bins = 24
	}
	v := preferred
	lo, hi, n := binRange(v)
	if ax.periodic() {
		v = make([]float64, len(preferred))
		for i, x := range preferred {
			x = math.Mod(x, ax.Period)
			if x < 0 {
				x += ax.Period
			}
			if x >= ax.Period { // -tiny + Period rounds to Period
				x = 0
			}
			v[i] = x
		}
		lo, hi = 0, ax.Period
	}
	c, bad := counts(v, lo, hi, bins)
	p := newPlot("preferred "+axisLabel(ax.Label, ax.Unit), "neurons")
	h := histogram(p, c, lo, hi, Palette[0])
	if n > 0 {
		p.Legend.Add(countNote(n, bad), h)
	} else {
		p.Legend.Add(fmt.Sprintf("no finite values (%d NaN)", bad))
	}
	p.Y.Min = 0
	if ax.periodic() {
		p.X.Min, p.X.Max = 0, ax.Period
		p.X.Tick.Marker = periodicTicks{ax.Period}
	}
	emptyRanges(p)
	headroom(p, 0.18)
	return finish(p, Width, Height)
}
