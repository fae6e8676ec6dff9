package projection

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/strialab/stria/data"
	"github.com/strialab/stria/data/condstats"
	"github.com/strialab/stria/data/synth"
	"github.com/strialab/stria/nn"
)

// The fixtures of this package's tests build a Problem from data-level
// pieces, as train.Prepare does: bins of a periodic axis, a stratified
// hold-out test part, a validation part carved from the rest, the
// per-condition statistics of both and (for MSE) z-scoring from them.

// testCase is a prepared synthetic recording reduced to a Problem, with
// what the checks need besides it.
type testCase struct {
	pr                  Problem
	y                   *data.Matrix
	cond                []int
	train, val, test    []int
	B, N                int
	lr                  float64
	maxEpochs, patience int
	convs               []nn.ConvSpec
	output              nn.Activation
}

// caseOptions are the fit settings of a testCase (the stria defaults where
// zero: 8 channels, kernel 9, stride 1, circular; learning rate 1e-2).
type caseOptions struct {
	penalty             float64
	convs               []nn.ConvSpec
	output              nn.Activation
	maxEpochs, patience int
}

// newCase splits and reduces a recording whose stimulus takes the values
// of bins equal bins on 0..360 deg.
func newCase(tb testing.TB, rec *data.Recording, bins int, poisson bool, o caseOptions) *testCase {
	tb.Helper()
	ax := data.Axis{Name: "direction", Unit: "deg", Min: 0, Max: 360, Periodic: true, Bins: bins}
	cond, err := ax.BinTrials(rec.Stim)
	if err != nil {
		tb.Fatal(err)
	}
	sp, err := data.HoldOut(cond, nil, bins, 0.2, 1)
	if err != nil {
		tb.Fatal(err)
	}
	sub := make([]int, len(sp.Train))
	for i, t := range sp.Train {
		sub[i] = cond[t]
	}
	inner, err := data.HoldOut(sub, nil, bins, 0.1, 2)
	if err != nil {
		tb.Fatal(err)
	}
	c := &testCase{y: rec.Y, cond: cond, test: sp.Test, B: bins, N: rec.Y.Cols, lr: 1e-2, maxEpochs: 3000, patience: 100, output: o.output}
	for _, i := range inner.Train {
		c.train = append(c.train, sp.Train[i])
	}
	for _, i := range inner.Test {
		c.val = append(c.val, sp.Train[i])
	}
	if o.maxEpochs > 0 {
		c.maxEpochs = o.maxEpochs
	}
	if o.patience > 0 {
		c.patience = o.patience
	}
	c.convs = o.convs
	if c.convs == nil {
		c.convs = []nn.ConvSpec{{Out: 8, K: 9, Stride: 1, Border: nn.Circular}}
	}
	if o.penalty == 0 {
		o.penalty = 1
	}
	st := condstats.New(rec.Y, cond, c.train, bins)
	sv := condstats.New(rec.Y, cond, c.val, bins)
	c.pr = Problem{Train: st, Val: sv, Penalty: o.penalty}
	if !poisson {
		c.pr.Norm = condstats.NormalizerFromStats(st, sv)
	}
	return c
}

// popCase draws a synth.DiscreteConfig population and reduces it (Poisson populations
// with a softplus output unless o.output says otherwise).
func popCase(tb testing.TB, s synth.DiscreteConfig, o caseOptions) (*testCase, []float64) {
	tb.Helper()
	rec, truth := synth.Discrete(s)
	if s.Poisson && o.output == nn.Identity {
		o.output = nn.Softplus
	}
	return newCase(tb, rec, s.Bins, s.Poisson, o), truth
}

// net returns a net of the case's shape with filters drawn as nn.Net.Init
// does from (seed, stream).
func (c *testCase) net(seed, stream uint64) *nn.Net {
	net := nn.NewNet(nn.Shape{In: 1, Length: c.B, Neurons: c.N, Convs: c.convs, Output: c.output})
	net.Init(rand.New(rand.NewPCG(seed, stream)))
	return net
}

