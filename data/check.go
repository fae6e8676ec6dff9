package data

import (
	"fmt"
	"math"
	"runtime"
	"strings"
	"sync/atomic"

	"github.com/strialab/stria/data/format"
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

	// Counts requires every response to be a whole number >= 0 (spike
	// counts), as a count loss (poisson) assumes: a negative or fractional
	// value is refused, naming its trial and neuron, instead of being
	// trained on and scored without a word.
	Counts bool

	// Hash fills the content hashes of Recording.Files. A mapped responses
	// file is hashed in the same pass that checks its values (no second
	// pass over memory); the other files are read and hashed after the
	// checks pass.
	Hash bool
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
//   - empty condition bins (listed, with their ranges when an Axis is given;
//     with a hint when the stimulus values look like radians on an axis in
//     degrees);
//   - condition or block id vectors of the wrong length;
//   - with Counts, responses that are not whole numbers >= 0 (the count and
//     the first few, each with its trial and neuron);
//   - a *format.FaultError when the responses are mapped and their file is
//     truncated during the pass (the pass runs under the fault guard);
//   - with Hash, a file that changed since Load (wrapping format.ErrChanged).
//
// Otherwise the Report holds warnings: neurons constant over all trials
// (Constant; excluded from metrics because a correlation or explained
// variance is undefined for them), conditions with fewer than MinTrials
// trials (FewTrials; the noise ceiling needs at least two trials per
// condition), blocks holding a single trial, and stimulus values far
// outside a periodic axis of period 2 pi or pi (degrees on an axis in
// radians, which wrap into every bin and leave no bin empty to tell).
func CheckWith(rec *Recording, cond []int, opt CheckOptions) (*Report, error) {
	rep := &Report{}
	y := rec.Y
	name := rec.Source.Responses
	if name == "" {
		name = "responses"
	}
	if y == nil || y.Rows == 0 || y.Cols == 0 {
		return rep, fmt.Errorf("data: %s: no responses (need at least one trial and one neuron)", name)
	}
	if len(y.Data) != y.Rows*y.Cols {
		return rep, fmt.Errorf("data: %s: response matrix %dx%d has %d values", name, y.Rows, y.Cols, len(y.Data))
	}
	if opt.MinTrials <= 0 {
		opt.MinTrials = 2
	}

	// Non-finite responses, non-counts and constant neurons, in one
	// parallel pass that also hashes a mapped file.
	const show = 5
	var file []byte
	var off int
	if opt.Hash && len(rec.inputs) > 0 && rec.inputs[0].id.Hash == "" {
		if b, o, path, ok := format.MappedBytes(y.Data); ok && path == rec.inputs[0].id.Path {
			file, off = b, o
		}
	}
	sc, err := scanResponses(y, show, opt.Counts, file, off)
	if err != nil {
		return rep, err
	}
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
			name, sc.bad, strings.Join(first, "; "), more)
	}
	if sc.notCount > 0 {
		first := make([]string, len(sc.firstNC))
		for i, b := range sc.firstNC {
			first[i] = fmt.Sprintf("trial %d, %s: %g", b.t, rec.NeuronName(b.n), b.v)
		}
		more := ""
		if sc.notCount > show {
			more = fmt.Sprintf("; and %d more", sc.notCount-show)
		}
		return rep, fmt.Errorf("data: %s: %d response value(s) are not counts (whole numbers >= 0), which a count loss such as poisson needs (trials are 0-based): %s%s",
			name, sc.notCount, strings.Join(first, "; "), more)
	}
	if sc.hash != "" {
		if in := &rec.inputs[0]; int64(len(file)) != in.id.Size {
			return rep, format.ChangedError(in.id.Path, fmt.Sprintf("size %d -> %d bytes", in.id.Size, len(file)))
		} else {
			in.id.Hash = sc.hash
		}
	}
	// Constant neurons (over all trials): the same value on every trial.
	var constant []int
	for n := range sc.min {
		if sc.min[n] == sc.max[n] {
			constant = append(constant, n)
		}
	}
	if err := checkTrials(rep, rec, name, y.Rows, cond, opt, constant); err != nil {
		return rep, err
	}
	if opt.Hash {
		if err := rec.HashFiles(); err != nil {
			return rep, err
		}
	}
	return rep, nil
}

