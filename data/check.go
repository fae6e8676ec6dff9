package data

import (
	"fmt"
	"math"
	"runtime"
	"slices"
	"strings"
	"sync"
)

// Report lists the problems Check found that do not stop a fit.
type Report struct {
	Warnings  []string
	Constant  []int // neurons with zero variance over all trials: excluded from metrics
	FewTrials []int // conditions with fewer than MinTrials (default 2) trials: noise ceiling undefined
}

// CheckOptions refine Check.
type CheckOptions struct {
	NBins     int   // number of conditions; cond values must lie in [0, NBins)
	Axis      *Axis // optional: names bin ranges in messages
	MinTrials int   // conditions with fewer trials go to FewTrials (default 2)
}

// Check validates a recording whose trials have the conditions cond (from
// Axis.BinTrials, or the user's own ids) in [0, nbins). See CheckWith.
func Check(rec *Recording, cond []int, nbins int) (*Report, error) {
	return CheckWith(rec, cond, CheckOptions{NBins: nbins})
}

// CheckWith validates a recording. It returns an error (and the report so
// far) for problems that make a fit meaningless:
//
//   - NaN or Inf responses: the count and the first few, each with its trial
//     (0-based) and neuron;
//   - NaN or Inf stimulus values (trial named);
//   - cond of the wrong length or with ids outside [0, NBins) (trial named);
//   - empty condition bins (listed, with their ranges when an Axis is given);
//   - condition or block id vectors of the wrong length.
//
// Otherwise the Report holds warnings: neurons constant over all trials
// (Constant; excluded from metrics because a correlation or explained
// variance is undefined for them), conditions with fewer than MinTrials
// trials (FewTrials; the noise ceiling needs at least two trials per
// condition), and blocks holding a single trial.
func CheckWith(rec *Recording, cond []int, opt CheckOptions) (*Report, error) {
	rep := &Report{}
	y := rec.Y
	file := rec.Source.Responses
	if file == "" {
		file = "responses"
	}
	if y == nil || y.Rows == 0 || y.Cols == 0 {
		return rep, fmt.Errorf("data: %s: no responses (need at least one trial and one neuron)", file)
	}
	if len(y.Data) != y.Rows*y.Cols {
		return rep, fmt.Errorf("data: %s: response matrix %dx%d has %d values", file, y.Rows, y.Cols, len(y.Data))
	}
	if opt.MinTrials <= 0 {
		opt.MinTrials = 2
	}

	// Non-finite responses and constant neurons, in one parallel pass.
	const show = 5
	sc := scanResponses(y, show)
	if sc.bad > 0 {
		first := make([]string, len(sc.first))
		for i, b := range sc.first {
			first[i] = fmt.Sprintf("trial %d, %s: %g", b.t, rec.NeuronName(b.n), b.v)
		}
		more := ""
		if sc.bad > show {
			more = fmt.Sprintf("; and %d more", sc.bad-show)
		}
		return rep, fmt.Errorf("data: %s: %d non-finite response value(s) (NaN or Inf; trials are 0-based): %s%s",
			file, sc.bad, strings.Join(first, "; "), more)
	}

	// Stimulus.
	stimFile := rec.Source.Stimulus
	if stimFile == "" {
		stimFile = file
	}
	if len(rec.Stim) != y.Rows {
		return rep, fmt.Errorf("data: %s has %d trials but %d stimulus values from %s", file, y.Rows, len(rec.Stim), stimFile)
	}
	for t, v := range rec.Stim {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return rep, fmt.Errorf("data: %s: stimulus of trial %d (0-based) is %g", stimFile, t, v)
		}
	}
	if rec.Cond != nil && len(rec.Cond) != y.Rows {
		return rep, fmt.Errorf("data: %s has %d trials but %d condition ids", file, y.Rows, len(rec.Cond))
	}
	if rec.Block != nil && len(rec.Block) != y.Rows {
		return rep, fmt.Errorf("data: %s has %d trials but %d block ids", file, y.Rows, len(rec.Block))
	}

	// Conditions.
	if len(cond) != y.Rows {
		return rep, fmt.Errorf("data: %d condition ids for %d trials", len(cond), y.Rows)
	}
	if opt.NBins < 1 {
		return rep, fmt.Errorf("data: number of conditions %d must be at least 1", opt.NBins)
	}
	count := make([]int, opt.NBins)
	for t, c := range cond {
		if c < 0 || c >= opt.NBins {
			return rep, fmt.Errorf("data: trial %d (0-based) has condition %d, outside [0, %d)", t, c, opt.NBins)
		}
		count[c]++
	}
	label := func(b int) string {
		if opt.Axis != nil {
			return opt.Axis.BinLabel(b)
		}
		return fmt.Sprintf("condition %d", b)
	}
	var empty []string
	for b, k := range count {
		if k == 0 {
			empty = append(empty, label(b))
		} else if k < opt.MinTrials {
			rep.FewTrials = append(rep.FewTrials, b)
		}
	}
	if len(rep.FewTrials) > 0 {
		var l []string
		for i, b := range rep.FewTrials {
			if i == 8 {
				l = append(l, fmt.Sprintf("and %d more", len(rep.FewTrials)-8))
				break
			}
			l = append(l, fmt.Sprintf("%s (%d trial(s))", label(b), count[b]))
		}
		rep.Warnings = append(rep.Warnings, fmt.Sprintf("%d condition(s) have fewer than %d trials, so their noise ceiling is undefined: %s",
			len(rep.FewTrials), opt.MinTrials, strings.Join(l, ", ")))
	}

	// Constant neurons (over all trials): the same value on every trial.
	for n := range sc.min {
		if sc.min[n] == sc.max[n] {
			rep.Constant = append(rep.Constant, n)
		}
	}
	if len(rep.Constant) > 0 {
		var l []string
		for i, n := range rep.Constant {
			if i == 8 {
				l = append(l, fmt.Sprintf("and %d more", len(rep.Constant)-8))
				break
			}
			l = append(l, rec.NeuronName(n))
		}
		rep.Warnings = append(rep.Warnings, fmt.Sprintf("%d neuron(s) have the same value on every trial and are excluded from the metrics (their variance is zero): %s",
			len(rep.Constant), strings.Join(l, ", ")))
	}

	if rec.Block != nil {
		bc := map[int]int{}
		for _, b := range rec.Block {
			bc[b]++
		}
		single := 0
		for _, k := range bc {
			if k == 1 {
				single++
			}
		}
		if single > 0 {
			rep.Warnings = append(rep.Warnings, fmt.Sprintf("%d of %d block ids hold a single trial; check the block column", single, len(bc)))
		}
	}

	if len(empty) > 0 {
		show := empty
		if len(show) > 12 {
			show = append(show[:12:12], fmt.Sprintf("and %d more", len(empty)-12))
		}
		return rep, fmt.Errorf("data: %d of %d stimulus bins have no trials: %s; use wider bins or fewer bins", len(empty), opt.NBins, strings.Join(show, ", "))
	}
	return rep, nil
}

