package comparefolder

import (
	"encoding/binary"
	"fmt"
	"math"
	"reflect"

	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/runfolder"
)

// foldResultFile is a FoldResult as fold_results/*.gob hold it (gob, one
// value per file). The scores and curves are packed as little-endian
// float64 (ScoreBits: neuron by neuron, the eval.Scores fields named in
// ScoreFields, in that order; CurveBits: the curves, bins x neurons), which
// gob writes and reads as one byte string: gob's per-value encoding of
// []eval.Scores and []float64 took about 0.15 s each way for a unit of
// 24,000 neurons. A score of -0 is stored as 0, as gob stored it (it leaves
// a zero field out), so a result reads back as it did before the packing.
//
// Results written before the packing have Scores and Curves instead (gob
// matches fields by name, so they decode into this struct); they are read
// as before. The field names in ScoreFields make the packing independent
// of the order of eval.Scores' fields; a file with a score unknown to the
// reader, or without one the reader has, is refused rather than read with
// a score dropped or missing.
type foldResultFile struct {
	ID          string
	Model       string
	Fold        int
	Scores      []eval.Scores // results written before the packing
	Curves      []float64     // results written before the packing
	Epochs      int
	Fingerprint runfolder.Fingerprint

	Neurons     int
	ScoreFields []string
	ScoreBits   []byte
	CurveBits   []byte
}

// scoreFields are the names of eval.Scores' fields, which must all be
// float64 (the package panics at start otherwise: a programmer's mistake
// that the tests show).
var scoreFields = func() []string {
	t := reflect.TypeFor[eval.Scores]()
	names := make([]string, t.NumField())
	for i := range names {
		f := t.Field(i)
		if f.Type.Kind() != reflect.Float64 {
			panic("comparefolder: eval.Scores." + f.Name + " is not a float64: fold results cannot pack it")
		}
		names[i] = f.Name
	}
	return names
}()

// zeroNegativeZeros sets the scores of -0 to 0, as gob stored them (it
// leaves a zero field out) before fold results were packed.
func zeroNegativeZeros(scores []eval.Scores) {
	for j := range scores {
		v := reflect.ValueOf(&scores[j]).Elem()
		for i := range scoreFields {
			if v.Field(i).Float() == 0 {
				v.Field(i).SetFloat(0)
			}
		}
	}
}

// packFoldResult returns r in its on-disk form.
func packFoldResult(r *FoldResult) *foldResultFile {
	f := &foldResultFile{ID: r.ID, Model: r.Model, Fold: r.Fold, Epochs: r.Epochs, Fingerprint: r.Fingerprint,
		Neurons: len(r.Scores), ScoreFields: scoreFields}
	k := len(scoreFields)
	f.ScoreBits = make([]byte, 8*k*len(r.Scores))
	for j := range r.Scores {
		v := reflect.ValueOf(&r.Scores[j]).Elem()
		for i := 0; i < k; i++ {
			binary.LittleEndian.PutUint64(f.ScoreBits[8*(j*k+i):], math.Float64bits(v.Field(i).Float()))
		}
	}
	f.CurveBits = make([]byte, 8*len(r.Curves))
	for i, x := range r.Curves {
		binary.LittleEndian.PutUint64(f.CurveBits[8*i:], math.Float64bits(x))
	}
	return f
}

// unpack returns the FoldResult of an on-disk form (packed or older).
func (f *foldResultFile) unpack() (*FoldResult, error) {
	r := &FoldResult{ID: f.ID, Model: f.Model, Fold: f.Fold, Scores: f.Scores, Curves: f.Curves, Epochs: f.Epochs, Fingerprint: f.Fingerprint}
	if f.ScoreFields == nil {
		return r, nil // written before the packing
	}
	k := len(f.ScoreFields)
	if len(f.ScoreBits) != 8*k*f.Neurons || len(f.CurveBits)%8 != 0 {
		return nil, fmt.Errorf("%d bytes of scores for %d neurons x %d fields, %d bytes of curves: the file is damaged", len(f.ScoreBits), f.Neurons, k, len(f.CurveBits))
	}
	// Where each stored field goes in eval.Scores.
	index := make([]int, k)
	for i, name := range f.ScoreFields {
		index[i] = -1
		for c, have := range scoreFields {
			if have == name {
				index[i] = c
			}
		}
		if index[i] < 0 {
			return nil, fmt.Errorf("it holds the score %q, which this stria does not know: it was written by a newer stria", name)
		}
	}
	for _, have := range scoreFields {
		found := false
		for _, name := range f.ScoreFields {
			found = found || name == have
		}
		if !found {
			return nil, fmt.Errorf("it lacks the score %q: it was written by an older stria", have)
		}
	}
	r.Scores = make([]eval.Scores, f.Neurons)
	for j := range r.Scores {
		v := reflect.ValueOf(&r.Scores[j]).Elem()
		for i, c := range index {
			v.Field(c).SetFloat(math.Float64frombits(binary.LittleEndian.Uint64(f.ScoreBits[8*(j*k+i):])))
		}
	}
	r.Curves = make([]float64, len(f.CurveBits)/8)
	for i := range r.Curves {
		r.Curves[i] = math.Float64frombits(binary.LittleEndian.Uint64(f.CurveBits[8*i:]))
	}
	return r, nil
}
