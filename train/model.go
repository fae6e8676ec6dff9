package train

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/nn"
)

// Model is a trained encoder loaded back from a run folder.
type Model struct {
	Dir      string
	Manifest Manifest
	Net      *nn.Net
	// Mean and Scale undo the z-scoring (nil when the run did not z-score).
	Mean, Scale []float64
}

// LoadModel reads model.json and the weights of a run folder.
func LoadModel(dir string) (*Model, error) {
	path := filepath.Join(dir, FileManifest)
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("not a stria run folder: %w", err)
	}
	m := &Model{Dir: dir}
	if err := json.Unmarshal(b, &m.Manifest); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	mf := &m.Manifest
	if mf.Format != "stria-run/1" {
		return nil, fmt.Errorf("%s: format %q, want stria-run/1", path, mf.Format)
	}
	shape := nn.Shape{In: 1, Length: mf.Axis.Bins, Neurons: mf.Neurons}
	for i, l := range mf.Layers {
		if l.Channels < 1 || l.Kernel < 1 || l.Stride < 1 {
			return nil, fmt.Errorf("%s: layers[%d] has a bad shape", path, i)
		}
		shape.Convs = append(shape.Convs, nn.ConvSpec{Out: l.Channels, K: l.Kernel, Stride: l.Stride, Border: l.Border})
	}
	shape.Output = mf.Output
	if len(shape.Convs) == 0 || mf.Axis.Bins < 1 || mf.Neurons < 1 {
		return nil, fmt.Errorf("%s: no layers, bins or neurons", path)
	}
	m.Net = nn.NewNet(shape)
	read := func(name string, want int) ([]float64, error) {
		a, ok := mf.Arrays[name]
		if !ok {
			return nil, fmt.Errorf("%s: no array %q", path, name)
		}
		file := filepath.Join(dir, a.File)
		_, v, err := data.ReadArray(file)
		if err != nil {
			return nil, err
		}
		if len(v) != want {
			return nil, fmt.Errorf("%s: %d values, want %d", file, len(v), want)
		}
		return v, nil
	}
	// The parameters, layer by layer, into nn's flat layout.
	net := m.Net
	for i := range net.Convs {
		for _, part := range []struct {
			name string
			dst  []float64
		}{{fmt.Sprintf("conv%d_weight", i), net.ConvW(i)}, {fmt.Sprintf("conv%d_bias", i), net.ConvB(i)}} {
			v, err := read(part.name, len(part.dst))
			if err != nil {
				return nil, err
			}
			copy(part.dst, v)
		}
	}
	for _, part := range []struct {
		name string
		dst  []float64
	}{{"readout_weight", net.ReadW()}, {"readout_bias", net.ReadB()}} {
		v, err := read(part.name, len(part.dst))
		if err != nil {
			return nil, err
		}
		copy(part.dst, v)
	}
	if mf.ZScore {
		if m.Mean, err = read("norm_mean", mf.Neurons); err != nil {
			return nil, err
		}
		if m.Scale, err = read("norm_scale", mf.Neurons); err != nil {
			return nil, err
		}
	}
	return m, nil
}

// Predict returns the predicted responses (len(stim) x N, float32, in the
// recording's units) for stimulus values in axis units.
func (m *Model) Predict(stim []float64) (*data.Matrix, error) {
	ax := m.Manifest.Axis.DataAxis()
	nb := ax.NumBins()
	n := m.Manifest.Neurons
	out := data.NewMatrix(len(stim), n)
	rows := min(chunkRows, max(len(stim), 1))
	w := m.Net.NewWork(rows)
	x := make([]float64, rows*nb)
	for lo := 0; lo < len(stim); lo += rows {
		hi := min(lo+rows, len(stim))
		for i, v := range stim[lo:hi] {
			dst := x[i*nb : (i+1)*nb]
			var err error
			if m.Manifest.Axis.Encoding == Soft {
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
