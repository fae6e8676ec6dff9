package compare

import (
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/eval/tuning"
	"github.com/strialab/stria/train"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// Gather checks that every unit is done and writes the comparison
// outputs: for one recording into the comparison folder, for several into
// a folder per recording plus the tables across recordings. complete.json
// is written last (into every recording's folder after its files, and
// into the comparison folder after everything). It returns the comparison
// of each recording, in plan order.
//
// Every unit's fingerprint must match the plan's (settings and data
// files; otherwise a *StaleError), and the recordings must not have
// changed while being read: both are checked before anything is written.
func (p *Plan) Gather() ([]*comparefolder.Comparison, error) {
	if miss := p.Missing(); len(miss) > 0 {
		show := miss
		if len(show) > 20 {
			show = append(slices.Clone(show[:20]), fmt.Sprintf("... and %d more", len(miss)-20))
		}
		return nil, fmt.Errorf("%w: %d of %d not done: %s", ErrMissingUnits, len(miss), len(p.Units), strings.Join(show, ", "))
	}
	out := p.Dir()
	// Every unit is done, so no array task writes one any more: the
	// temporary files of killed writes can go.
	if _, err := runfolder.RemoveStaleTemps(filepath.Join(out, runfolder.DirFoldResults)); err != nil {
		return nil, err
	}
	// Everything is read and checked before anything is written.
	folders := make([]*comparefolder.ComparisonFolder, len(p.Recordings))
	for ri, rec := range p.Recordings {
		prep, folds, err := p.prepare(ri) // the folds also for the coverage warnings
		if err != nil {
			return nil, err
		}
		files := prep.Rec.Files()
		start := time.Now()
		var units []Unit
		for _, u := range p.Units {
			if u.Rec == ri {
				units = append(units, u)
			}
		}
		// Read 16 at a time (reading files no longer in the page cache
		// waits on the disk, not the cores), then checked in plan order.
		results := make([]*comparefolder.FoldResult, len(units))
		readErrs := make([]error, len(units))
		var wg sync.WaitGroup
		sem := make(chan struct{}, 16)
		for i, u := range units {
			results[i] = p.ran[u.ID] // run and written by this plan: its fingerprint is the plan's
			if results[i] != nil {
				continue
			}
			wg.Add(1)
			sem <- struct{}{}
			go func() {
				defer func() { <-sem; wg.Done() }()
				results[i], readErrs[i] = p.checkDone(u, files)
			}()
		}
		wg.Wait()
		for i, u := range units {
			if readErrs[i] != nil {
				return nil, readErrs[i]
			}
			r := results[i]
			if len(r.Scores) != prep.Neurons() {
				return nil, fmt.Errorf("unit %s has %d neurons, the recording has %d: was the data changed?", u.ID, len(r.Scores), prep.Neurons())
			}
			if want := prep.NBins * prep.Neurons(); len(r.Curves) != want {
				return nil, fmt.Errorf("unit %s has %d curve values, want %d (bins x neurons): was the data changed?", u.ID, len(r.Curves), want)
			}
		}
		start = p.Timings.Since("gather: read fold results", start)
		var folder *comparefolder.ComparisonFolder
		if gerr := format.Guard(func() { folder, err = newFolder(prep, rec.Specs, results, folds, p.Timings) }); gerr != nil {
			return nil, p.recErr(rec, gerr)
		}
		if err != nil {
			return nil, err
		}
		if err := prep.Rec.Unchanged(); err != nil {
			return nil, p.recErr(rec, err)
		}
		folder.Result.Recording = rec.Name
		folders[ri] = folder
		p.Timings.Since("gather: the recording's tables, in all", start)
	}
	start := time.Now()
	if err := p.Begin(); err != nil {
		return nil, err
	}
	// The recordings' folders are written a few at a time (each file
	// atomically, and flushed to disk: with many recordings the writes
	// would otherwise wait on one another).
	cmps := make([]*comparefolder.Comparison, len(p.Recordings))
	errs := make([]error, len(p.Recordings))
	sem := make(chan struct{}, 4)
	var wg sync.WaitGroup
	for ri, rec := range p.Recordings {
		folder := folders[ri]
		cmps[ri] = folder.Result
		dir := out
		if rec.Name != "" {
			dir = filepath.Join(out, rec.Name)
		}
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer func() { <-sem; wg.Done() }()
			if errs[ri] = comparefolder.WriteComparison(dir, folder); errs[ri] == nil && rec.Name != "" {
				errs[ri] = runfolder.Finish(dir, runfolder.FormatComparison)
			}
		}()
	}
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	start = p.Timings.Since("gather: write comparison folders", start)
	if len(p.Recordings) > 1 {
		if err := comparefolder.WriteAcross(out, comparefolder.NewAcross(cmps, Pool(cmps))); err != nil {
			return nil, err
		}
		p.Timings.Since("gather: pool and write the tables across recordings", start)
	}
	if err := runfolder.Finish(out, runfolder.FormatComparison); err != nil {
		return nil, err
	}
	return cmps, nil
}

