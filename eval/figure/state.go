package figure

import (
	"fmt"
	"math"

	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Level is one state level of StateTuning: the observed condition means of
// the trials at that level (Mean[b] at centers[b], drawn as points; NaN
// skipped) and the state model's curve there (Model, a line), in
// SeriesStyle(i) for the i-th level.
type Level struct {
	Name        string
	Mean, Model []float64
}

// StateTuning plots one neuron's tuning at several levels of a state
// covariate (for example the lowest and highest third of running speed):
// for each level the condition means of its trials as points and the state
// model's prediction at the level's mean covariate value as a line, both
// in the level's colour. Points have no error bars (a level has few trials
// per condition; the caption says how many). On a periodic axis the x
// range is 0..Period with ticks at quarter periods.
//
// Panics if a level's Mean or Model length differs from len(centers).
func StateTuning(centers []float64, levels []Level, ax AxisLabels, yLabel string) (*Image, error) {
	for _, l := range levels {
		if len(l.Mean) != len(centers) || len(l.Model) != len(centers) {
			panic(fmt.Sprintf("figure: StateTuning level %q has %d means and %d model values for %d centres", l.Name, len(l.Mean), len(l.Model), len(centers)))
		}
	}
	p := newPlot(axisLabel(ax.Label, ax.Unit), yLabel)
	for i, l := range levels {
		st := SeriesStyle(i)
		if ln := addLines(p, centers, l.Model, st); ln != nil {
			p.Legend.Add(l.Name+", model", ln)
		} else {
			p.Legend.Add(l.Name + ", model (no finite values)")
		}
		var pts plotter.XYs
		for b, c := range centers {
			if finite(c) && finite(l.Mean[b]) {
				pts = append(pts, plotter.XY{X: c, Y: l.Mean[b]})
			}
		}
		if len(pts) > 0 {
			s, _ := plotter.NewScatter(pts)
			s.GlyphStyle = draw.GlyphStyle{Color: st.Color, Radius: vg.Points(1.6), Shape: glyphFor(i)}
			p.Legend.Add(l.Name+", data", s)
			p.Add(s)
		} else {
			p.Legend.Add(l.Name + ", data: no trials")
		}
	}
	if ax.periodic() {
		p.X.Min = math.Min(p.X.Min, 0)
		p.X.Max = math.Max(p.X.Max, ax.Period)
		p.X.Tick.Marker = periodicTicks{ax.Period}
	}
	emptyRanges(p)
	headroom(p, 0.12*float64(min(2*len(levels), 8)))
	return finish(p, Width, Height)
}

// glyphFor gives the i-th series of points a shape of its own, so that
// levels stay apart without colour.
func glyphFor(i int) draw.GlyphDrawer {
	switch i % 3 {
	case 0:
		return draw.CircleGlyph{}
	case 1:
		return draw.TriangleGlyph{}
	}
	return draw.SquareGlyph{}
}
