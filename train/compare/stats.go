package compare

import (
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/runfolder"
)

// Summarise averages each neuron's scores over folds (eval.FoldAverage;
// perFold[model] holds the model's scores on each fold) and compares the
// models on the averages. excluded[j] marks the neurons left out of every
// score.
func Summarise(models []string, folds, neurons int, perFold map[string][][]eval.Scores, excluded []bool) *runfolder.Comparison {
	c := &runfolder.Comparison{Models: models, Folds: folds, Neurons: neurons, PerNeuron: map[string]map[string][]float64{}}
	for _, ex := range excluded {
		if ex {
			c.Excluded++
		}
	}
	for _, m := range models {
		c.PerNeuron[m] = map[string][]float64{}
		cols := make([][][]float64, len(runfolder.ScoreColumns)) // [column][fold][neuron]
		for _, scores := range perFold[m] {
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
			c.PerNeuron[m][name] = avg
		}
	}
	compareModels(c)
	return c
}

// Pool pools the neurons of several comparisons, for the models that all
// of them share.
func Pool(cmps []*runfolder.Comparison) *runfolder.Comparison {
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
	p := &runfolder.Comparison{Recording: "pooled", Models: models, Folds: cmps[0].Folds, PerNeuron: map[string]map[string][]float64{}}
	for _, c := range cmps {
		p.Neurons += c.Neurons
		p.Excluded += c.Excluded
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

// compareModels fills the summaries, winners and pairwise tests of c from
// its fold averages; excluded neurons (NaN throughout) are not counted as
// NaN scores.
func compareModels(c *runfolder.Comparison) {
	c.Summary = map[string]map[string]runfolder.Spread{}
	c.Winner = map[string]string{}
	c.Pairs = nil
	for _, m := range c.Models {
		c.Summary[m] = map[string]runfolder.Spread{}
		for _, k := range runfolder.CompareMetrics {
			sm := eval.Summarize(c.PerNeuron[m][k])
			c.Summary[m][k] = runfolder.Spread{Median: runfolder.Num(sm.Median), Q1: runfolder.Num(sm.Q1), Q3: runfolder.Num(sm.Q3), N: sm.N, NaN: sm.NaN - c.Excluded}
		}
	}
	for _, k := range runfolder.CompareMetrics {
		medians := make([]float64, len(c.Models))
		cols := make([][]float64, len(c.Models))
		for i, m := range c.Models {
			medians[i] = float64(c.Summary[m][k].Median)
			cols[i] = c.PerNeuron[m][k]
		}
		if b := eval.Best(medians); b >= 0 {
			c.Winner[k] = c.Models[b]
		} else {
			c.Winner[k] = ""
		}
		for _, pt := range eval.Pairs(cols) {
			c.Pairs = append(c.Pairs, runfolder.PairTest{Metric: k, A: c.Models[pt.A], B: c.Models[pt.B], ShareA: pt.ShareA, Wilcoxon: pt.Wilcoxon})
		}
	}
}
