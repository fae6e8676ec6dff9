package train

import (
	"fmt"
	"github.com/strialab/stria/train/settings"
	"slices"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
)

// Prepared is a recording loaded, binned, checked and split, ready to fit.
type Prepared struct {
	Cfg   *settings.Config
	Rec   *data.Recording
	Axis  data.Axis
	NBins int
	// Cond is the bin of each trial.
	Cond []int
	// Values is the stimulus value of each condition (bin): the mean
	// stimulus value of its trials, the bin centre for an empty bin. Tuning
	// descriptors and figures place the conditions there.
	Values []float64
	// Blocks is the block of each trial that splits keep together (nil when
	// blocks are not kept): the recording's block ids, or runs of
	// split.block_trials consecutive trials.
	Blocks []int
	// Train, Val and Test are trial indices. Val is carved from the
	// training trials for early stopping; Test is held out until the end.
	Train, Val, Test []int
	// Report holds the validation warnings, the constant neurons and the
	// conditions with too few trials.
	Report *data.Report
	// Norm is the per-neuron z-scoring fitted on Train and Val (nil when
	// split.zscore is false). Rec.Y stays in the recording's units: the
	// trainer standardises what it reads, and predictions are returned in
	// the recording's units.
	Norm *condstats.Normalizer

	// Parts holds the statistics of one pass over the responses when the
	// recording was prepared by PrepareParts (nil otherwise): then Rec.Y
	// may be nil and everything that needs the responses reads Parts.
	Parts *Parts

	// Per-condition statistics of Train and Val, computed on first use.
	trainSt, valSt *condstats.Stats
	// notes and coverage are the warnings before and after the data
	// checks' own (PrepareParts rebuilds the Report after its pass).
	notes, coverage []string
}

// Prepare loads the recording the config names and splits it. The config
// must be valid.
func Prepare(cfg *settings.Config) (*Prepared, error) {
	rec, err := data.Load(cfg.Source())
	if err != nil {
		return nil, err
	}
	return PrepareRecording(cfg, rec)
}

// PrepareRecording bins, checks and splits a recording already in memory.
// The check computes the content hashes of the recording's files
// (Recording.Files, for fingerprints) and, with a count loss (poisson),
// requires whole numbers >= 0. Every read of the responses runs under
// format.Guard (a truncated mapped file gives a *format.FaultError).
func PrepareRecording(cfg *settings.Config, rec *data.Recording) (p *Prepared, err error) {
	if gerr := format.Guard(func() { p, err = prepareRecording(cfg, rec) }); gerr != nil {
		return nil, gerr
	}
	return p, err
}

func prepareRecording(cfg *settings.Config, rec *data.Recording) (*Prepared, error) {
	p, err := prepareTrials(cfg, rec, func(p *Prepared) (*data.Report, error) {
		return data.CheckWith(rec, p.Cond, data.CheckOptions{NBins: p.NBins, Axis: &p.Axis, Counts: cfg.Model.Loss == settings.Poisson, Hash: true})
	})
	if err != nil {
		return nil, err
	}
	if cfg.Split.ZScore {
		p.Norm = condstats.NormalizerFromStats(p.TrainStats(), p.ValStats())
	}
	return p, nil
}

// prepareTrials bins the trials, checks the recording with check, and
// splits it; everything but the z-scoring, which needs the responses.
func prepareTrials(cfg *settings.Config, rec *data.Recording, check func(p *Prepared) (*data.Report, error)) (*Prepared, error) {
	ax := cfg.DataAxis()
	if err := ax.Validate(); err != nil {
		return nil, err
	}
	// A stimulus with a few discrete values gets bins centred on them
	// (eval/methods.md §0): otherwise every condition, and every preferred
	// stimulus, would be reported up to half a bin off. The resolved axis
	// goes back into the config, so the run's settings show it.
	var notes []string
	centred, note, err := ax.CenterOnStimulus(rec.Stim, rec.Cond)
	if err != nil {
		return nil, fmt.Errorf("stimulus %s: %w", rec.Source.Stimulus, err)
	}
	if note != "" {
		ax = centred
		cfg.Axis.Min, cfg.Axis.Max = ax.Min, ax.Max
		if ax.Bins == 0 && cfg.Axis.Bins > 0 {
			cfg.Axis.Bins, cfg.Axis.BinWidth = 0, ax.BinWidth
		}
		notes = append(notes, note)
	}
	if hint := ax.RadiansHint(rec.Stim); hint != "" {
		notes = append(notes, hint)
	}
	p := &Prepared{Cfg: cfg, Rec: rec, Axis: ax, NBins: ax.NumBins()}
	cond, err := ax.BinTrials(rec.Stim)
	if err != nil {
		return nil, fmt.Errorf("stimulus %s: %w", rec.Source.Stimulus, err)
	}
	p.Cond = cond
	if err := checkConditionIDs(rec, cond, ax); err != nil {
		return nil, err
	}
	rep, err := check(p)
	if err != nil {
		return nil, err
	}
	p.Report = rep
	var offNote string
	p.Values, offNote = p.conditionValues()
	if offNote != "" {
		notes = append(notes, offNote)
	}
	p.notes = notes
	rep.Warnings = append(slices.Clone(notes), rep.Warnings...)
	nw := len(rep.Warnings)
	if cfg.Split.KeepBlocks {
		p.Blocks = rec.Block
		if p.Blocks == nil && cfg.Split.BlockTrials > 0 {
			p.Blocks = make([]int, len(cond))
			for t := range p.Blocks {
				p.Blocks[t] = t / cfg.Split.BlockTrials
			}
		}
	}
	blocks := p.Blocks
	sp, err := data.HoldOut(cond, blocks, p.NBins, cfg.Split.TestFraction, cfg.Seed)
	if err != nil {
		return nil, fmt.Errorf("test split: %w", err)
	}
	p.Test = sp.Test
	coverageWarnings(rep, sp, cond, &p.Axis, TestSplitLabel)
	p.coverage = slices.Clone(rep.Warnings[nw:])
	p.Train, p.Val, err = carve(cond, blocks, sp.Train, p.NBins, cfg.Split.ValidationFraction, cfg.Seed+1)
	if err != nil {
		return nil, fmt.Errorf("validation split: %w", err)
	}
	return p, nil
}

