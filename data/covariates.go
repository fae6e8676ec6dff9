package data

import (
	"fmt"
	"os"
	"strings"

	"github.com/strialab/stria/data/format"
)

// covariateFile is the file the per-trial covariates come from: src.Covariates,
// or the stimulus file (stimFile) when only column names are given; "" when
// the recording has none.
func covariateFile(src Source, stimFile string) string {
	if src.Covariates != "" {
		return src.Covariates
	}
	if len(src.CovariateColumns) > 0 {
		return stimFile
	}
	return ""
}

// covariates reads the per-trial state covariates of src (running speed,
// pupil area, ...): a .npy of shape T or T x K (names from
// src.CovariateColumns, which must then have K entries, or covariate_0,
// covariate_1, ...), named arrays of an .npz (one vector each), or named
// columns of a .csv/.tsv. Each covariate must have one value per trial of
// the responses (the error names both files and both lengths). Values are
// not checked here: NaN, infinite and constant covariates are refused by
// the fit, which names the covariate and the trial.
func (l *loader) covariates(src Source, stimFile string, trials, neurons int) (names []string, cols [][]float64, err error) {
	file := covariateFile(src, stimFile)
	if file == "" {
		return nil, nil, nil
	}
	seen := map[string]int{}
	for i, n := range src.CovariateColumns {
		if strings.TrimSpace(n) == "" {
			return nil, nil, fmt.Errorf("data: covariate_columns entry %d (0-based) for %s is empty", i, file)
		}
		if j, dup := seen[n]; dup {
			return nil, nil, fmt.Errorf("data: covariate_columns names %q twice (entries %d and %d, 0-based) for %s", n, j, i, file)
		}
		seen[n] = i
	}
	switch fileKind(file) {
	case "npy":
		f, err := os.Open(file)
		if err != nil {
			return nil, nil, fmt.Errorf("data: covariates: %w", err)
		}
		defer f.Close()
		st, err := f.Stat()
		if err != nil {
			return nil, nil, fmt.Errorf("data: %w", err)
		}
		rows, k, v, err := format.ReadNPY64(f, st.Size(), file)
		if err != nil {
			return nil, nil, err
		}
		if rows != trials && k == trials {
			return nil, nil, fmt.Errorf("data: %s is %dx%d but the responses (%s) have %d trials: are the covariates saved covariates x trials? stria needs trials x covariates, so save the transpose",
				file, rows, k, src.Responses, trials)
		}
		if err := sameLength(src.Responses, trials, neurons, file, "covariates", rows); err != nil {
			return nil, nil, err
		}
		names = src.CovariateColumns
		if len(names) == 0 {
			for c := 0; c < k; c++ {
				names = append(names, fmt.Sprintf("covariate_%d", c))
			}
		}
		if len(names) != k {
			return nil, nil, fmt.Errorf("data: %s holds %d covariate columns but covariate_columns names %d", file, k, len(names))
		}
		cols = make([][]float64, k)
		for c := range cols {
			cols[c] = make([]float64, rows)
			for t := 0; t < rows; t++ {
				cols[c][t] = v[t*k+c]
			}
		}
		return append([]string(nil), names...), cols, nil
	case "npz", "table":
		if len(src.CovariateColumns) == 0 {
			return nil, nil, fmt.Errorf("data: %s: the covariates are in a table or an .npz, so their column (array) names must be given (data.covariate_columns)", file)
		}
		for _, n := range src.CovariateColumns {
			v, err := l.vector(file, n, "covariate "+n)
			if err != nil {
				return nil, nil, err
			}
			if err := sameLength(src.Responses, trials, neurons, file, fmt.Sprintf("covariate %q", n), len(v)); err != nil {
				return nil, nil, err
			}
			cols = append(cols, v)
		}
		return append([]string(nil), src.CovariateColumns...), cols, nil
	}
	return nil, nil, fmt.Errorf("data: %s: unknown file type for the covariates (use .npy, .npz, .csv or .tsv)", file)
}

// ReadCovariates reads the per-trial covariates src names for a recording of
// trials x neurons responses, as Load does; names is nil when src names
// none.
func ReadCovariates(src Source, trials, neurons int) (names []string, cols [][]float64, err error) {
	stim := src.Stimulus
	if stim == "" {
		stim = src.Responses
	}
	l := &loader{tables: map[string]*format.Table{}}
	return l.covariates(src, stim, trials, neurons)
}
