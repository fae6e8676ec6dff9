package train

import (
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/format"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/projection"
	"github.com/strialab/stria/train/settings"
)

// Parts are the sufficient statistics of a recording's trials that a fit
// from one pass over the responses keeps (eval/methods.md §8): those of
// the training, validation and test trials and the split-half reliability
// over all trials, computed from them before the fit. Nothing in it is of
// size trials x neurons.
type Parts struct {
	// Train and Val have counts, sums and per-neuron sums of squares; the
	// projected solver overwrites their sums (see projection.Problem).
	Train, Val *condstats.PartStats
	// Test also has the per-condition sums of squares and the split-half
	// sums: what eval.ScoreSums scores a one-hot model from.
	Test *condstats.PartStats
	// Reliability is every neuron's split-half reliability over all trials
	// (as Reliability of an in-memory recording).
	Reliability []float64
}

// Streamable returns "" when the config's model can be fitted from Parts
// (one-hot encoding, squared error with identity output, full batch, the
// projected solver: what train.solver auto picks for them), and otherwise
// the reason it cannot.
func Streamable(cfg *settings.Config) string {
	switch {
	case cfg.Axis.Encoding != settings.OneHot:
		return "axis.encoding soft needs every trial's stimulus value at every step"
	case cfg.Model.Loss != settings.MSE:
		return "the " + cfg.Model.Loss.String() + " loss needs the responses of every trial"
	case cfg.Train.BatchSize > 0:
		return "mini-batches (train.batch_size > 0) need the responses of every trial"
	case cfg.SolverToRun() != settings.SolverProjected:
		return "the " + cfg.SolverToRun().String() + " solver needs the responses of every trial"
	case cfg.StateActive():
		return "the state terms (data.covariates, state.population_gain) need the responses of every trial"
	}
	return ""
}

// PrepareParts is PrepareRecording for a model that Streamable accepts,
// passing once over the responses instead of holding them: from stream
// when it is not nil (rec from data.LoadStream, Rec.Y nil), else from
// rec.Y. It bins, checks and splits the trials as PrepareRecording does,
// then accumulates Parts in one pass (condstats.AccumulateParts, or
// AccumulatePartsMatrix: the same numbers), finds the constant neurons
// and z-scores from the parts' sums (condstats.NormalizerFromParts). A
// non-finite response is refused with its file, trial and neuron; the
// responses file is not hashed (Recording.Files have no content hash).
func PrepareParts(cfg *settings.Config, rec *data.Recording, stream *format.NPYStream) (*Prepared, error) {
	rows := 0
	if stream != nil {
		rows = stream.Rows()
	} else {
		rows = rec.Y.Rows
	}
	p, plan, err := PlanParts(cfg, rec, rows)
	if err != nil {
		return nil, err
	}
	var ps []*condstats.PartStats
	if stream != nil {
		ps, err = condstats.AccumulateParts(stream, plan, condstats.StreamOptions{})
	} else {
		ps, err = condstats.AccumulatePartsMatrix(rec.Y, plan, condstats.StreamOptions{})
	}
	if err != nil {
		return nil, err
	}
	if err := p.SetParts(ps); err != nil {
		return nil, err
	}
	return p, nil
}

// PlanParts is the first half of PrepareParts, for a recording of rows
// trials whose responses are not read: it bins, checks and splits the
// trials and returns the plan of the pass (the training, validation and
// test trials, with the split-half sums over all trials). Array tasks of
// a fit each run the plan over a range of neurons; SetParts finishes the
// preparation with the joined statistics.
func PlanParts(cfg *settings.Config, rec *data.Recording, rows int) (*Prepared, condstats.StreamPlan, error) {
	if why := Streamable(cfg); why != "" {
		panic("train: PlanParts: " + why)
	}
	p, err := prepareTrials(cfg, rec, func(p *Prepared) (*data.Report, error) {
		return data.CheckTrials(rec, rows, p.Cond, p.checkOptions(), nil)
	})
	if err != nil {
		return nil, condstats.StreamPlan{}, err
	}
	part, err := condstats.PartOf(rows, p.Train, p.Val, p.Test)
	if err != nil {
		return nil, condstats.StreamPlan{}, err
	}
	plan := condstats.StreamPlan{NBins: p.NBins, Cond: p.Cond, Part: part, AllHalves: true,
		Specs: []condstats.PartSpec{{}, {}, {Halves: true, CondSquares: true}}}
	return p, plan, nil
}

func (p *Prepared) checkOptions() data.CheckOptions {
	return data.CheckOptions{NBins: p.NBins, Axis: &p.Axis}
}

