package compare

import (
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/runfolder"
	"github.com/strialab/stria/train/runfolder/comparefolder"
)

// Scoring is how AcrossFolds judges the scores: the level of the F test that
// makes a noise ceiling usable (scores.ceiling_alpha) and the neurons'
// split-half reliability over all trials (one per neuron; nil keeps every
// neuron) with its threshold (scores.min_reliability).
type Scoring struct {
	Alpha          float64
	SplitHalfAll   []float64
	MinReliability float64
}

// AcrossFolds averages each neuron's scores over folds (eval.FoldAverage;
// perFold[model][f] holds the model's scores on fold f) and compares the
// models on the averages. excluded[j] marks the neurons left out of every
// score.
//
// Every fold's scores are gated first (eval.GateCeilings at sc.Alpha, as a
// fit's are; results gated when they were computed are unchanged), so the
// ratio scores (FEV, cc_norm, SPE) average over the folds where the
// neuron's noise ceiling is usable only, and are NaN for a neuron without
// a usable fold. The verdicts depend only on each fold's test trials, so
// they are taken from the first model; the per-fold verdicts are returned
// (verdicts[f][j]) for fold_scores.csv.
func AcrossFolds(models []string, folds, neurons int, perFold map[string][][]eval.Scores, excluded []bool, sc Scoring) (*comparefolder.Comparison, [][]eval.Ceiling) {
	c := &comparefolder.Comparison{Models: models, Folds: folds, Neurons: neurons, PerNeuron: map[string]map[string][]float64{},
		SplitHalfAll: sc.SplitHalfAll, MinReliability: sc.MinReliability}
	for _, ex := range excluded {
		if ex {
			c.Excluded++
		}
	}
	isEx := func(j int) bool { return excluded != nil && excluded[j] }
	var verdicts [][]eval.Ceiling
	for mi, m := range models {
		for _, scores := range perFold[m] {
			v, _ := eval.GateCeilings(nil, scores, sc.Alpha)
			if mi == 0 {
				verdicts = append(verdicts, v)
			}
		}
	}
	c.Ceiling, c.UsableFolds = neuronVerdicts(verdicts, neurons, isEx)
	for _, v := range verdicts {
		c.FoldCeilings = append(c.FoldCeilings, runfolder.CeilingCounts(v, isEx))
	}
	// Each model's averages on its own, the models on all cores.
	perNeuron := make([]map[string][]float64, len(models))
	eachTask(len(models), func(mi int) {
		perNeuron[mi] = map[string][]float64{}
		cols := make([][][]float64, len(runfolder.ScoreColumns)) // [column][fold][neuron]
		for _, scores := range perFold[models[mi]] {
			fold := make([][]float64, len(runfolder.ScoreColumns))
			for k := range fold {
				fold[k] = make([]float64, neurons)
			}
			for j, s := range scores {
				for k, v := range runfolder.ScoreValues(s) {
					fold[k][j] = v
				}
			}
			for k := range cols {
				cols[k] = append(cols[k], fold[k])
			}
		}
		for k, name := range runfolder.ScoreColumns {
			avg := make([]float64, neurons)
			eval.FoldAverage(avg, cols[k], excluded)
			perNeuron[mi][name] = avg
		}
	})
	for mi, m := range models {
		c.PerNeuron[m] = perNeuron[mi]
	}
	compareModels(c)
	return c, verdicts
}

// neuronVerdicts condenses per-fold verdicts into one per neuron:
// "usable" when the ceiling is usable on some fold, otherwise the verdict
// of most folds (the first in code order on a tie); "" for an excluded
// neuron. It also returns the number of usable folds per neuron.
func neuronVerdicts(verdicts [][]eval.Ceiling, n int, excluded func(int) bool) ([]string, []int) {
	codes := make([]string, n)
	usable := make([]int, n)
	for j := 0; j < n; j++ {
		if excluded(j) {
			continue
		}
		var count [eval.CeilingNotSignificant + 1]int
		for _, v := range verdicts {
			if int(v[j]) < len(count) {
				count[v[j]]++
			}
		}
		usable[j] = count[eval.CeilingUsable]
		best := eval.CeilingUsable
		if usable[j] == 0 {
			best = eval.CeilingNoRepeats
			for c := eval.CeilingNoRepeats; c <= eval.CeilingNotSignificant; c++ {
				if count[c] > count[best] {
					best = c
				}
			}
		}
		codes[j] = best.String()
	}
	return codes, usable
}

