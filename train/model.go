package train

import (
	"fmt"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/nn"
)

// Model is a trained encoder ready to predict: the net, the stimulus axis
// it was trained on and the z-scoring to undo. train/runfolder loads one
// back from a run folder.
type Model struct {
	Net  *nn.Net
	Axis data.Axis
	// Soft is true when stimuli are encoded by linear interpolation
	// between the two nearest bin centres (axis.encoding soft), false for
	// one-hot bins.
	Soft bool
	// Mean and Scale undo the z-scoring (nil when the run did not z-score):
	// response = prediction*Scale[j] + Mean[j].
	Mean, Scale []float64
}

// Predict returns the predicted responses (len(stim) x N, float32, in the
// recording's units) for stimulus values in axis units. Errors name the
// stimulus value (0-based) outside the axis.
func (m *Model) Predict(stim []float64) (*data.Matrix, error) {
	ax := m.Axis
	nb := ax.NumBins()
	n := m.Net.Neurons
	out := data.NewMatrix(len(stim), n)
	rows := min(chunkRows, max(len(stim), 1))
	w := m.Net.NewWork(rows)
	x := make([]float64, rows*nb)
	for lo := 0; lo < len(stim); lo += rows {
		hi := min(lo+rows, len(stim))
		for i, v := range stim[lo:hi] {
			dst := x[i*nb : (i+1)*nb]
			var err error
			if m.Soft {
				err = ax.Soft(dst, v)
			} else {
				err = ax.OneHot(dst, v)
			}
			if err != nil {
				return nil, fmt.Errorf("stimulus value %d (0-based): %w", lo+i, err)
			}
		}
		pred := m.Net.Forward(w, x, hi-lo)
		for i := 0; i < hi-lo; i++ {
			row := out.Row(lo + i)
			for j := range row {
				v := pred[i*n+j]
				if m.Scale != nil {
					v = v*m.Scale[j] + m.Mean[j]
				}
				row[j] = float32(v)
			}
		}
	}
	return out, nil
}
