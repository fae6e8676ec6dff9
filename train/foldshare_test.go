package train

import (
	"context"
	"fmt"
	"math"
	"slices"
	"sync"
	"testing"

	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/settings"
)

// runUnitReference is RunUnit as it was before the units of a fold shared
// their statistics: every unit computes its own split statistics from the
// responses and is scored by eval.ScoreConditions (or ScorePopulation for
// soft input). It is the reference of TestRunFoldUnitMatchesReference.
func runUnitReference(ctx context.Context, p *Prepared, spec ModelSpec, fold int, sets [3][]int) (*FoldResult, error) {
	res := &FoldResult{Model: spec.Name, Fold: fold}
	var pred []float64
	if spec.Baseline == "" {
		q := *p
		q.Cfg = spec.Cfg
		pf := q.WithSplit(sets[0], sets[1], sets[2])
		f, err := Fit(ctx, pf, Hooks{}, nil)
		if err != nil {
			return nil, err
		}
		res.Epochs = len(f.Log)
		res.Curves = f.Curves
		if res.Curves == nil {
			res.Curves = PredictConditions(f.Net, p.NBins)
		}
		pf.Norm.InvertRows(res.Curves)
		if p.Soft() {
			pred = PredictTrials(f.Net, pf, sets[2])
		}
	} else {
		pf := p.WithSplit(append(slices.Clone(sets[0]), sets[1]...), nil, sets[2])
		curves, err := fitBaseline(pf, spec.Baseline)
		if err != nil {
			return nil, err
		}
		res.Curves = curves
	}
	res.Scores = make([]eval.Scores, p.Neurons())
	if pred != nil {
		eval.ScorePopulation(res.Scores, p.Rec.Y.Data, p.Neurons(), sets[2], p.Cond, pred, p.NBins)
	} else {
		eval.ScoreConditions(res.Scores, p.Rec.Y.Data, p.Neurons(), sets[2], p.Cond, res.Curves, p.NBins)
	}
	Ceilings(p, res.Scores)
	return res, nil
}

func scoreBits(s eval.Scores) []uint64 {
	var out []uint64
	for _, v := range []float64{s.TestR2, s.TestR, s.EVScore, s.ExplainableFraction, s.FEV, s.SP, s.CCAbs, s.CCMax, s.CCNorm, s.SPE, s.SplitHalf, s.SignalF, s.SignalDF1, s.SignalDF2} {
		out = append(out, math.Float64bits(v))
	}
	return out
}

// TestRunFoldUnitMatchesReference runs every model of every fold on shared
// folds, the units of a fold at once, and requires each unit's scores,
// curves and epochs to equal those of runUnitReference bit for bit: with
// z-scoring and without, with soft (interpolated) input, and on a
// non-periodic axis with the Gaussian baseline.
func TestRunFoldUnitMatchesReference(t *testing.T) {
	for _, tc := range []struct {
		name            string
		edit            func(*settings.Config)
		baselines       []string
		neurons, trials int
	}{
		{"z-scored", nil, []string{"condmean", "vonmises", "vonmises2", "smoothlinear"}, 0, 0},
		{"raw units", func(c *settings.Config) { c.Split.ZScore = false }, []string{"condmean", "vonmises", "smoothlinear"}, 0, 0},
		{"soft input", func(c *settings.Config) { c.Axis.Encoding = settings.Soft; c.Train.MaxEpochs = 5 }, []string{"condmean"}, 0, 0},
		{"track", func(c *settings.Config) { c.Axis.Periodic = false }, []string{"condmean", "gaussian", "smoothlinear"}, 0, 0},
		// Large enough for the statistics and sums to be split over cores.
		{"many neurons", nil, []string{"condmean", "smoothlinear"}, 1500, 900},
	} {
		t.Run(tc.name, func(t *testing.T) {
			n, trials := 40, 360
			if tc.neurons > 0 {
				if testing.Short() {
					t.Skip("-short")
				}
				n, trials = tc.neurons, tc.trials
			}
			p, _ := synthPrepared(t, n, trials, func(c *settings.Config) {
				c.Axis.BinWidth = 30
				c.Model.Layers = []settings.LayerConfig{{Channels: 2, Kernel: 3, Stride: 1, Border: settings.BorderCircular}}
				c.Train.MaxEpochs = 40
				c.Train.Patience = 10
				if tc.edit != nil {
					tc.edit(c)
				}
			})
			folds, err := Folds(p)
			if err != nil {
				t.Fatal(err)
			}
			specs := []ModelSpec{{Name: "encoder", Cfg: p.Cfg}}
			for _, b := range tc.baselines {
				specs = append(specs, ModelSpec{Name: b, Baseline: b})
			}
			got := make([][]*FoldResult, len(folds))
			var wg sync.WaitGroup
			errs := make(chan error, len(folds)*len(specs))
			for f, sets := range folds {
				fold := NewFold(p, sets)
				got[f] = make([]*FoldResult, len(specs))
				for si, s := range specs {
					wg.Add(1)
					go func() {
						defer wg.Done()
						r, err := RunFoldUnit(context.Background(), s, f, fold)
						if err != nil {
							errs <- err
							return
						}
						got[f][si] = r
					}()
				}
			}
			wg.Wait()
			close(errs)
			for err := range errs {
				t.Fatal(err)
			}
			for f, sets := range folds {
				for si, s := range specs {
					want, err := runUnitReference(context.Background(), p, s, f, sets)
					if err != nil {
						t.Fatal(err)
					}
					g := got[f][si]
					what := fmt.Sprintf("%s fold %d", s.Name, f+1)
					if g.Epochs != want.Epochs || len(g.Curves) != len(want.Curves) || len(g.Scores) != len(want.Scores) {
						t.Fatalf("%s: epochs %d, %d curve values, %d scores; want %d, %d, %d", what, g.Epochs, len(g.Curves), len(g.Scores), want.Epochs, len(want.Curves), len(want.Scores))
					}
					for i := range g.Curves {
						if math.Float64bits(g.Curves[i]) != math.Float64bits(want.Curves[i]) {
							t.Fatalf("%s: curve value %d = %v, want %v", what, i, g.Curves[i], want.Curves[i])
						}
					}
					for j := range g.Scores {
						if !slices.Equal(scoreBits(g.Scores[j]), scoreBits(want.Scores[j])) {
							t.Fatalf("%s: neuron %d scores %+v, want %+v", what, j, g.Scores[j], want.Scores[j])
						}
					}
				}
			}
		})
	}
}
