package data

import (
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"github.com/strialab/stria/data/format"
)

// Source says where a recording lives. The caller fills it from the config.
type Source struct {
	Responses      string   // .npy, .npz or .csv/.tsv: trials x neurons
	ResponsesArray string   // array name inside an .npz (empty: the only array)
	NeuronColumns  []string // CSV/TSV responses: the neuron columns (empty: every named column except the stimulus, condition and block columns)

	Stimulus       string // .npy/.npz/.csv/.tsv; empty: the responses file
	StimulusColumn string // column (CSV/TSV) or array (.npz) name

	Condition       string // optional per-trial condition ids; empty file with a column: the stimulus file
	ConditionColumn string
	Block           string // optional per-trial block/repeat ids; empty file with a column: the stimulus file
	BlockColumn     string

	// Covariates is the optional file of per-trial state covariates (see
	// covariates.go); empty with CovariateColumns given: the stimulus file.
	Covariates       string
	CovariateColumns []string // column (CSV/TSV) or array (.npz) names; for a .npy, the names of its columns
}

// Recording is one loaded data set.
type Recording struct {
	Y       *Matrix   // trials x neurons
	Stim    []float64 // one stimulus value per trial
	Cond    []int     // optional user condition ids (nil if absent)
	Block   []int     // optional block ids (nil if absent)
	Neurons []string  // neuron names (CSV header) or nil
	Source  Source
	// CovariateNames and Covariates are the optional per-trial state
	// covariates (nil if absent): Covariates[k][t] is covariate k on trial t.
	CovariateNames []string
	Covariates     [][]float64

	inputs []inputFile // the files read, as Load found them (see Files)
}

// NeuronName returns "neuron 12" or `neuron 12 ("cellA")` for messages.
func (r *Recording) NeuronName(n int) string {
	if n >= 0 && n < len(r.Neurons) && r.Neurons[n] != "" {
		return fmt.Sprintf("neuron %d (%q)", n, r.Neurons[n])
	}
	return fmt.Sprintf("neuron %d", n)
}

func fileKind(path string) string {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".npy":
		return "npy"
	case ".npz":
		return "npz"
	case ".csv", ".tsv":
		return "table"
	}
	return ""
}

// loader caches tables so that a file used for several columns is read once.
type loader struct{ tables map[string]*format.Table }

func (l *loader) table(path string) (*format.Table, error) {
	if t, ok := l.tables[path]; ok {
		return t, nil
	}
	t, err := format.ReadTable(path)
	if err != nil {
		return nil, err
	}
	l.tables[path] = t
	return t, nil
}

// vector reads a 1-D numeric vector: a .npy file (name ignored), an array of
// an .npz, or a column of a .csv/.tsv. what ("stimulus") goes in messages.
func (l *loader) vector(path, name, what string) ([]float64, error) {
	switch fileKind(path) {
	case "npy":
		f, err := os.Open(path)
		if err != nil {
			return nil, fmt.Errorf("data: %s: %w", what, err)
		}
		defer f.Close()
		st, err := f.Stat()
		if err != nil {
			return nil, fmt.Errorf("data: %w", err)
		}
		return vectorFrom(path)(format.ReadNPY64(f, st.Size(), path))
	case "npz":
		var v []float64
		err := format.WithNPZEntry(path, name, func(r io.Reader, size int64, label string) error {
			var err error
			v, err = vectorFrom(label)(format.ReadNPY64(r, size, label))
			return err
		})
		return v, err
	case "table":
		if name == "" {
			return nil, fmt.Errorf("data: %s: %s is in a table, so its column name must be given", path, what)
		}
		t, err := l.table(path)
		if err != nil {
			return nil, err
		}
		return t.Column(name)
	}
	return nil, fmt.Errorf("data: %s: unknown file type for the %s (use .npy, .npz, .csv or .tsv)", path, what)
}

// vectorFrom returns a function accepting readNPY64's results and refusing
// a matrix that is not a single row or column.
func vectorFrom(label string) func(rows, cols int, v []float64, err error) ([]float64, error) {
	return func(rows, cols int, v []float64, err error) ([]float64, error) {
		if err != nil {
			return nil, err
		}
		if rows != 1 && cols != 1 {
			return nil, fmt.Errorf("data: %s: expected a vector, got a %dx%d matrix", label, rows, cols)
		}
		return v, nil
	}
}