// Pool pools the neurons of several comparisons, for the models that all
// of them share. Each neuron keeps its recording's verdict and
// reliability; the threshold is the first recording's (one config sets it
// for all).
func Pool(cmps []*comparefolder.Comparison) *comparefolder.Comparison {
	var models []string
	for _, m := range cmps[0].Models {
		all := true
		for _, c := range cmps[1:] {
			_, ok := c.PerNeuron[m]
			all = all && ok
		}
		if all {
			models = append(models, m)
		}
	}
	p := &comparefolder.Comparison{Recording: "pooled", Models: models, Folds: cmps[0].Folds, PerNeuron: map[string]map[string][]float64{},
		MinReliability: cmps[0].MinReliability}
	for _, c := range cmps {
		p.Neurons += c.Neurons
		p.Excluded += c.Excluded
		p.Ceiling = append(p.Ceiling, c.Ceiling...)
		p.UsableFolds = append(p.UsableFolds, c.UsableFolds...)
		p.SplitHalfAll = append(p.SplitHalfAll, c.SplitHalfAll...)
	}
	for _, m := range models {
		p.PerNeuron[m] = map[string][]float64{}
		for _, k := range runfolder.ScoreColumns {
			parts := make([][]float64, len(cmps))
			for i, c := range cmps {
				parts[i] = c.PerNeuron[m][k]
			}
			p.PerNeuron[m][k] = eval.Pool(parts...)
		}
	}
	compareModels(p)
	return p
}

// Kept returns, for a metric, which neurons its summary and tests use and
// the rule in words: the reliable scored neurons (SplitHalfAll >=
// MinReliability) for a ratio metric, every scored neuron otherwise (a
// neuron is scored when its test_r2 fold average is not NaN or its verdict
// is not "").
func Kept(c *comparefolder.Comparison, metric string) ([]bool, string) {
	keep := make([]bool, c.Neurons)
	ratio := runfolder.IsRatio(metric)
	for j := range keep {
		scored := c.Ceiling == nil || c.Ceiling[j] != ""
		keep[j] = scored && (!ratio || c.SplitHalfAll == nil || runfolder.IsReliable(c.SplitHalfAll[j], c.MinReliability))
	}
	if ratio {
		return keep, runfolder.ReliableRule(c.MinReliability)
	}
	return keep, runfolder.KeptScored
}

// Reliable is the number of scored neurons kept for the ratio metrics.
func Reliable(c *comparefolder.Comparison) int {
	keep, _ := Kept(c, runfolder.RatioColumns[0])
	n := 0
	for _, k := range keep {
		if k {
			n++
		}
	}
	return n
}

// compareModels fills the summaries, winners and pairwise tests of c from
// its fold averages, each metric over the neurons Kept gives it. The
// metrics are computed on all cores, each into its own place, and
// assembled in the order of CompareMetrics.
func compareModels(c *comparefolder.Comparison) {
	metrics := comparefolder.CompareMetrics
	spreads := make([][]runfolder.Spread, len(metrics)) // [metric][model]
	winners := make([]string, len(metrics))
	pairs := make([][]comparefolder.PairTest, len(metrics))
	eachTask(len(metrics), func(q int) {
		k := metrics[q]
		keep, by := Kept(c, k)
		kept := 0
		for _, ok := range keep {
			if ok {
				kept++
			}
		}
		spreads[q] = make([]runfolder.Spread, len(c.Models))
		medians := make([]float64, len(c.Models))
		cols := make([][]float64, len(c.Models))
		for i, m := range c.Models {
			spreads[q][i] = runfolder.SpreadOver(c.PerNeuron[m][k], keep, by)
			medians[i] = float64(spreads[q][i].Median)
			cols[i] = make([]float64, 0, kept)
			for j, v := range c.PerNeuron[m][k] {
				if keep[j] {
					cols[i] = append(cols[i], v)
				}
			}
		}
		if b := eval.Best(medians); b >= 0 {
			winners[q] = c.Models[b]
		}
		for _, pt := range eval.Pairs(cols) {
			pairs[q] = append(pairs[q], comparefolder.PairTest{Metric: k, A: c.Models[pt.A], B: c.Models[pt.B], ShareA: pt.ShareA, Wilcoxon: pt.Wilcoxon, Kept: kept, KeptBy: by})
		}
	})
	c.Summary = map[string]map[string]runfolder.Spread{}
	c.Winner = map[string]string{}
	c.Pairs = nil
	for i, m := range c.Models {
		c.Summary[m] = map[string]runfolder.Spread{}
		for q, k := range metrics {
			c.Summary[m][k] = spreads[q][i]
		}
	}
	for q, k := range metrics {
		c.Winner[k] = winners[q]
		c.Pairs = append(c.Pairs, pairs[q]...)
	}
}
