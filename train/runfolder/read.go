package runfolder

import (
	"fmt"
	"path/filepath"
	"strings"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train"
)

// Run is everything a run folder holds, as read back by ReadRun: written
// again with WriteRun (and Finish) it gives the same files byte for byte,
// complete.json's time apart.
type Run struct {
	Settings []byte
	Manifest Manifest
	// Parameters are the arrays of parameters/ by name (Manifest.Arrays
	// gives their files and shapes).
	Parameters   map[string][]float64
	FilterShape  []int
	Filters      []float64
	Split        SplitInfo
	History      []train.EpochLog
	NeuronScores *NeuronScores
	Summary      Summary
	// StateTerms is state_terms.csv as written (nil for a run without
	// state terms; its arrays are among Parameters).
	StateTerms []byte
}

// ReadRun reads every file of a finished run folder.
func ReadRun(dir string) (*Run, error) {
	if err := CheckComplete(dir, KindRun); err != nil {
		return nil, err
	}
	mf, err := ReadManifest(dir)
	if err != nil {
		return nil, err
	}
	r := &Run{Manifest: *mf, Parameters: map[string][]float64{}}
	if r.Settings, err = ReadSettings(dir); err != nil {
		return nil, err
	}
	for name, a := range mf.Arrays {
		path := filepath.Join(dir, filepath.FromSlash(a.File))
		shape, v, err := format.ReadArray(path)
		if err != nil {
			return nil, err
		}
		if !sameShape(shape, a.Shape) {
			return nil, fmt.Errorf("%s: shape %v, %s says %v", path, shape, FileManifest, a.Shape)
		}
		r.Parameters[name] = v
	}
	if r.FilterShape, r.Filters, err = format.ReadArray(filepath.Join(dir, FileFilters)); err != nil {
		return nil, err
	}
	sp, err := ReadSplit(dir)
	if err != nil {
		return nil, err
	}
	r.Split = *sp
	if r.History, err = ReadHistory(dir); err != nil {
		return nil, err
	}
	if r.NeuronScores, err = ReadNeuronScores(dir, mf.Neurons); err != nil {
		return nil, err
	}
	// model.json keeps the names exactly; a CSV reader turns a "\r\n"
	// inside a quoted field into "\n" (RFC 4180 leaves it open).
	if len(mf.Names) == mf.Neurons {
		for j, name := range mf.Names {
			if strings.ReplaceAll(name, "\r\n", "\n") != r.NeuronScores.Names[j] {
				return nil, fmt.Errorf("%s: neuron %d is called %q, but %s says %q", filepath.Join(dir, FileNeuronScores), j, r.NeuronScores.Names[j], FileManifest, name)
			}
		}
		r.NeuronScores.Names = mf.Names
	}
	sum, err := ReadSummary(dir)
	if err != nil {
		return nil, err
	}
	r.Summary = *sum
	if r.StateTerms, err = readStateTerms(dir); err != nil {
		return nil, err
	}
	return r, nil
}

func sameShape(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// WriteRun writes every file of r into dir (not complete.json: call Finish
// after it).
func WriteRun(dir string, r *Run) error {
	if err := mkdir(filepath.Join(dir, DirParameters)); err != nil {
		return err
	}
	if err := WriteBytes(filepath.Join(dir, FileSettings), r.Settings); err != nil {
		return err
	}
	for name, a := range r.Manifest.Arrays {
		v, ok := r.Parameters[name]
		if !ok {
			return fmt.Errorf("%s: no values for array %s", dir, name)
		}
		if err := format.WriteNPY64(filepath.Join(dir, filepath.FromSlash(a.File)), a.Shape, v); err != nil {
			return err
		}
	}
	if err := format.WriteNPY64(filepath.Join(dir, FileFilters), r.FilterShape, r.Filters); err != nil {
		return err
	}
	if err := WriteJSON(filepath.Join(dir, FileManifest), r.Manifest); err != nil {
		return err
	}
	if err := WriteJSON(filepath.Join(dir, FileSplit), r.Split); err != nil {
		return err
	}
	if err := WriteHistory(dir, r.History); err != nil {
		return err
	}
	if err := WriteNeuronScores(dir, r.NeuronScores); err != nil {
		return err
	}
	if r.StateTerms != nil {
		if err := WriteBytes(filepath.Join(dir, FileStateTerms), r.StateTerms); err != nil {
			return err
		}
	}
	return WriteJSON(filepath.Join(dir, FileSummary), r.Summary)
}
