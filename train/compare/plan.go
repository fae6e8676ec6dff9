package compare

import (
	"context"
	"errors"
	"fmt"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
	"github.com/strialab/stria/train/settings"
)

// RecordingPlan is one recording of a comparison plan with its own config
// (data.Recording is the recording itself, once loaded).
type RecordingPlan struct {
	// Name is empty for the single recording of a config without a
	// recordings list.
	Name string
	Cfg  *settings.Config
	// Specs are the models compared on it.
	Specs []train.ModelSpec
}

// Unit is one piece of work: a model on a fold of a recording.
type Unit struct {
	Rec, Spec, Fold int
	// ID is stable across runs: recording/model/fold<k>.
	ID string
}

// Plan is the whole comparison: recordings, models and folds, and the
// units they make. Its folder is Cfg.Compare.Output.
type Plan struct {
	Cfg        *settings.Config
	Recordings []RecordingPlan
	Units      []Unit

	// Timings, when not nil, records the wall time of each phase
	// (stria compare --timings).
	Timings *Timings

	// settings[r][s] is what the units of spec s on recording r depend
	// on (see unitSettings), fixed when the plan is made: preparing a
	// recording may resolve its axis in its config.
	settings [][][]byte

	// prepared keeps recordings already loaded, checked and hashed, for
	// the next phase (Check, RunUnits, Gather) to reuse; see prepare.
	prepared []*preparedRecording

	// KeepResults makes RunUnits keep the results it writes for the
	// recording it runs last, for Gather to use instead of reading them
	// back (set it when the same plan gathers next; an array task does
	// not).
	KeepResults bool

	// ran holds the results kept by KeepResults, as written
	// (WriteFoldResult), by unit id.
	ranMu sync.Mutex
	ran   map[string]*comparefolder.FoldResult
}

// preparedRecording is a recording prepared by Plan.prepare, with its folds.
type preparedRecording struct {
	rec   int
	prep  *train.Prepared
	folds [][3][]int
	bytes int64 // of the response matrix
}

// keepPreparedBytes bounds the response matrices of the recordings a plan
// keeps prepared between its phases. The most recently prepared one is
// always kept: a comparison of one recording, however large, loads, checks
// and hashes it once, not once per phase.
const keepPreparedBytes = 2 << 30