// WithSplit returns a copy of p that trains on train (with val for early
// stopping) and holds out test, with its own z-scoring fitted on train and
// val. The recording is shared, not copied.
func (p *Prepared) WithSplit(train, val, test []int) *Prepared {
	q := *p
	q.Train, q.Val, q.Test = train, val, test
	q.trainSt, q.valSt = nil, nil
	q.Norm = nil
	if p.Cfg.Split.ZScore {
		q.Norm = condstats.NormalizerFromStats(q.TrainStats(), q.ValStats())
	}
	return &q
}

// TrainStats returns the per-condition statistics of the training trials.
func (p *Prepared) TrainStats() *condstats.Stats {
	if p.Parts != nil {
		panic("train: TrainStats of a recording prepared by PrepareParts (use Parts)")
	}
	if p.trainSt == nil {
		p.trainSt = condstats.New(p.Rec.Y, p.Cond, p.Train, p.NBins)
	}
	return p.trainSt
}

// ValStats returns the per-condition statistics of the validation trials.
func (p *Prepared) ValStats() *condstats.Stats {
	if p.Parts != nil {
		panic("train: ValStats of a recording prepared by PrepareParts (use Parts)")
	}
	if p.valSt == nil {
		p.valSt = condstats.New(p.Rec.Y, p.Cond, p.Val, p.NBins)
	}
	return p.valSt
}

// carve splits the trials in sub into a training and a validation part,
// stratified by condition (and keeping blocks together when blocks is not
// nil).
func carve(cond, blocks, sub []int, nbins int, frac float64, seed uint64) (train, val []int, err error) {
	sc := make([]int, len(sub))
	var sb []int
	if blocks != nil {
		sb = make([]int, len(sub))
	}
	for i, t := range sub {
		sc[i] = cond[t]
		if sb != nil {
			sb[i] = blocks[t]
		}
	}
	sp, err := data.HoldOut(sc, sb, nbins, frac, seed)
	if err != nil {
		return nil, nil, err
	}
	train = make([]int, len(sp.Train))
	for i, j := range sp.Train {
		train[i] = sub[j]
	}
	val = make([]int, len(sp.Test))
	for i, j := range sp.Test {
		val[i] = sub[j]
	}
	return train, val, nil
}

// Neurons is the number of neurons in the recording.
func (p *Prepared) Neurons() int {
	if p.Parts != nil {
		return p.Parts.Test.N
	}
	return p.Rec.Y.Cols
}

// Soft reports whether trials are encoded by linear interpolation between
// bin centres rather than one-hot.
func (p *Prepared) Soft() bool { return p.Cfg.Axis.Encoding == settings.Soft }

// encode writes the model input for trial t (NBins values) into dst.
func (p *Prepared) encode(dst []float64, t int) {
	if p.Soft() {
		// The stimulus was binned without error, so it is in range.
		_ = p.Axis.Soft(dst, p.Rec.Stim[t])
		return
	}
	clear(dst)
	dst[p.Cond[t]] = 1
}

// checkConditionIDs checks user condition ids against the stimulus bins:
// stria conditions are the bins, so all trials with one id must fall in
// one bin. The error names the id, two trials and their bins.
func checkConditionIDs(rec *data.Recording, cond []int, ax data.Axis) error {
	if rec.Cond == nil {
		return nil
	}
	first := map[int]int{} // id -> first trial
	for t, id := range rec.Cond {
		f, ok := first[id]
		if !ok {
			first[id] = t
			continue
		}
		if cond[f] != cond[t] {
			return fmt.Errorf("%s: condition id %d holds trials in different stimulus bins: trial %d (0-based) in bin %s, trial %d in bin %s; use bins that match the conditions",
				rec.Source.Condition, id, f, ax.BinLabel(cond[f]), t, ax.BinLabel(cond[t]))
		}
	}
	return nil
}

// TestSplitLabel starts the coverage warnings of the hold-out test split
// ("the test split: bin 3 ... has no test trials"). stria compare, which
// does not use that split, leaves them out of its warnings.
const TestSplitLabel = "the test split"

// coverageWarnings warns about conditions that a blocked split left on one
// side only: they cannot be trained on, or are missing from the scores.
func coverageWarnings(rep *data.Report, sp data.Split, cond []int, ax *data.Axis, what string) {
	noTrain, noTest := sp.Coverage(cond, ax.NumBins())
	for _, c := range noTrain {
		rep.Warnings = append(rep.Warnings, fmt.Sprintf("%s: %s has no training trials (whole blocks went to the test side)", what, ax.BinLabel(c)))
	}
	for _, c := range noTest {
		rep.Warnings = append(rep.Warnings, fmt.Sprintf("%s: %s has no test trials, so the condition-level scores leave it out", what, ax.BinLabel(c)))
	}
}
