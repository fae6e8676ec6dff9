package state

import (
	"fmt"
	"math"

	"github.com/strialab/stria/eval"
)

// HeldOut is one neuron's held-out score with and without the state terms:
// R2Stim of the stimulus-only prediction f_n(s_t), R2State of the state
// model, Delta = R2State - R2Stim, the held-out variance the state terms add
// (R^2 over single test trials, eval/methods.md §5). NaN when the neuron's
// test responses are constant or its state terms were not fitted.
type HeldOut struct {
	R2Stim, R2State, Delta float64
}

// ScoreHeldOut writes the held-out scores of every neuron into dst (length
// N). y is T x N, test the held-out rows (M), f the B x N stimulus tuning,
// pred the state model's M x N prediction (Predict). It panics on shape
// mismatches.
func ScoreHeldOut(dst []HeldOut, y []float32, n int, cond []int, test []int, f []float64, pred []float64) {
	M := len(test)
	if len(dst) != n || len(pred) != M*n || len(f)%n != 0 || len(y)%n != 0 {
		panic("state: ScoreHeldOut: shape mismatch")
	}
	B := len(f) / n
	yy := make([]float64, M)
	ps := make([]float64, M)
	pz := make([]float64, M)
	for j := 0; j < n; j++ {
		for i, t := range test {
			b := cond[t]
			if b < 0 || b >= B {
				panic(fmt.Sprintf("state: ScoreHeldOut: trial %d (0-based) has condition %d outside [0, %d)", t, b, B))
			}
			yy[i] = float64(y[t*n+j])
			ps[i] = f[b*n+j]
			pz[i] = pred[i*n+j]
		}
		r0, r1 := eval.R2(yy, ps), eval.R2(yy, pz)
		dst[j] = HeldOut{R2Stim: r0, R2State: r1, Delta: r1 - r0}
	}
}

// GainSummary summarises HeldOut scores over neurons: medians and quartiles
// (eval.Summarize, NaN left out and counted), the mean of Delta over neurons
// with a finite Delta, and the fraction of those with Delta > 0.
type GainSummary struct {
	Stim, State, Delta eval.Summary
	MeanDelta          float64
	FracPositive       float64
}

// SummarizeGain summarises per-neuron held-out scores.
func SummarizeGain(h []HeldOut) GainSummary {
	r0 := make([]float64, len(h))
	r1 := make([]float64, len(h))
	d := make([]float64, len(h))
	var sum, pos, cnt float64
	for i, v := range h {
		r0[i], r1[i], d[i] = v.R2Stim, v.R2State, v.Delta
		if !math.IsNaN(v.Delta) && !math.IsInf(v.Delta, 0) {
			sum += v.Delta
			cnt++
			if v.Delta > 0 {
				pos++
			}
		}
	}
	g := GainSummary{Stim: eval.Summarize(r0), State: eval.Summarize(r1), Delta: eval.Summarize(d),
		MeanDelta: math.NaN(), FracPositive: math.NaN()}
	if cnt > 0 {
		g.MeanDelta, g.FracPositive = sum/cnt, pos/cnt
	}
	return g
}