// NewPlan expands the config's recordings, model specs and folds into
// units, in a fixed order.
func NewPlan(c *settings.Config) (*Plan, error) {
	p := &Plan{Cfg: c}
	if len(c.Recordings) == 0 {
		p.Recordings = []RecordingPlan{{Cfg: c}}
	} else {
		recs, err := expandRecordings(c)
		if err != nil {
			return nil, err
		}
		p.Recordings = recs
	}
	for ri := range p.Recordings {
		r := &p.Recordings[ri]
		specs, err := Specs(r.Cfg)
		if err != nil {
			if r.Name != "" {
				return nil, fmt.Errorf("recording %s: %w", r.Name, err)
			}
			return nil, err
		}
		r.Specs = specs
		us := make([][]byte, len(specs))
		for si, s := range specs {
			if us[si], err = unitSettings(r.Cfg, s); err != nil {
				return nil, err
			}
		}
		p.settings = append(p.settings, us)
		for si, s := range specs {
			for f := 0; f < r.Cfg.Split.Folds; f++ {
				id := comparefolder.FileName(s.Name) + "/fold" + strconv.Itoa(f+1)
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
func expandRecordings(c *settings.Config) ([]RecordingPlan, error) {
	var out []RecordingPlan
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
			name = comparefolder.FileName(name)
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
			cfg.Data.Covariates = rel(rc.Covariates)
			if rc.Axis != nil {
				cfg.Axis = *rc.Axis
			}
			if err := cfg.Validate(); err != nil {
				return nil, fmt.Errorf("recording %s (%s): %w", name, field, err)
			}
			out = append(out, RecordingPlan{Name: name, Cfg: &cfg})
		}
	}
	return out, nil
}

// Dir is the comparison folder.
func (p *Plan) Dir() string { return p.Cfg.Compare.Output }

// Done reports whether a unit's result is already on disk.
func (p *Plan) Done(u Unit) bool { return comparefolder.HasFoldResult(p.Dir(), u.ID) }

// ArrayTask returns the units of array task i of n (1-based): the plan's
// units ordered by recording, then fold, then model, cut into n runs of
// consecutive units as equal in number as can be (the first ones one unit
// longer), the i-th of them. A task so touches as few recordings as the
// split allows (with many recordings, each is loaded, checked and hashed
// by one or two tasks, not by every task), and the models of a fold share
// its statistics (train.Fold). It panics unless 1 <= i <= n; check the
// numbers with CheckArrayTask first.
func (p *Plan) ArrayTask(i, n int) []Unit {
	if err := CheckArrayTask(i, n); err != nil {
		panic("compare: " + err.Error())
	}
	order := slices.Clone(p.Units)
	slices.SortStableFunc(order, func(a, b Unit) int {
		if a.Rec != b.Rec {
			return a.Rec - b.Rec
		}
		return a.Fold - b.Fold
	})
	size, extra := len(order)/n, len(order)%n
	lo := (i-1)*size + min(i-1, extra)
	hi := lo + size
	if i <= extra {
		hi++
	}
	return order[lo:hi]
}

// Progress receives a line per finished unit.
type Progress func(u Unit, skipped bool)

// byRecording groups units by recording, in order of first appearance.
func byRecording(units []Unit) (order []int, by map[int][]Unit) {
	by = map[int][]Unit{}
	for _, u := range units {
		if _, ok := by[u.Rec]; !ok {
			order = append(order, u.Rec)
		}
		by[u.Rec] = append(by[u.Rec], u)
	}
	return order, by
}

// prepare loads, checks (with the files' content hashes) and splits a
// recording into its folds, or returns it as an earlier phase of the plan
// prepared it: the most recent recordings are kept, up to keepPreparedBytes
// of responses (the most recent one always). Reuse is safe: every result
// is written only after the recording's files are found unchanged since
// they were loaded (data.Recording.Unchanged), as they were when their
// hashes were taken.
func (p *Plan) prepare(ri int) (*train.Prepared, [][3][]int, error) {
	for i, k := range p.prepared {
		if k.rec == ri {
			// Most recently used last.
			p.prepared = append(append(p.prepared[:i:i], p.prepared[i+1:]...), k)
			return k.prep, k.folds, nil
		}
	}
	prep, folds, err := p.prepareAnew(ri)
	if err != nil {
		return nil, nil, err
	}
	p.prepared = append(p.prepared, &preparedRecording{rec: ri, prep: prep, folds: folds, bytes: int64(len(prep.Rec.Y.Data)) * 4})
	var total int64
	for _, k := range p.prepared {
		total += k.bytes
	}
	for len(p.prepared) > 1 && total > keepPreparedBytes {
		total -= p.prepared[0].bytes
		p.prepared = p.prepared[1:]
	}
	return prep, folds, nil
}

// prepareAnew is prepare without reuse.
func (p *Plan) prepareAnew(ri int) (*train.Prepared, [][3][]int, error) {
	rec := p.Recordings[ri]
	start := time.Now()
	prep, err := train.Prepare(rec.Cfg)
	if err != nil {
		return nil, nil, p.recErr(rec, err)
	}
	start = p.Timings.Since("prepare: load, bin, check, hash", start)
	var folds [][3][]int
	if err := format.Guard(func() { folds, err = train.Folds(prep) }); err != nil {
		return nil, nil, p.recErr(rec, err)
	}
	if err != nil {
		return nil, nil, p.recErr(rec, err)
	}
	p.Timings.Since("prepare: folds", start)
	return prep, folds, nil
}

// Check does everything that can fail before a comparison writes
// anything: it loads and checks every recording the units belong to,
// makes its folds, and reads the result of every finished unit of those
// recordings (any array task's), refusing one whose fingerprint differs
// (a *StaleError). Call it before creating the comparison folder.
func (p *Plan) Check(units []Unit) error {
	order, _ := byRecording(units)
	for _, ri := range order {
		prep, _, err := p.prepare(ri)
		if err != nil {
			return err
		}
		files := prep.Rec.Files()
		for _, u := range p.Units {
			if u.Rec == ri && p.Done(u) {
				if _, err := p.checkDone(u, files); err != nil {
					return err
				}
			}
		}
	}
	return nil
}

// CheckData is Check without the finished units (for a comparison that
// starts afresh): every recording the units belong to is loaded, checked
// and split into its folds.
func (p *Plan) CheckData(units []Unit) error {
	order, _ := byRecording(units)
	for _, ri := range order {
		if _, _, err := p.prepare(ri); err != nil {
			return err
		}
	}
	return nil
}

// RunUnits runs the given units that are not done yet and writes their
// results with their fingerprints; a finished unit is reused only when
// its fingerprint matches (otherwise a *StaleError). Units of one
// recording share its loaded data, and the units of one fold its
// per-condition statistics and test sums (train.Fold): they run fold by
// fold, and a fold's shared data are dropped when its last unit is done.
// Up to workers units run at once (0: all cores). Results do not depend on
// the order or the number of workers. Before each result is written the
// recording's files are checked to be unchanged since they were loaded.
func (p *Plan) RunUnits(ctx context.Context, units []Unit, workers int, progress Progress) error {
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	order, byRec := byRecording(units)
	for _, ri := range order {
		rec := p.Recordings[ri]
		p.ran = map[string]*comparefolder.FoldResult{} // only the last recording's are kept
		var todo []Unit
		for _, u := range byRec[ri] {
			if !p.Done(u) {
				todo = append(todo, u)
			}
		}
		prep, folds, err := p.prepare(ri)
		if err != nil {
			return err
		}
		files := prep.Rec.Files()
		for _, u := range byRec[ri] {
			if p.Done(u) {
				if _, err := p.checkDone(u, files); err != nil {
					return err
				}
				if progress != nil {
					progress(u, true)
				}
			}
		}
		// Fold by fold (the plan lists them model by model), so that few
		// folds' shared data are alive at once.
		slices.SortStableFunc(todo, func(a, b Unit) int { return a.Fold - b.Fold })
		shared := map[int]*train.Fold{}
		left := map[int]int{}
		for _, u := range todo {
			left[u.Fold]++
		}
		var mu sync.Mutex
		var firstErr error
		next := 0
		var g format.GuardGroup
		for w := 0; w < min(workers, len(todo)); w++ {
			g.Go(func() {
				for {
					mu.Lock()
					if next >= len(todo) || firstErr != nil || ctx.Err() != nil {
						mu.Unlock()
						return
					}
					u := todo[next]
					next++
					fold := shared[u.Fold]
					if fold == nil {
						fold = train.NewFold(prep, folds[u.Fold])
						shared[u.Fold] = fold
					}
					mu.Unlock()
					err := p.runOne(ctx, prep, rec, u, fold, files)
					mu.Lock()
					if left[u.Fold]--; left[u.Fold] == 0 {
						delete(shared, u.Fold)
					}
					if err != nil && firstErr == nil {
						firstErr = err
					}
					if err == nil && progress != nil {
						progress(u, false)
					}
					mu.Unlock()
				}
			})
		}
		if err := g.Wait(); err != nil {
			return p.recErr(rec, err)
		}
		if firstErr != nil {
			return firstErr
		}
		if err := ctx.Err(); err != nil {
			return fmt.Errorf("comparison interrupted (finished units are kept; run again to continue): %w", err)
		}
	}
	return nil
}

func (p *Plan) recErr(rec RecordingPlan, err error) error {
	if rec.Name == "" {
		return err
	}
	return fmt.Errorf("recording %s: %w", rec.Name, err)
}

func (p *Plan) runOne(ctx context.Context, prep *train.Prepared, rec RecordingPlan, u Unit, fold *train.Fold, files []format.FileID) error {
	if err := comparefolder.RemoveFoldResultTemps(p.Dir(), u.ID); err != nil {
		return err
	}
	start := time.Now()
	spec := rec.Specs[u.Spec]
	r, err := train.RunFoldUnit(ctx, spec, u.Fold, fold)
	if err != nil {
		return p.recErr(rec, err)
	}
	kind := spec.Baseline
	if kind == "" {
		kind = "encoder"
	}
	start = p.Timings.Since("unit: fit and score "+kind, start)
	defer p.Timings.Since("unit: write fold result", start)
	// The data must not have changed under the unit (a mapped file
	// rewritten in place would mix two versions of it).
	if err := prep.Rec.Unchanged(); err != nil {
		return p.recErr(rec, err)
	}
	fr := &comparefolder.FoldResult{ID: u.ID, Model: r.Model, Fold: r.Fold, Scores: r.Scores, Curves: r.Curves, Epochs: r.Epochs,
		Fingerprint: p.fingerprint(u, files)}
	if err := comparefolder.WriteFoldResult(p.Dir(), fr); err != nil {
		return err
	}
	if p.KeepResults {
		p.ranMu.Lock()
		p.ran[u.ID] = fr
		p.ranMu.Unlock()
	}
	return nil
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

// ErrMissingUnits is returned (wrapped) by Gather when units are missing.
var ErrMissingUnits = errors.New("units missing")

// Begin prepares the comparison folder for a run: it creates it and removes
// the completion markers of an earlier comparison (of the folder and of
// every recording's folder), so that readers refuse the folder until
// Gather has written everything again.
func (p *Plan) Begin() error {
	if err := runfolder.Begin(p.Dir()); err != nil {
		return err
	}
	for _, r := range p.Recordings {
		if r.Name == "" {
			continue
		}
		if err := runfolder.Begin(filepath.Join(p.Dir(), r.Name)); err != nil {
			return err
		}
	}
	return nil
}