// testR2 returns each neuron's R^2 on the test trials of per-bin
// predictions pred (B x N, recording units): 1 - SSE/SST, SST about the
// test mean (NaN where SST is 0).
func (c *testCase) testR2(pred []float64) []float64 {
	N := c.N
	st := condstats.New(c.y, c.cond, c.test, c.B)
	sse, tot, grand := make([]float64, N), make([]float64, N), make([]float64, N)
	for b, k := range st.Count {
		if k == 0 {
			continue
		}
		cnt := float64(k)
		for n := 0; n < N; n++ {
			f, s, q := pred[b*N+n], st.Sum[b*N+n], st.SumSq[b*N+n]
			sse[n] += q - 2*f*s + cnt*f*f
			tot[n] += q
			grand[n] += s
		}
	}
	r2 := make([]float64, N)
	for n := range r2 {
		sst := tot[n] - grand[n]*grand[n]/float64(len(c.test))
		r2[n] = math.NaN()
		if sst > 0 {
			r2[n] = 1 - sse[n]/sst
		}
	}
	return r2
}

// condMeanPred is the condition-mean model of the training and validation
// trials, B x N; bins without such trials get the grand mean.
func (c *testCase) condMeanPred() []float64 {
	N := c.N
	seen := append(slices.Clone(c.train), c.val...)
	st := condstats.New(c.y, c.cond, seen, c.B)
	out := make([]float64, c.B*N)
	grand := make([]float64, N)
	for b, k := range st.Count {
		for n := 0; n < N; n++ {
			grand[n] += st.Sum[b*N+n]
			if k > 0 {
				out[b*N+n] = st.Sum[b*N+n] / float64(k)
			}
		}
	}
	for b, k := range st.Count {
		if k == 0 {
			for n := 0; n < N; n++ {
				out[b*N+n] = grand[n] / float64(len(seen))
			}
		}
	}
	return out
}

// gapShare returns the share of the gap between the condition-mean model
// and the oracle that a model closes on the test trials, pooled over
// neurons on the R^2 scale.
func gapShare(model, cm, oracle []float64) float64 {
	var num, den float64
	for n := range model {
		if math.IsNaN(model[n]) || math.IsNaN(cm[n]) || math.IsNaN(oracle[n]) {
			continue
		}
		num += model[n] - cm[n]
		den += oracle[n] - cm[n]
	}
	return num / den
}

// nanMedian is the median of the finite values of x.
func nanMedian(x []float64) float64 {
	var v []float64
	for _, a := range x {
		if !math.IsNaN(a) {
			v = append(v, a)
		}
	}
	return median(v)
}

// trainFilters is the tests' training loop for a filter solver: full-batch
// Adam on the conv parameters (learning rate 1e-2, Adam's defaults
// otherwise), early stopping on the validation loss with the case's
// patience, as train's epoch loop does. eval(grad) evaluates at the net's
// filters and returns the validation loss. The best filters are left in
// the net; it returns the epochs run.
func trainFilters(t testing.TB, c *testCase, net *nn.Net, nc int, eval func(grad bool) (float64, error)) int {
	t.Helper()
	params, grads := net.Params[:nc], net.Grads[:nc]
	opt := nn.NewAdam(nc)
	opt.LR = c.lr
	if _, err := eval(true); err != nil {
		t.Fatal(err)
	}
	best, since, epoch := math.Inf(1), 0, 0
	bestP := slices.Clone(params)
	for epoch < c.maxEpochs {
		opt.Step(params, grads)
		epoch++
		v, err := eval(true)
		if err != nil {
			t.Fatal(err)
		}
		if v < best {
			best, since = v, 0
			copy(bestP, params)
		} else if since++; since >= c.patience {
			break
		}
	}
	copy(params, bestP)
	return epoch
}
