package train

import (
	"slices"

	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/nn"
)

// Cautions are printed and saved wherever held-out and noise-ceiling
// numbers are shown.
var Cautions = []string{
	"Noise-ceiling estimates (explainable fraction, CC_max, and so FEV and CC_norm) are biased when a condition has few trials: with 2-3 trials per condition they scatter widely and can exceed 1 or be undefined (signal power <= 0 gives NaN).",
	"Held-out scores depend on the split: another seed or fold gives other numbers. Compare models on the same splits, and use stria compare (k-fold) before drawing conclusions.",
}

// FewTrials is the number of scored trials per condition below which the
// noise-ceiling caution is shown: with fewer, the ceiling estimates scatter
// and are biased (see the few-trials table in `stria help metrics`).
const FewTrials = 10

// CautionsFor returns the cautions to show beside held-out scores whose
// conditions have the given numbers of scored trials (conditions without
// any are ignored): the split caution always, the noise-ceiling caution
// only when some condition has fewer than FewTrials trials.
func CautionsFor(trialsPerCondition []int) []string {
	few := false
	for _, k := range trialsPerCondition {
		few = few || (k > 0 && k < FewTrials)
	}
	if few {
		return []string{Cautions[0], Cautions[1]}
	}
	return []string{Cautions[1]}
}

// TrialsPerCondition counts the given trials in each condition.
func (p *Prepared) TrialsPerCondition(trials []int) []int {
	k := make([]int, p.NBins)
	for _, t := range trials {
		k[p.Cond[t]]++
	}
	return k
}

// PredictConditions returns the net's prediction for every bin (one-hot
// input): nbins x N, row b for bin b.
func PredictConditions(net *nn.Net, nbins int) []float64 {
	x := make([]float64, nbins*nbins)
	for b := 0; b < nbins; b++ {
		x[b*nbins+b] = 1
	}
	w := net.NewWork(nbins)
	return slices.Clone(net.Forward(w, x, nbins))
}

// PredictTrials returns the predictions for the given trials,
// len(trials) x N, in the recording's units (z-scoring undone).
func PredictTrials(net *nn.Net, p *Prepared, trials []int) []float64 {
	out := predictTrials(net, p, trials)
	p.Norm.InvertRows(out)
	return out
}

// predictTrials is PredictTrials in the units the net was trained in.
func predictTrials(net *nn.Net, p *Prepared, trials []int) []float64 {
	n := p.Neurons()
	out := make([]float64, len(trials)*n)
	if !p.Soft() {
		pc := PredictConditions(net, p.NBins)
		for i, t := range trials {
			c := p.Cond[t]
			copy(out[i*n:(i+1)*n], pc[c*n:(c+1)*n])
		}
		return out
	}
	rows := min(chunkRows, len(trials))
	w := net.NewWork(rows)
	x := make([]float64, rows*p.NBins)
	for lo := 0; lo < len(trials); lo += rows {
		hi := min(lo+rows, len(trials))
		for i, t := range trials[lo:hi] {
			p.encode(x[i*p.NBins:(i+1)*p.NBins], t)
		}
		pred := net.Forward(w, x, hi-lo)
		copy(out[lo*n:hi*n], pred[:(hi-lo)*n])
	}
	return out
}

// ScoreNet returns the scores of Score(p, PredictTrials(net, p, p.Test)),
// equal up to rounding, without the len(p.Test) x N prediction matrix when
// the input is one-hot: the predictions of the B conditions are computed
// once and eval.ScoreConditions reads each test trial once. At 24,000
// neurons and 920 test trials this replaces 177 MB of fresh memory and two
// passes over the test trials by one pass.
func ScoreNet(p *Prepared, net *nn.Net) []eval.Scores {
	if p.Soft() {
		return Score(p, PredictTrials(net, p, p.Test))
	}
	pc := PredictConditions(net, p.NBins)
	p.Norm.InvertRows(pc)
	return ScoreCurves(p, pc)
}

// ScoreFitted is ScoreNet using the curves the solver computed, when it
// did. With a recording prepared by PrepareParts it takes the curves out
// of f (f.Curves is nil afterwards).
func ScoreFitted(p *Prepared, f *Fitted) []eval.Scores {
	if p.Parts != nil && f.Curves == nil {
		f.Curves = PredictConditions(f.Net, p.NBins)
	}
	if f.Curves == nil || p.Soft() {
		return ScoreNet(p, f.Net)
	}
	pc := f.Curves
	if p.Parts == nil {
		pc = slices.Clone(pc)
	} else {
		// No B x N copy at a million neurons: the curves are converted
		// in place and leave f.
		f.Curves = nil
	}
	p.Norm.InvertRows(pc)
	return ScoreCurves(p, pc)
}

// ScoreCurves scores a one-hot model's predictions (nbins x N, recording
// units) on the test trials, reading each test trial once.
//
// A recording prepared by PrepareParts is scored from the test part's
// sums (eval.ScoreSums; the same numbers as ScoreConditions from the same
// sums, eval/methods.md §8).
func ScoreCurves(p *Prepared, pc []float64) []eval.Scores {
	s := make([]eval.Scores, p.Neurons())
	if p.Parts != nil {
		eval.ScoreSums(s, p.Parts.heldOut(), pc)
		eval.GateCeilings(nil, s, p.Cfg.Scores.CeilingAlpha)
		return s
	}
	eval.ScoreConditions(s, p.Rec.Y.Data, p.Neurons(), p.Test, p.Cond, pc, p.NBins)
	eval.GateCeilings(nil, s, p.Cfg.Scores.CeilingAlpha)
	return s
}

// Score evaluates predictions of the test trials (len(p.Test) x N) with
// every per-neuron metric.
func Score(p *Prepared, pred []float64) []eval.Scores {
	s := make([]eval.Scores, p.Neurons())
	eval.ScorePopulation(s, p.Rec.Y.Data, p.Neurons(), p.Test, p.Cond, pred, p.NBins)
	eval.GateCeilings(nil, s, p.Cfg.Scores.CeilingAlpha)
	return s
}

// Ceilings returns every neuron's noise-ceiling verdict on the scored
// trials (eval.CheckCeiling at the config's scores.ceiling_alpha) and
// gates the scores: where the ceiling is not usable, FEV, CCNorm and SPE
// become NaN. The verdict depends only on the held-out responses, so
// gating scores that are already gated changes nothing: fit and compare
// call it on whatever Score, ScoreCurves or RunUnit returned, and every
// model scored on the same trials gets the same verdicts.
func Ceilings(p *Prepared, scores []eval.Scores) []eval.Ceiling {
	c, _ := eval.GateCeilings(nil, scores, p.Cfg.Scores.CeilingAlpha)
	return c
}

// Reliability returns every neuron's split-half reliability over all trials
// of the recording (eval.SplitHalf, Spearman-Brown stepped up; trials in
// recording order dealt alternately to the halves within each condition).
// It is a property of the data, not of a model or a split: the threshold
// scores.min_reliability selects the neurons of the ratio summaries with
// it. NaN where eval.SplitHalf is undefined (a constant neuron, fewer than
// three conditions with two trials).
//
// A recording prepared by PrepareParts has it in Parts.Reliability.
func Reliability(p *Prepared) []float64 {
	if p.Parts != nil {
		return p.Parts.Reliability
	}
	all := make([]int, p.Rec.Y.Rows)
	for i := range all {
		all[i] = i
	}
	return eval.SplitHalf(p.Rec.Y.Data, p.Neurons(), p.Cond, all, p.NBins)
}
