package data

import (
	"fmt"

	"github.com/strialab/stria/data/format"
)

// LoadStream is Load for a recording whose responses are passed over once
// instead of held in memory (condstats.AccumulateParts): the responses
// must be a .npy file, which is opened for positioned row-block reads
// (format.NPYStream) and not read; the stimulus and the optional
// condition and block ids are read as Load reads them. The Recording's Y
// is nil; the stream gives the numbers of trials and neurons. The caller
// closes the stream. Files records the inputs as Load does, without
// content hashes (a hash would be one more pass over the file).
func LoadStream(src Source) (*Recording, *format.NPYStream, error) {
	if src.Responses == "" {
		return nil, nil, fmt.Errorf("data: no responses file given")
	}
	if fileKind(src.Responses) != "npy" {
		return nil, nil, fmt.Errorf("data: %s: only a .npy responses file can be passed over without loading it", src.Responses)
	}
	stimFile := src.Stimulus
	if stimFile == "" {
		stimFile = src.Responses
	}
	inputs, err := statInputs(src)
	if err != nil {
		return nil, nil, err
	}
	rec := &Recording{Source: src, inputs: inputs}
	s, err := format.OpenNPYStream(src.Responses)
	if err != nil {
		return nil, nil, err
	}
	if s.Rows() == 0 || s.Cols() == 0 {
		s.Close()
		return nil, nil, fmt.Errorf("data: %s: responses are %dx%d; need at least one trial and one neuron", src.Responses, s.Rows(), s.Cols())
	}
	l := &loader{tables: map[string]*format.Table{}}
	if err := l.trialData(rec, stimFile, s.Rows(), s.Cols()); err != nil {
		s.Close()
		return nil, nil, err
	}
	return rec, s, nil
}