// CheckTrials is CheckWith for responses that are not in memory (a
// recording from LoadStream, rows trials): everything CheckWith checks
// except the response values (see condstats.AccumulateParts, which refuses
// non-finite ones), with constant the neurons whose response is the same
// on every trial (condstats.ConstantNeurons; nil before they are known).
// The warnings come in CheckWith's order. Opt.Counts and Opt.Hash are not
// supported (they need the values) and panic.
func CheckTrials(rec *Recording, rows int, cond []int, opt CheckOptions, constant []int) (*Report, error) {
	if opt.Counts || opt.Hash {
		panic("data: CheckTrials cannot check counts or hash the responses")
	}
	if opt.MinTrials <= 0 {
		opt.MinTrials = 2
	}
	name := rec.Source.Responses
	if name == "" {
		name = "responses"
	}
	rep := &Report{}
	return rep, checkTrials(rep, rec, name, rows, cond, opt, constant)
}

// checkTrials checks the stimulus, conditions and blocks of a recording of
// rows trials and fills rep's warnings, constant neurons included.
func checkTrials(rep *Report, rec *Recording, name string, rows int, cond []int, opt CheckOptions, constant []int) error {

	// Stimulus.
	stimFile := rec.Source.Stimulus
	if stimFile == "" {
		stimFile = name
	}
	if len(rec.Stim) != rows {
		return fmt.Errorf("data: %s has %d trials but %d stimulus values from %s", name, rows, len(rec.Stim), stimFile)
	}
	for t, v := range rec.Stim {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("data: %s: stimulus of trial %d (0-based) is %g", stimFile, t, v)
		}
	}
	if rec.Cond != nil && len(rec.Cond) != rows {
		return fmt.Errorf("data: %s has %d trials but %d condition ids", name, rows, len(rec.Cond))
	}
	if rec.Block != nil && len(rec.Block) != rows {
		return fmt.Errorf("data: %s has %d trials but %d block ids", name, rows, len(rec.Block))
	}

	// Conditions.
	if len(cond) != rows {
		return fmt.Errorf("data: %d condition ids for %d trials", len(cond), rows)
	}
	if opt.NBins < 1 {
		return fmt.Errorf("data: number of conditions %d must be at least 1", opt.NBins)
	}
	count := make([]int, opt.NBins)
	for t, c := range cond {
		if c < 0 || c >= opt.NBins {
			return fmt.Errorf("data: trial %d (0-based) has condition %d, outside [0, %d)", t, c, opt.NBins)
		}
		count[c]++
	}
	label := func(b int) string {
		if opt.Axis != nil {
			return opt.Axis.BinLabel(b)
		}
		return fmt.Sprintf("condition %d", b)
	}
	if opt.Axis != nil {
		if w := degreesWarning(rec.Stim, *opt.Axis); w != "" {
			rep.Warnings = append(rep.Warnings, w)
		}
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

	rep.Constant = constant
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
		hint := ""
		if opt.Axis != nil {
			hint = radiansHint(rec.Stim, *opt.Axis)
		}
		return fmt.Errorf("data: %s: %d of %d stimulus bins have no trials: %s; use wider bins or fewer bins%s", rec.stimLabel(), len(empty), opt.NBins, strings.Join(show, ", "), hint)
	}
	if opt.Hash {
		if err := rec.HashFiles(); err != nil {
			return err
		}
	}
	return nil
}

// StimulusFile returns the file the stimulus values come from: the
// stimulus file of the source, or the responses file when none is given.
func (r *Recording) StimulusFile() string {
	if r.Source.Stimulus != "" {
		return r.Source.Stimulus
	}
	if r.Source.Responses != "" {
		return r.Source.Responses
	}
	return "stimulus"
}