// badValue is a non-finite response.
type badValue struct {
	t, n int
	v    float64
}

// scan is what one pass over the responses finds.
type scan struct {
	bad      int
	first    []badValue // the first few non-finite values, in trial order
	min, max []float32  // per neuron
}

// scanResponses counts the non-finite values of y, keeps the first show of
// them in trial order, and finds each neuron's smallest and largest value.
// The rows are split into contiguous ranges, one per core, so each row is
// read once; the result does not depend on the number of cores.
func scanResponses(y *Matrix, show int) scan {
	workers := max(1, min(runtime.GOMAXPROCS(0), y.Rows/64))
	parts := make([]scan, workers)
	var wg sync.WaitGroup
	for w := range parts {
		lo, hi := w*y.Rows/workers, (w+1)*y.Rows/workers
		wg.Add(1)
		go func(p *scan) {
			defer wg.Done()
			p.min = slices.Clone(y.Row(lo))
			p.max = slices.Clone(y.Row(lo))
			for t := lo; t < hi; t++ {
				row := y.Row(t)
				mn, mx := p.min[:len(row)], p.max[:len(row)]
				for n, v := range row {
					if v < mn[n] {
						mn[n] = v
					}
					if v > mx[n] {
						mx[n] = v
					}
					// v-v is 0 for a finite value, NaN for NaN and Inf.
					if v-v != 0 {
						p.bad++
						if len(p.first) < show {
							p.first = append(p.first, badValue{t, n, float64(v)})
						}
					}
				}
			}
		}(&parts[w])
	}
	wg.Wait()
	out := parts[0]
	for _, p := range parts[1:] {
		out.bad += p.bad
		for _, b := range p.first {
			if len(out.first) < show {
				out.first = append(out.first, b)
			}
		}
		for n := range out.min {
			out.min[n] = min(out.min[n], p.min[n])
			out.max[n] = max(out.max[n], p.max[n])
		}
	}
	return out
}