// ReadVector reads a numeric vector, dispatching on the extension: .npy (a
// 1-D array, or 2-D with one row or column; name is ignored), .npz (the
// array called name) or .csv/.tsv (the column called name). Values are
// float64, so stimulus values keep their full precision.
func ReadVector(path, name string) ([]float64, error) {
	l := &loader{tables: map[string]*format.Table{}}
	return l.vector(path, name, "vector")
}

// ReadIntVector is ReadVector for integer ids: every value must be a whole
// number; the error names the file and the 0-based index of a bad value.
func ReadIntVector(path, name string) ([]int, error) {
	l := &loader{tables: map[string]*format.Table{}}
	return l.ints(path, name, "vector")
}

func (l *loader) ints(path, name, what string) ([]int, error) {
	if fileKind(path) == "table" && name != "" {
		t, err := l.table(path)
		if err != nil {
			return nil, err
		}
		return t.IntColumn(name)
	}
	v, err := l.vector(path, name, what)
	if err != nil {
		return nil, err
	}
	out := make([]int, len(v))
	for i, x := range v {
		if !isIntValue(x) {
			return nil, fmt.Errorf("data: %s: %s value %g at trial %d (0-based) is not a whole number", path, what, x, i)
		}
		out[i] = int(x)
	}
	return out, nil
}

// Load reads the responses, the stimulus and the optional condition and
// block ids described by src, and checks that they all have one entry per
// trial (the error names both files and both lengths). Values are not
// validated here; use Check for NaN, Inf, empty bins and constant neurons.
func Load(src Source) (*Recording, error) {
	l := &loader{tables: map[string]*format.Table{}}
	rec := &Recording{Source: src}
	if src.Responses == "" {
		return nil, fmt.Errorf("data: no responses file given")
	}
	stimFile := src.Stimulus
	if stimFile == "" {
		stimFile = src.Responses
	}
	if fileKind(src.Responses) == "" {
		return nil, fmt.Errorf("data: %s: unknown file type for the responses (use .npy, .npz, .csv or .tsv)", src.Responses)
	}
	inputs, err := statInputs(src)
	if err != nil {
		return nil, err
	}
	rec.inputs = inputs
	// inResponses reports whether an optional file (empty: the stimulus
	// file) is the responses file itself.
	inResponses := func(f string) bool {
		if f == "" {
			f = stimFile
		}
		return f == src.Responses
	}

	switch fileKind(src.Responses) {
	case "npy":
		m, err := format.ReadNPY(src.Responses)
		if err != nil {
			return nil, err
		}
		rec.Y = m
	case "npz":
		m, err := format.ReadNPZ(src.Responses, src.ResponsesArray)
		if err != nil {
			return nil, err
		}
		rec.Y = m
	case "table":
		t, err := l.table(src.Responses)
		if err != nil {
			return nil, err
		}
		names := src.NeuronColumns
		if err := checkNeuronColumns(src, stimFile, inResponses); err != nil {
			return nil, err
		}
		if len(names) == 0 {
			skip := map[string]bool{}
			if src.StimulusColumn != "" && inResponses(stimFile) {
				skip[src.StimulusColumn] = true
			}
			if src.ConditionColumn != "" && inResponses(src.Condition) {
				skip[src.ConditionColumn] = true
			}
			if src.BlockColumn != "" && inResponses(src.Block) {
				skip[src.BlockColumn] = true
			}
			if inResponses(src.Covariates) {
				for _, c := range src.CovariateColumns {
					skip[c] = true
				}
			}
			for c, h := range t.Header {
				if h == "" {
					return nil, fmt.Errorf("data: %s: column %d (1-based) has no name (a pandas index written without index=False?); "+
						"remove it or list the neuron columns explicitly", src.Responses, c+1)
				}
				if !skip[h] {
					names = append(names, h)
				}
			}
		}
		m, err := t.Columns(names)
		if err != nil {
			return nil, err
		}
		rec.Y = m
		rec.Neurons = names
	default:
		return nil, fmt.Errorf("data: %s: unknown file type for the responses (use .npy, .npz, .csv or .tsv)", src.Responses)
	}
	if rec.Y.Rows == 0 || rec.Y.Cols == 0 {
		return nil, fmt.Errorf("data: %s: responses are %dx%d; need at least one trial and one neuron", src.Responses, rec.Y.Rows, rec.Y.Cols)
	}
	if err := l.trialData(rec, stimFile, rec.Y.Rows, rec.Y.Cols); err != nil {
		return nil, err
	}
	return rec, nil
}

