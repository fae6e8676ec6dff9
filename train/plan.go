package train

import (
	"bufio"
	"context"
	"encoding/gob"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"

	"github.com/strialab/stria/eval"
)

// RecordingConfig is one entry of the recordings list of a comparison.
// Its data paths other than responses are relative to the folder of the
// responses file; responses may be a glob, which expands into one
// recording per match.
type RecordingConfig struct {
	Name       string `yaml:"name"`
	DataConfig `yaml:",inline"`
	// Axis replaces the top-level axis for this recording when given.
	Axis *AxisConfig `yaml:"axis"`
}

// Recording is one recording of a comparison plan with its own config.
type Recording struct {
	// Name is empty for the single recording of a config without a
	// recordings list.
	Name string
	Cfg  *Config
	// Specs are the models compared on it.
	Specs []ModelSpec
}

// Unit is one piece of work: a model on a fold of a recording.
type Unit struct {
	Rec, Spec, Fold int
	// ID is stable across runs: recording/model/fold<k>.
	ID string
}

// Plan is the whole comparison: recordings, models and folds, and the
// units they make.
type Plan struct {
	Cfg        *Config
	Recordings []Recording
	Units      []Unit
}

// UnitResult is what a unit writes under the units folder.
type UnitResult struct {
	ID     string
	Model  string
	Fold   int
	Scores []eval.Scores
	Curves []float64
	Epochs int
}

// NewPlan expands the config's recordings, model specs and folds into
// units, in a fixed order.
func NewPlan(c *Config) (*Plan, error) {
	p := &Plan{Cfg: c}
	if len(c.Recordings) == 0 {
		p.Recordings = []Recording{{Cfg: c}}
	} else {
		recs, err := c.expandRecordings()
		if err != nil {
			return nil, err
		}
		p.Recordings = recs
	}
	for ri := range p.Recordings {
		r := &p.Recordings[ri]
		specs, err := r.Cfg.Specs()
		if err != nil {
			if r.Name != "" {
				return nil, fmt.Errorf("recording %s: %w", r.Name, err)
			}
			return nil, err
		}
		r.Specs = specs
		for si, s := range specs {
			for f := 0; f < r.Cfg.Split.Folds; f++ {
				id := FileName(s.Name) + "/fold" + strconv.Itoa(f+1)
				if r.Name != "" {
					id = r.Name + "/" + id
				}
				p.Units = append(p.Units, Unit{Rec: ri, Spec: si, Fold: f, ID: id})
			}
		}
	}
	return p, nil
}

// expandRecordings turns the recordings list into recordings with their
// own configs, expanding globs.
func (c *Config) expandRecordings() ([]Recording, error) {
	var out []Recording
	seen := map[string]bool{}
	for i, rc := range c.Recordings {
		field := fmt.Sprintf("recordings[%d]", i)
		if rc.Responses == "" {
			return nil, fmt.Errorf("%s.responses: no response file given", field)
		}
		pattern := rc.Responses
		matches := []string{pattern}
		if strings.ContainsAny(rc.Responses, "*?[") {
			var err error
			matches, err = filepath.Glob(pattern)
			if err != nil {
				return nil, fmt.Errorf("%s.responses: %w", field, err)
			}
			if len(matches) == 0 {
				return nil, fmt.Errorf("%s.responses: no file matches %s", field, pattern)
			}
			slices.Sort(matches)
		}
		for k, m := range matches {
			name := rc.Name
			switch {
			case name != "" && len(matches) > 1:
				name = fmt.Sprintf("%s-%d", name, k+1)
			case name == "":
				// The folder and the file's stem: stable wherever the
				// config is read from.
				stem := strings.TrimSuffix(filepath.Base(m), filepath.Ext(m))
				name = filepath.Base(filepath.Dir(m)) + "-" + stem
			}
			name = FileName(name)
			if seen[name] {
				return nil, fmt.Errorf("%s: two recordings are called %q; give them names", field, name)
			}
			seen[name] = true
			cfg := *c
			cfg.Recordings = nil
			dir := filepath.Dir(m)
			rel := func(p string) string {
				if p == "" || filepath.IsAbs(p) {
					return p
				}
				return filepath.Join(dir, p)
			}
			cfg.Data = rc.DataConfig
			cfg.Data.Responses = m
			cfg.Data.Stimulus = rel(rc.Stimulus)
			cfg.Data.Condition = rel(rc.Condition)
			cfg.Data.Block = rel(rc.Block)
			if rc.Axis != nil {
				cfg.Axis = *rc.Axis
			}
			if err := cfg.Validate(); err != nil {
				return nil, fmt.Errorf("recording %s (%s): %w", name, field, err)
			}
			out = append(out, Recording{Name: name, Cfg: &cfg})
		}
	}
	return out, nil
}

