package figure

// Loss plots the training and validation loss against the epoch: two
// lines, "train" and "validation", in the first two series styles, with a
// band above the curves for the legend. A loss
// that is NaN or infinite at some epoch breaks its line there; a series
// with no finite value is left out of the legend.
//
// epochs, train and val hold one value per epoch. Loss panics if their
// lengths differ.
func Loss(epochs, train, val []float64) (*Image, error) {
	if len(train) != len(epochs) || len(val) != len(epochs) {
		panic("figure: Loss needs one train and one validation loss per epoch")
	}
	p := newPlot("epoch", "loss")
	for i, s := range []struct {
		name string
		y    []float64
	}{{"train", train}, {"validation", val}} {
		if l := addLines(p, epochs, s.y, SeriesStyle(i)); l != nil {
			p.Legend.Add(s.name, l)
		}
	}
	emptyRanges(p)
	headroom(p, 0.18) // a band for the legend above the curves
	return finish(p, Width, Height)
}