// trialData reads the stimulus, the optional condition and block ids and
// the optional state covariates of rec.Source into rec, checking that each
// has one value per trial of the rows x cols responses.
func (l *loader) trialData(rec *Recording, stimFile string, rows, cols int) error {
	src := rec.Source
	switch {
	case stimFile == src.Responses && fileKind(stimFile) == "npy":
		return fmt.Errorf("data: %s: no stimulus file is given (data.stimulus), and a .npy file holds only the responses", src.Responses)
	case fileKind(stimFile) == "npz" && src.StimulusColumn == "":
		return fmt.Errorf("data: %s: the stimulus is in an .npz, so its array name must be given (data.stimulus_column)", stimFile)
	}
	stim, err := l.vector(stimFile, src.StimulusColumn, "stimulus")
	if err != nil {
		return err
	}
	if err := sameLength(src.Responses, rows, cols, stimFile, "stimulus", len(stim)); err != nil {
		return err
	}
	rec.Stim = stim

	opt := func(file, column, what string) ([]int, error) {
		if file == "" && column == "" {
			return nil, nil
		}
		if file == "" {
			file = stimFile
		}
		v, err := l.ints(file, column, what)
		if err != nil {
			return nil, err
		}
		if err := sameLength(src.Responses, rows, cols, file, what, len(v)); err != nil {
			return nil, err
		}
		return v, nil
	}
	if rec.Cond, err = opt(src.Condition, src.ConditionColumn, "condition"); err != nil {
		return err
	}
	if rec.Block, err = opt(src.Block, src.BlockColumn, "block"); err != nil {
		return err
	}
	rec.CovariateNames, rec.Covariates, err = l.covariates(src, stimFile, rows, cols)
	return err
}

func sameLength(respFile string, trials, neurons int, file, what string, n int) error {
	if n != trials {
		hint := ""
		if n == neurons {
			hint = fmt.Sprintf(" (the responses have %d columns: are they saved neurons x trials? stria needs trials x neurons, so save the transpose)", neurons)
		}
		return fmt.Errorf("data: %s has %d trials (rows) but the %s from %s has %d values; they must match one to one%s",
			respFile, trials, what, file, n, hint)
	}
	return nil
}

// checkNeuronColumns refuses a list of neuron columns that names a column
// twice, has an empty name, or names the stimulus, condition or block
// column of the same file: each would silently duplicate a neuron or fit
// the stimulus as a response.
func checkNeuronColumns(src Source, stimFile string, inResponses func(string) bool) error {
	seen := map[string]int{}
	for i, n := range src.NeuronColumns {
		n = strings.TrimSpace(n)
		if n == "" {
			return fmt.Errorf("data: neuron_columns entry %d (0-based) for %s is empty", i, src.Responses)
		}
		if j, dup := seen[n]; dup {
			return fmt.Errorf("data: neuron_columns names %q twice (entries %d and %d, 0-based) for %s; each neuron must be listed once", n, j, i, src.Responses)
		}
		seen[n] = i
		for _, o := range []struct{ col, file, what string }{
			{src.StimulusColumn, stimFile, "stimulus"},
			{src.ConditionColumn, src.Condition, "condition"},
			{src.BlockColumn, src.Block, "block"},
		} {
			if o.col != "" && strings.TrimSpace(o.col) == n && inResponses(o.file) {
				return fmt.Errorf("data: neuron_columns entry %d (0-based) %q of %s is also the %s column; a column cannot be both", i, n, src.Responses, o.what)
			}
		}
		for _, c := range src.CovariateColumns {
			if strings.TrimSpace(c) == n && inResponses(src.Covariates) && fileKind(src.Responses) == "table" {
				return fmt.Errorf("data: neuron_columns entry %d (0-based) %q of %s is also a covariate column; a column cannot be both", i, n, src.Responses)
			}
		}
	}
	return nil
}

// isIntValue reports whether x is a whole number that float64 holds
// exactly.
func isIntValue(x float64) bool {
	return x == math.Trunc(x) && math.Abs(x) <= 1<<53
}
