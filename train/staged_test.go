package train

import (
	"context"
	"math"
	"slices"
	"testing"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/eval"
	"github.com/strialab/stria/train/projection"
	"github.com/strialab/stria/train/settings"
)

// TestStagesEqualOneFit: a fit in stages over ranges of neurons (block
// sums per range, FitFilters on their sum, FitRange per range, the
// per-neuron results joined) gives every number of Fit on all neurons
// from one pass, bit for bit: filters, log (MergedLog), readout weights,
// biases, penalties, curves, scores and reliability; with 3 ranges over
// 3 blocks (the last one short) and with 2 (4096 and 4396 neurons), and
// the block sums of a range are the full fit's blocks. Also with a fixed
// penalty (z-scoring flipped) and with one automatic penalty for all.
func TestStagesEqualOneFit(t *testing.T) {
	if testing.Short() {
		t.Skip("fits 8,492 neurons several times")
	}
	const N = 2*projection.SumBlock + 300
	base, _ := partsCase(t, N, 600)
	base.Train.MaxEpochs = 60
	for _, v := range []struct {
		name  string
		tasks []int
		edit  func(c *settings.Config)
	}{
		{"default", []int{2, 3}, func(*settings.Config) {}},
		{"fixed penalty, z-scoring flipped", []int{3}, func(c *settings.Config) {
			c.Model.ReadoutL2 = settings.Penalty{Value: 0.5}
			c.Split.ZScore = !c.Split.ZScore
		}},
		{"one automatic penalty for all", []int{2}, func(c *settings.Config) { c.Model.ReadoutL2PerNeuron = false }},
	} {
		t.Run(v.name, func(t *testing.T) {
			cfg := *base
			v.edit(&cfg)
			testStages(t, &cfg, N, v.tasks)
		})
	}
}

func testStages(t *testing.T, cfg *settings.Config, N int, taskCounts []int) {
	rec, s, err := data.LoadStream(cfg.Source())
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	full, err := PrepareParts(cfg, rec, s)
	if err != nil {
		t.Fatal(err)
	}
	want := floatsOf(fitWith(t, full))
	var wantBlocks []projection.BlockSums
	{
		p, err := PrepareParts(cfg, rec, s)
		if err != nil {
			t.Fatal(err)
		}
		if wantBlocks, err = RangeSums(p); err != nil {
			t.Fatal(err)
		}
	}
	rangeParts := func(t *testing.T, n0, n1 int) *Prepared {
		p, plan, err := PlanParts(cfg, rec, s.Rows())
		if err != nil {
			t.Fatal(err)
		}
		parts, err := condstats.AccumulateParts(s.Columns(n0, n1), plan, condstats.StreamOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if err := p.SetParts(parts); err != nil {
			t.Fatal(err)
		}
		return p
	}
	for _, tasks := range taskCounts {
		t.Run(itoa(tasks)+" ranges", func(t *testing.T) {
			var blocks []projection.BlockSums
			for i := 1; i <= tasks; i++ {
				n0, n1 := NeuronRange(i, tasks, N)
				b, err := RangeSums(rangeParts(t, n0, n1))
				if err != nil {
					t.Fatal(err)
				}
				blocks = append(blocks, b...)
			}
			if len(blocks) != len(wantBlocks) {
				t.Fatalf("got %d blocks want %d", len(blocks), len(wantBlocks))
			}
			for k := range blocks {
				g, w := blocks[k], wantBlocks[k]
				if !slices.Equal(bitsOf(g.S), bitsOf(w.S)) || !slices.Equal(bitsOf(g.Cvt), bitsOf(w.Cvt)) || !slices.Equal(bitsOf(g.Yyv), bitsOf(w.Yyv)) ||
					math.Float64bits(g.Within) != math.Float64bits(w.Within) || math.Float64bits(g.WithinV) != math.Float64bits(w.WithinV) {
					t.Errorf("block %d: the sums of the range differ from those of all neurons", k)
				}
			}
			_, plan, err := PlanParts(cfg, rec, s.Rows())
			if err != nil {
				t.Fatal(err)
			}
			tc, vc := make([]int, plan.NBins), make([]int, plan.NBins)
			for tr, q := range plan.Part {
				switch q {
				case 0:
					tc[plan.Cond[tr]]++
				case 1:
					vc[plan.Cond[tr]]++
				}
			}
			sums := projection.AddBlocks(tc, vc, N, blocks)
			ff, err := FitFilters(context.Background(), cfg, sums, Hooks{})
			if err != nil {
				t.Fatal(err)
			}
			conv := ff.Net.Params[:len(ff.Net.Params)-ff.Net.Features()-1]
			var bias, l2, curves, w, basis, rel, valR2 []float64
			var scores []eval.Scores
			var mean, scale []float64
			cb := make([][]float64, plan.NBins)
			for i := 1; i <= tasks; i++ {
				n0, n1 := NeuronRange(i, tasks, N)
				p := rangeParts(t, n0, n1)
				f, vr, err := FitRange(p, sums, conv)
				if err != nil {
					t.Fatal(err)
				}
				for b := range plan.NBins {
					cb[b] = append(cb[b], f.Curves[b*(n1-n0):(b+1)*(n1-n0)]...)
				}
				// The readout's coefficients, and its basis, which every
				// range shares.
				r := f.Readout
				if basis == nil {
					basis = r.Basis
				} else if !slices.Equal(bitsOf(basis), bitsOf(r.Basis)) {
					t.Errorf("task %d: the readout basis differs from task 1's", i)
				}
				cr := make([]float64, (n1-n0)*r.Rank)
				r.Coef(cr, 0, n1-n0)
				w, bias, l2 = append(w, cr...), append(bias, f.ReadoutBias()...), append(l2, f.ReadoutL2...)
				rel, valR2 = append(rel, Reliability(p)...), append(valR2, vr...)
				if p.Norm != nil {
					mean, scale = append(mean, p.Norm.Mean...), append(scale, p.Norm.Scale...)
				}
				scores = append(scores, ScoreFitted(p, f)...)
			}
			for _, c := range cb {
				curves = append(curves, c...)
			}
			if err := MergedLog(ff, valR2); err != nil {
				t.Fatal(err)
			}
			rank := len(basis) / ff.Net.Features()
			got := floatsOf(partsResult{p: full, f: &Fitted{Net: ff.Net, Log: ff.Log, Bias: bias, ReadoutL2: l2, Curves: curves,
				Readout: &projection.Readout{Rank: rank, Features: ff.Net.Features(), Basis: basis,
					Coef: func(dst []float64, n0, n1 int) { copy(dst, w[n0*rank:n1*rank]) }}}, scores: scores, rel: rel})
			if mean != nil {
				got["norm_mean"], got["norm_scale"] = mean, scale
			}
			for name, v := range want {
				if !slices.Equal(bitsOf(got[name]), bitsOf(v)) {
					t.Errorf("%s: the fit in stages differs from the fit of all neurons", name)
				}
			}
		})
	}
}

func itoa(i int) string { return string(rune('0' + i)) }