// UnitsDir is the folder of unit results inside a comparison folder.
const UnitsDir = "units"

func (p *Plan) unitPath(u Unit) string {
	return filepath.Join(p.Cfg.Compare.Output, UnitsDir, filepath.FromSlash(u.ID)+".gob")
}

// Done reports whether a unit's result is already on disk.
func (p *Plan) Done(u Unit) bool {
	_, err := os.Stat(p.unitPath(u))
	return err == nil
}

// Shard returns the units of shard i of n (1-based): every n-th unit,
// starting at the i-th.
func (p *Plan) Shard(i, n int) []Unit {
	var out []Unit
	for k, u := range p.Units {
		if k%n == i-1 {
			out = append(out, u)
		}
	}
	return out
}

// ParseShard reads "I/N".
func ParseShard(s string) (i, n int, err error) {
	a, b, ok := strings.Cut(s, "/")
	if ok {
		i, err = strconv.Atoi(a)
		if err == nil {
			n, err = strconv.Atoi(b)
		}
	}
	if !ok || err != nil || n < 1 || i < 1 || i > n {
		return 0, 0, fmt.Errorf("--shard %q: want I/N with 1 <= I <= N, e.g. 3/10", s)
	}
	return i, n, nil
}

// Progress receives a line per finished unit.
type Progress func(u Unit, skipped bool)

// RunUnits runs the given units that are not done yet and writes their
// results. Units of one recording share its loaded data; up to workers
// units run at once (0: all cores). Results do not depend on the order or
// the number of workers.
func (p *Plan) RunUnits(ctx context.Context, units []Unit, workers int, progress Progress) error {
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	byRec := map[int][]Unit{}
	var order []int
	for _, u := range units {
		if p.Done(u) {
			if progress != nil {
				progress(u, true)
			}
			continue
		}
		if _, ok := byRec[u.Rec]; !ok {
			order = append(order, u.Rec)
		}
		byRec[u.Rec] = append(byRec[u.Rec], u)
	}
	for _, ri := range order {
		rec := p.Recordings[ri]
		prep, err := Prepare(rec.Cfg)
		if err != nil {
			return p.recErr(rec, err)
		}
		folds, err := Folds(prep)
		if err != nil {
			return p.recErr(rec, err)
		}
		todo := byRec[ri]
		var mu sync.Mutex
		var firstErr error
		next := 0
		var wg sync.WaitGroup
		for w := 0; w < min(workers, len(todo)); w++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for {
					mu.Lock()
					if next >= len(todo) || firstErr != nil || ctx.Err() != nil {
						mu.Unlock()
						return
					}
					u := todo[next]
					next++
					mu.Unlock()
					err := p.runOne(ctx, prep, rec, u, folds[u.Fold])
					mu.Lock()
					if err != nil && firstErr == nil {
						firstErr = err
					}
					if err == nil && progress != nil {
						progress(u, false)
					}
					mu.Unlock()
				}
			}()
		}
		wg.Wait()
		if firstErr != nil {
			return firstErr
		}
		if err := ctx.Err(); err != nil {
			return fmt.Errorf("comparison interrupted (finished units are kept; run again to continue): %w", err)
		}
	}
	return nil
}