// newFolder computes everything the comparison folder of one recording
// holds from the units' results (in plan order) on the given folds.
func newFolder(p *train.Prepared, specs []train.ModelSpec, results []*comparefolder.FoldResult, folds [][3][]int, tm *Timings) (*comparefolder.ComparisonFolder, error) {
	start := time.Now()
	names := make([]string, len(specs))
	var encoders []string
	for i, s := range specs {
		names[i] = s.Name
		if s.Baseline == "" {
			encoders = append(encoders, s.Name)
		}
	}
	nb, n := p.NBins, p.Neurons()
	ex := train.ExcludedNeurons(p)
	excluded := make([]bool, n)
	reasons := make([]string, n)
	for j, why := range ex {
		excluded[j], reasons[j] = true, why
	}
	perFold := map[string][][]eval.Scores{}
	for _, r := range results {
		if r.Fold != len(perFold[r.Model]) {
			return nil, fmt.Errorf("unit %s: fold %d where fold %d was expected", r.ID, r.Fold+1, len(perFold[r.Model])+1)
		}
		perFold[r.Model] = append(perFold[r.Model], r.Scores)
	}
	// The split-half reliability is one pass over the responses on one
	// core: it runs beside the fold-averaged curves and the data's means.
	var g format.GuardGroup
	var rel []float64
	g.Go(func() { rel = train.Reliability(p) })
	f := &comparefolder.ComparisonFolder{Excluded: reasons, Curves: map[string][]float64{}}
	// Fold-averaged curves per model, the models on all cores (each sums
	// its folds in plan order).
	curves := make([][]float64, len(names))
	eachTask(len(names), func(mi int) {
		a := make([]float64, nb*n)
		k := 0
		for _, r := range results {
			if r.Model == names[mi] && r.Curves != nil {
				for i, v := range r.Curves {
					a[i] += v
				}
				k++
			}
		}
		for i := range a {
			a[i] /= float64(max(k, 1))
		}
		curves[mi] = a
	})
	for mi, m := range names {
		f.Curves[m] = curves[mi]
	}
	// The data: condition means and their standard errors over all trials.
	all := make([]int, p.Rec.Y.Rows)
	for i := range all {
		all[i] = i
	}
	st := condstats.New(p.Rec.Y, p.Cond, all, nb)
	means := st.Mean(nil)
	sem := st.Var(nil)
	for b := 0; b < nb; b++ {
		for j := 0; j < n; j++ {
			sem[b*n+j] = math.Sqrt(sem[b*n+j] / float64(st.Count[b]))
		}
	}
	f.Curves[comparefolder.CurveDataMean], f.Curves[comparefolder.CurveDataSEM] = means, sem
	if err := g.Wait(); err != nil {
		panic(err) // a *format.FaultError: the caller's format.Guard returns it
	}
	for j := range ex {
		rel[j] = math.NaN()
	}
	start = tm.Since("gather: reliability, curves, data means", start)
	c, verdicts := AcrossFolds(names, p.Cfg.Split.Folds, n, perFold, excluded,
		Scoring{Alpha: p.Cfg.Scores.CeilingAlpha, SplitHalfAll: rel, MinReliability: p.Cfg.Scores.MinReliability})
	settings, err := p.Cfg.Marshal()
	if err != nil {
		return nil, err
	}
	f.Settings, f.Result = settings, c
	start = tm.Since("gather: fold averages, summaries, pair tests", start)
	f.FoldScores = make([]comparefolder.FoldScores, len(results))
	eachTask(len(results), func(i int) {
		r := results[i]
		f.FoldScores[i] = comparefolder.NewFoldScores(r.Model, r.Fold, r.Scores, ex, verdicts[r.Fold])
	})
	start = tm.Since("gather: fold scores", start)
	// Tuning descriptors of the data's and every model's curves, at the
	// conditions' stimulus values; NaN throughout for an excluded neuron.
	values := p.Values
	period := 0.0
	if p.Axis.Periodic {
		period = p.Axis.Max - p.Axis.Min
	}
	// Each neuron on its own, in parallel, into its fixed row (source by
	// source, neurons in order): the rows do not depend on the cores.
	sources := append([]string{"data"}, names...)
	f.Descriptors = make([]comparefolder.Descriptor, len(sources)*n)
	describer := tuning.NewDescriber(values, period)
	eachNeuronRange(n, func(lo, hi int) {
		r := make([]float64, nb)
		for si, src := range sources {
			curve := means
			if src != "data" {
				curve = f.Curves[src]
			}
			for j := lo; j < hi; j++ {
				d := comparefolder.Descriptor{Source: src, Neuron: j, Descriptors: NaNDescriptors()}
				if !excluded[j] {
					for b := 0; b < nb; b++ {
						r[b] = curve[b*n+j]
					}
					d.Descriptors = describer.Describe(r)
				}
				f.Descriptors[si*n+j] = d
			}
		}
	})
	tm.Since("gather: tuning descriptors", start)
	info := comparefolder.ComparisonInfo{Models: names, Encoders: encoders, Folds: c.Folds, Neurons: n, Excluded: map[string]string{},
		Ceilings: runfolder.CeilingCounts(ceilingVerdicts(c.Ceiling), func(j int) bool { return excluded[j] }), FoldCeilings: c.FoldCeilings,
		Reliable: Reliable(c), MinReliability: c.MinReliability,
		Summary: c.Summary, Winner: c.Winner, Pairs: comparefolder.NewPairInfo(c.Pairs), PValues: comparefolder.WilcoxonNote,
		Cautions: append(FoldCautions(p, folds), stateCautions(specs)...), Warnings: compareWarnings(p.Report.Warnings),
		Axis:   runfolder.AxisOf(p),
		Epochs: map[string][]int{}, Recordings: []string{p.Rec.Source.Responses}}
	for j, why := range ex {
		info.Excluded[strconv.Itoa(j)] = why
	}
	for _, r := range results {
		if r.Epochs > 0 {
			info.Epochs[r.Model] = append(info.Epochs[r.Model], r.Epochs)
		}
	}
	f.Info = info
	c.Cautions, c.Warnings = info.Cautions, info.Warnings
	return f, nil
}