// stimLabel names the stimulus in messages: `resp.csv column "stim"`,
// "rec.npz[stim]" or "stim.npy".
func (r *Recording) stimLabel() string {
	f, c := r.StimulusFile(), r.Source.StimulusColumn
	switch {
	case c == "":
		return f
	case fileKind(f) == "npz":
		return fmt.Sprintf("%s[%s]", f, c)
	case fileKind(f) == "table":
		return fmt.Sprintf("%s column %q", f, c)
	}
	return f
}

// Bin bins every trial's stimulus value on the axis a (Axis.BinTrials); the
// error names the stimulus file (and column or array), the trial (0-based)
// and the value. Use it rather than a.BinTrials(r.Stim), whose error cannot
// name the file.
func (r *Recording) Bin(a Axis) ([]int, error) {
	cond, err := a.BinTrials(r.Stim)
	if err != nil && a.Validate() == nil {
		return nil, fmt.Errorf("data: %s: %s", r.stimLabel(), strings.TrimPrefix(err.Error(), "data: "))
	}
	return cond, err
}

// radiansHint returns a hint for the empty-bins error when the stimulus
// values all lie within [-2 pi, 2 pi] on an axis whose range is 360 or 180
// (degrees): the values are most likely in radians.
func radiansHint(stim []float64, a Axis) string {
	r := a.Max - a.Min
	if math.Abs(r-360) > 1e-9 && math.Abs(r-180) > 1e-9 || len(stim) == 0 {
		return ""
	}
	lo, hi := stim[0], stim[0]
	for _, v := range stim {
		lo, hi = min(lo, v), max(hi, v)
	}
	if lo < -2*math.Pi-1e-9 || hi > 2*math.Pi+1e-9 || !(hi > lo) {
		return ""
	}
	unit := a.Unit
	if unit == "" {
		unit = "degrees"
	}
	return fmt.Sprintf(". The stimulus values all lie between %.4g and %.4g, on an axis of %g %s: they look like radians; "+
		"convert them to degrees (x 180/pi) or declare the axis in radians (axis.min %.4g, axis.max %.4g)",
		lo, hi, r, unit, a.Min*math.Pi/180, a.Max*math.Pi/180)
}

// degreesWarning warns when a periodic axis of period 2 pi or pi (radians)
// gets stimulus values beyond two periods from its range: values in degrees
// would be wrapped many times over into bins that mean nothing, without
// any bin left empty to give it away.
func degreesWarning(stim []float64, a Axis) string {
	r := a.Max - a.Min
	if !a.Periodic || math.Abs(r-2*math.Pi) > 1e-6*r && math.Abs(r-math.Pi) > 1e-6*r {
		return ""
	}
	far, at := 0, 0.0
	for _, v := range stim {
		if v < a.Min-2*r || v > a.Max+2*r {
			if far == 0 {
				at = v
			}
			far++
		}
	}
	if far == 0 {
		return ""
	}
	return fmt.Sprintf("%d of %d stimulus values lie more than two periods outside the %s axis %.4g..%.4g (the first: %g); "+
		"if they are in degrees, convert them to radians (x pi/180) or declare the axis in degrees: "+
		"wrapped, they give meaningless bins", far, len(stim), a.label(), a.Min, a.Max, at)
}

// badValue is a response refused by the scan.
type badValue struct {
	t, n int
	v    float64
}

// scan is what one pass over the responses finds.
type scan struct {
	bad      int        // non-finite values
	first    []badValue // the first few of them, in trial order
	notCount int        // finite values that are not whole numbers >= 0 (counted when asked)
	firstNC  []badValue // the first few of them, in trial order
	min, max []float32  // per neuron (finite values only)
	hash     string     // content hash of the mapped file, when asked
}

