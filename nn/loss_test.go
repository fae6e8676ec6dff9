package nn

import (
	"math"
	"testing"
)

// Finite differences of MSE and Poisson with respect to pred, with
// non-uniform row weights and with weight nil. Tolerance 1e-7 relative +
// 1e-10 absolute: central-difference truncation error step^2 |L”'| is
// < 1e-10 for pred in [0.5, 2.5].
func TestLossGradFD(t *testing.T) {
	rng := newRand(4)
	rows, cols := 4, 3
	pred := make([]float64, rows*cols)
	target := make([]float64, rows*cols)
	for i := range pred {
		pred[i] = 0.5 + 2*rng.Float64()
		target[i] = 3 * rng.Float64()
	}
	weights := map[string][]float64{"weighted": {1, 5, 0.5, 3}, "nil": nil}
	losses := map[string]func(dst, p, t, w []float64, r, c int) float64{"MSE": MSE, "Poisson": Poisson}
	for wn, w := range weights {
		for ln, loss := range losses {
			d := make([]float64, len(pred))
			l := loss(d, pred, target, w, rows, cols)
			if l2 := loss(nil, pred, target, w, rows, cols); l2 != l {
				t.Errorf("%s %s: loss with dst nil %v, with dst %v", ln, wn, l2, l)
			}
			num := numGrad(func(v []float64) float64 { return loss(nil, v, target, w, rows, cols) }, pred)
			checkClose(t, ln+" "+wn, d, num, 1e-7, 1e-10)
		}
	}
}

// Hand values [computed]: pred = [1, 2 | 3, 5], target = [0, 2 | 1, 1],
// weights [1, 3]: MSE = (1*(1+0) + 3*(4+16)) / (4*2) = 61/8.
// Poisson (eps neglected, error ~1e-8): (1*(1-0 + 2-2 log 2) + 3*(3-log 3 + 5-log 5)) / 8.
func TestLossValues(t *testing.T) {
	pred := []float64{1, 2, 3, 5}
	target := []float64{0, 2, 1, 1}
	w := []float64{1, 3}
	if got, want := MSE(nil, pred, target, w, 2, 2), 61.0/8; !closeTo(got, want, 1e-15, 0) {
		t.Errorf("MSE %v, want %v", got, want)
	}
	want := (1 + 2 - 2*math.Log(2) + 3*(3-math.Log(3)+5-math.Log(5))) / 8
	if got := Poisson(nil, pred, target, w, 2, 2); !closeTo(got, want, 0, 1e-8) {
		t.Errorf("Poisson %v, want %v", got, want)
	}
}

// eval/methods.md §8 [derived]: with weights N_b and condition-mean targets the
// MSE and Poisson losses differ from the trial-level losses only by a
// model-independent constant, so their gradients are equal. Checked here on
// synthetic trials: 3 conditions with 2, 3 and 1 trials, 2 neurons.
func TestLossConditionMeansMatchTrials(t *testing.T) {
	rng := newRand(5)
	counts := []int{2, 3, 1}
	cols := 2
	var trialPred, trialY, meanY, wts []float64
	pred := []float64{0.7, 1.9, 2.2, 0.4, 1.1, 3.0}
	for b, nb := range counts {
		sum := make([]float64, cols)
		for range nb {
			for c := range cols {
				y := float64(rng.IntN(5))
				trialY = append(trialY, y)
				trialPred = append(trialPred, pred[b*cols+c])
				sum[c] += y
			}
		}
		for c := range cols {
			meanY = append(meanY, sum[c]/float64(nb))
		}
		wts = append(wts, float64(nb))
	}
	T := len(trialY) / cols
	for name, loss := range map[string]func(dst, p, t, w []float64, r, c int) float64{"MSE": MSE, "Poisson": Poisson} {
		dTrial := make([]float64, len(trialPred))
		loss(dTrial, trialPred, trialY, nil, T, cols)
		// Sum the trial gradients per condition: that is the gradient w.r.t. the shared pred.
		want := make([]float64, len(pred))
		r := 0
		for b, nb := range counts {
			for range nb {
				for c := range cols {
					want[b*cols+c] += dTrial[r*cols+c]
				}
				r++
			}
		}
		got := make([]float64, len(pred))
		loss(got, pred, meanY, wts, len(counts), cols)
		checkClose(t, name, got, want, 1e-12, 1e-15)
	}
}

func TestLossPanics(t *testing.T) {
	p := []float64{1, 2}
	wantPanic(t, "short target", func() { MSE(nil, p, p[:1], nil, 1, 2) })
	wantPanic(t, "negative weight", func() { MSE(nil, p, p, []float64{-1}, 1, 2) })
	wantPanic(t, "zero weights", func() { Poisson(nil, p, p, []float64{0}, 1, 2) })
	wantPanic(t, "short dst", func() { Poisson(p[:1], p, p, nil, 1, 2) })
}