// SetParts finishes a preparation begun by PlanParts with the statistics
// of its plan over all the neurons (the training, validation and test
// parts and the dealing over all trials, as AccumulateParts returns
// them): the split-half reliability over all trials, the constant
// neurons and the report, and the z-scoring from the parts' sums
// (condstats.NormalizerFromParts).
func (p *Prepared) SetParts(ps []*condstats.PartStats) error {
	if len(ps) != 4 {
		panic(fmt.Sprintf("train: SetParts of %d statistics, want the 3 parts and the dealing over all trials", len(ps)))
	}
	p.Parts = &Parts{Train: ps[0], Val: ps[1], Test: ps[2]}
	p.Parts.Reliability = splitHalfAll(ps[3], ps[:3])
	if err := p.setReport(condstats.ConstantNeurons(ps[:3]...)); err != nil {
		return err
	}
	if p.Cfg.Split.ZScore {
		p.Norm = condstats.NormalizerFromParts(ps[0], ps[1])
	}
	return nil
}

// setReport makes the report again, now with the constant neurons, in
// the order of PrepareRecording's.
func (p *Prepared) setReport(constant []int) error {
	rep, err := data.CheckTrials(p.Rec, len(p.Cond), p.Cond, p.checkOptions(), constant)
	if err != nil {
		return err
	}
	rep.Warnings = append(append(slices.Clone(p.notes), rep.Warnings...), p.coverage...)
	p.Report = rep
	return nil
}

// NeuronRange returns the neurons [n0, n1) of array task i of n (1-based)
// over N neurons: the tasks share out the blocks of
// projection.SumBlock neurons (the last one may be shorter), task i
// taking blocks [floor((i-1) K / n), floor(i K / n)) of the K blocks, so
// that every range starts at a block boundary and the sums over neurons
// of the filters are those of one process bit for bit
// (projection.AddBlocks). With more tasks than blocks some tasks get no
// neurons.
func NeuronRange(i, n, N int) (n0, n1 int) {
	const blk = projection.SumBlock
	k := (int64(N) + blk - 1) / blk
	b0, b1 := int64(i-1)*k/int64(n), int64(i)*k/int64(n)
	return int(min(b0*blk, int64(N))), int(min(b1*blk, int64(N)))
}

// splitHalfAll returns each neuron's split-half reliability over all the
// trials of parts, as eval.SplitHalf computes it over all trials in
// recording order (the same dealing, the means taken relative to
// all.Ref, which a correlation does not see): conditions with trials in
// both halves, NaN with fewer than three, Spearman-Brown stepped up.
// Neurons are done in blocks over the cores.
func splitHalfAll(all *condstats.PartStats, parts []*condstats.PartStats) []float64 {
	N := all.N
	out := make([]float64, N)
	var use []int
	for b, k := range all.Count {
		if a := all.CountA[b]; a > 0 && k-a > 0 {
			use = append(use, b)
		}
	}
	if len(use) < 3 {
		for n := range out {
			out[n] = math.NaN()
		}
		return out
	}
	const blk = 1024
	nblk := (N + blk - 1) / blk
	workers := min(runtime.GOMAXPROCS(0), nblk)
	var wg sync.WaitGroup
	next := make(chan int, nblk)
	for i := range nblk {
		next <- i
	}
	close(next)
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			ma, mb := make([]float64, len(use)), make([]float64, len(use))
			for i := range next {
				for n := i * blk; n < min((i+1)*blk, N); n++ {
					for u, b := range use {
						var tot float64
						for _, ps := range parts {
							if c := ps.Count[b]; c > 0 {
								tot += ps.Sum[b*N+n] + float64(c)*(ps.Ref[n]-all.Ref[n])
							}
						}
						sa := all.SumA[b*N+n]
						ka := all.CountA[b]
						ma[u] = sa / float64(ka)
						mb[u] = (tot - sa) / float64(all.Count[b]-ka)
					}
					out[n] = eval.SpearmanBrown(eval.Pearson(ma, mb), 2)
				}
			}
		}()
	}
	wg.Wait()
	return out
}

// heldOut returns the test part as eval's held-out sums.
func (pt *Parts) heldOut() *eval.HeldOutSums {
	t := pt.Test
	return &eval.HeldOutSums{B: t.B, N: t.N, Count: t.Count, CountA: t.CountA, Ref: t.Ref, RefCond: t.RefCond,
		Sum: t.Sum, SumA: t.SumA, SumSq: t.SumSq}
}