func (p *Plan) recErr(rec Recording, err error) error {
	if rec.Name == "" {
		return err
	}
	return fmt.Errorf("recording %s: %w", rec.Name, err)
}

func (p *Plan) runOne(ctx context.Context, prep *Prepared, rec Recording, u Unit, sets [3][]int) error {
	r, err := RunUnit(ctx, prep, rec.Specs[u.Spec], u.Fold, sets)
	if err != nil {
		return p.recErr(rec, err)
	}
	path := p.unitPath(u)
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	ur := UnitResult{ID: u.ID, Model: r.Model, Fold: r.Fold, Scores: r.Scores, Curves: r.Curves, Epochs: r.Epochs}
	return WriteAtomic(path, func(w io.Writer) error { return gob.NewEncoder(w).Encode(&ur) })
}

// Missing lists the ids of the units without a result.
func (p *Plan) Missing() []string {
	var m []string
	for _, u := range p.Units {
		if !p.Done(u) {
			m = append(m, u.ID)
		}
	}
	return m
}

// ErrMissingUnits is returned (wrapped) by Merge when units are missing.
var ErrMissingUnits = errors.New("units missing")

// Merge checks that every unit is done and writes the comparison outputs:
// for one recording into the comparison folder, for several into a folder
// per recording plus the tables across recordings. It returns the
// comparison of each recording, in plan order.
func (p *Plan) Merge() ([]*Comparison, error) {
	if miss := p.Missing(); len(miss) > 0 {
		show := miss
		if len(show) > 20 {
			show = append(slices.Clone(show[:20]), fmt.Sprintf("... and %d more", len(miss)-20))
		}
		return nil, fmt.Errorf("%w: %d of %d not done: %s", ErrMissingUnits, len(miss), len(p.Units), strings.Join(show, ", "))
	}
	out := p.Cfg.Compare.Output
	var cmps []*Comparison
	for ri, rec := range p.Recordings {
		prep, err := Prepare(rec.Cfg)
		if err != nil {
			return nil, p.recErr(rec, err)
		}
		if _, err := Folds(prep); err != nil { // for the coverage warnings
			return nil, p.recErr(rec, err)
		}
		var results []*FoldResult
		for _, u := range p.Units {
			if u.Rec != ri {
				continue
			}
			ur, err := readUnit(p.unitPath(u))
			if err != nil {
				return nil, err
			}
			if len(ur.Scores) != prep.Neurons() {
				return nil, fmt.Errorf("unit %s has %d neurons, the recording has %d: was the data changed?", u.ID, len(ur.Scores), prep.Neurons())
			}
			results = append(results, &FoldResult{Model: ur.Model, Fold: ur.Fold, Scores: ur.Scores, Curves: ur.Curves, Epochs: ur.Epochs})
		}
		names := make([]string, len(rec.Specs))
		for i, s := range rec.Specs {
			names[i] = s.Name
		}
		cmp := Summarise(names, rec.Cfg.Split.Folds, prep.Neurons(), results, ExcludedNeurons(prep))
		cmp.Recording = rec.Name
		dir := out
		if rec.Name != "" {
			dir = filepath.Join(out, rec.Name)
		}
		if err := WriteComparison(dir, prep, rec.Specs, results, cmp); err != nil {
			return nil, err
		}
		cmps = append(cmps, cmp)
	}
	if len(p.Recordings) > 1 {
		if err := writeAcross(out, cmps); err != nil {
			return nil, err
		}
	}
	return cmps, nil
}

func readUnit(path string) (*UnitResult, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var ur UnitResult
	if err := gob.NewDecoder(bufio.NewReader(f)).Decode(&ur); err != nil {
		return nil, fmt.Errorf("%s: %w (delete it and run its shard again)", path, err)
	}
	return &ur, nil
}