// NaNDescriptors are the descriptors of a neuron excluded from scoring:
// NaN throughout (its reason is in the excluded column of the score
// tables and in comparison.json).
func NaNDescriptors() tuning.Descriptors {
	nan := math.NaN()
	return tuning.Descriptors{Preferred: nan, Peak: nan, OneMinusCV: nan, DirVector: nan, OSI: nan, DSI: nan}
}

// ceilingVerdicts parses verdict codes ("" for an excluded neuron, which
// the caller leaves out of any count).
func ceilingVerdicts(codes []string) []eval.Ceiling {
	out := make([]eval.Ceiling, len(codes))
	for j, s := range codes {
		for c := eval.CeilingUsable; c <= eval.CeilingNotSignificant; c++ {
			if s == c.String() {
				out[j] = c
			}
		}
	}
	return out
}

// FoldCautions returns the cautions for a comparison on the given folds
// (train.CautionsFor over the test trials of every fold): the few-trials
// caution when a condition has fewer than train.FewTrials test trials in
// some fold.
func FoldCautions(p *train.Prepared, folds [][3][]int) []string {
	var k []int
	for _, f := range folds {
		k = append(k, p.TrialsPerCondition(f[2])...)
	}
	return train.CautionsFor(k)
}

// Dedup returns the messages without repeats, in first-seen order.
func Dedup(msgs []string) []string {
	seen := map[string]bool{}
	var out []string
	for _, m := range msgs {
		if !seen[m] {
			seen[m] = true
			out = append(out, m)
		}
	}
	return out
}

// compareWarnings are the data warnings of a comparison: without repeats,
// and without those about the hold-out test split of stria fit, which a
// comparison does not use (its folds have their own).
func compareWarnings(w []string) []string {
	var out []string
	for _, m := range Dedup(w) {
		if !strings.HasPrefix(m, train.TestSplitLabel+":") {
			out = append(out, m)
		}
	}
	return out
}

// eachNeuronRange calls fn on consecutive ranges of the n neurons, the
// ranges in parallel on all cores (fn must only write what belongs to its
// neurons).
func eachNeuronRange(n int, fn func(lo, hi int)) {
	const chunk = 512
	eachTask((n+chunk-1)/chunk, func(i int) { fn(i*chunk, min((i+1)*chunk, n)) })
}

// eachTask calls fn(i) for i in [0, n), in parallel on all cores, and
// waits (fn must only write what belongs to task i, so that the results do
// not depend on the number of cores).
func eachTask(n int, fn func(i int)) {
	var wg sync.WaitGroup
	var next atomic.Int64
	for range min(runtime.GOMAXPROCS(0), n) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := int(next.Add(1) - 1)
				if i >= n {
					return
				}
				fn(i)
			}
		}()
	}
	wg.Wait()
}