// scanResponses counts the non-finite values of y (and, with counts, the
// finite values that are not whole numbers >= 0), keeps the first show of
// each in trial order, and finds each neuron's smallest and largest value.
//
// The values are visited in pieces claimed by one worker per core; each
// value is read once, and the result does not depend on the number of
// cores. With file (the whole mapped file behind y.Data, whose values start
// at byte off) the pieces are the 4 MiB pieces of the file's content hash
// (see format.FileID), each hashed just before its values are scanned, so the
// hash costs no second pass over memory. The workers run under the fault
// guard: a file truncated meanwhile gives a *format.FaultError.
func scanResponses(y *Matrix, show int, counts bool, file []byte, off int) (scan, error) {
	total, N := len(y.Data), y.Cols
	var ch *format.PieceHasher
	pieces := (total + format.HashPieceBytes/4 - 1) / (format.HashPieceBytes / 4)
	elem := func(k int) int { return min(total, k*(format.HashPieceBytes/4)) }
	if file != nil {
		ch = format.NewPieceHasher(int64(len(file)))
		pieces = ch.Pieces()
		elem = func(k int) int { return max(0, min(total, (k*format.HashPieceBytes-off)/4)) }
	}
	workers := max(1, min(runtime.GOMAXPROCS(0), pieces))
	parts := make([]scan, workers)
	firsts := make([][]badValue, pieces)
	firstsNC := make([][]badValue, pieces)
	var next atomic.Int64
	var g format.GuardGroup
	for w := range parts {
		p := &parts[w]
		p.min = make([]float32, N)
		p.max = make([]float32, N)
		for n := range p.min {
			p.min[n] = float32(math.Inf(1))
			p.max[n] = float32(math.Inf(-1))
		}
		g.Go(func() {
			for {
				k := int(next.Add(1) - 1)
				if k >= pieces {
					return
				}
				segment := func(e0, e1 int) {
					for e := e0; e < e1; {
						t, n0 := e/N, e%N
						end := min((t+1)*N, e1)
						p.scanSegment(y.Data[e:end], t, n0, counts, show, &firsts[k], &firstsNC[k])
						e = end
					}
				}
				if ch == nil {
					segment(elem(k), elem(k+1))
					continue
				}
				// Checksum a block, then scan its values while they are
				// in the cache.
				at := func(b int64) int { return max(0, min(total, (int(b)-off)/4)) }
				ch.HashPiece(k, file, func(b, be int64) { segment(at(b), at(be)) })
			}
		})
	}
	if err := g.Wait(); err != nil {
		return scan{}, err
	}
	out := parts[0]
	out.first, out.firstNC = nil, nil
	for _, p := range parts[1:] {
		out.bad += p.bad
		out.notCount += p.notCount
		for n := range out.min {
			out.min[n] = min(out.min[n], p.min[n])
			out.max[n] = max(out.max[n], p.max[n])
		}
	}
	for k := range firsts {
		for _, b := range firsts[k] {
			if len(out.first) < show {
				out.first = append(out.first, b)
			}
		}
		for _, b := range firstsNC[k] {
			if len(out.firstNC) < show {
				out.firstNC = append(out.firstNC, b)
			}
		}
	}
	if ch != nil {
		out.hash = ch.Sum()
	}
	return out, nil
}

// scanSegment scans the values row[0:len(row)] of trial t, neurons n0 on,
// keeping up to show refused values per piece in first and firstNC.
func (p *scan) scanSegment(row []float32, t, n0 int, counts bool, show int, first, firstNC *[]badValue) {
	mn, mx := p.min[n0:n0+len(row)], p.max[n0:n0+len(row)]
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
			if len(*first) < show {
				*first = append(*first, badValue{t, n0 + n, float64(v)})
			}
		}
	}
	if !counts {
		return
	}
	for n, v := range row {
		if v-v == 0 && (v < 0 || float64(v) != math.Trunc(float64(v))) {
			p.notCount++
			if len(*firstNC) < show {
				*firstNC = append(*firstNC, badValue{t, n0 + n, float64(v)})
			}
		}
	}
}
