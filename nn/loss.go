package nn

import (
	"fmt"
	"math"
)

// PoissonEps is the eps of the Poisson loss, as in torch's
// PoissonNLLLoss(log_input=False).
const PoissonEps = 1e-8

func lossArgs(name string, dst, pred, target, weight []float64, rows, cols int) float64 {
	if rows < 1 || cols < 1 {
		panic(fmt.Sprintf("nn: %s of %d rows x %d columns", name, rows, cols))
	}
	n := rows * cols
	if len(pred) < n || len(target) < n || (dst != nil && len(dst) < n) {
		panic(fmt.Sprintf("nn: %s lengths pred %d, target %d, dst %d, want %d", name, len(pred), len(target), len(dst), n))
	}
	if weight == nil {
		return float64(rows)
	}
	if len(weight) < rows {
		panic(fmt.Sprintf("nn: %s has %d row weights, want %d", name, len(weight), rows))
	}
	var W float64
	for _, v := range weight[:rows] {
		if !(v >= 0) {
			panic(fmt.Sprintf("nn: %s row weight %v is negative or NaN", name, v))
		}
		W += v
	}
	if !(W > 0) || math.IsInf(W, 0) {
		panic(fmt.Sprintf("nn: %s row weights sum to %v", name, W))
	}
	return W
}

// MSE returns the weighted mean squared error
//
//	L = 1/(W*C) * sum_r w_r sum_c (pred[r][c] - target[r][c])^2,  W = sum_r w_r,
//
// over pred and target [rows][cols] with one weight per row (weight nil
// means all 1, which gives torch's MSELoss with reduction 'mean'). If dst is
// not nil it receives dL/dpred = 2 w_r (pred - target) / (W*C), OVERWRITTEN;
// dst may be target itself (each element is read before it is written).
//
// With weight w_b = N_b, the trial count of condition b, and target = the
// condition mean, L equals the mean loss over the N_b single trials of each
// condition up to an additive constant that does not depend on the model
// (eval/methods.md §8), so training on condition means is exact.
//
// It panics on short slices, rows or cols < 1, a negative or NaN weight, or
// weights that do not sum to a positive finite number.
func MSE(dst, pred, target, weight []float64, rows, cols int) float64 {
	W := lossArgs("MSE", dst, pred, target, weight, rows, cols)
	scale := 1 / (W * float64(cols))
	var sum float64
	for r := range rows {
		wr := 1.0
		if weight != nil {
			wr = weight[r]
		}
		p := pred[r*cols : (r+1)*cols]
		t := target[r*cols : (r+1)*cols][:len(p)]
		var s float64
		for c, v := range p {
			d := v - t[c]
			s += d * d
		}
		sum += wr * s
		if dst != nil {
			g := 2 * wr * scale
			d := dst[r*cols : (r+1)*cols][:len(p)]
			for c, v := range p {
				d[c] = g * (v - t[c])
			}
		}
	}
	return sum * scale
}

// Poisson returns the weighted Poisson negative log-likelihood (without the
// model-independent log(target!) term)
//
//	L = 1/(W*C) * sum_r w_r sum_c (pred[r][c] - target[r][c]*log(pred[r][c] + eps)),
//
// eps = PoissonEps = 1e-8, W = sum_r w_r, over pred (a rate, >= 0) and target
// [rows][cols]; weight nil means all 1, which gives torch's
// PoissonNLLLoss(log_input=False, full=False, reduction='mean'). If dst is
// not nil it receives dL/dpred = w_r (1 - target/(pred+eps)) / (W*C),
// OVERWRITTEN; dst may be target itself.
//
// With weight w_b = N_b and target = the condition mean (so that
// w_b*target = S_b, the condition's spike sum), L equals the mean loss over
// single trials up to a constant that does not depend on the model
// (eval/methods.md §8).
//
// pred must be >= 0 (a Softplus or Exp output); a negative pred below -eps
// gives NaN, which is returned, not a panic. It panics as MSE does.
func Poisson(dst, pred, target, weight []float64, rows, cols int) float64 {
	W := lossArgs("Poisson", dst, pred, target, weight, rows, cols)
	scale := 1 / (W * float64(cols))
	var sum float64
	for r := range rows {
		wr := 1.0
		if weight != nil {
			wr = weight[r]
		}
		p := pred[r*cols : (r+1)*cols]
		t := target[r*cols : (r+1)*cols][:len(p)]
		var s float64
		for c, v := range p {
			s += v - t[c]*math.Log(v+PoissonEps)
		}
		sum += wr * s
		if dst != nil {
			g := wr * scale
			d := dst[r*cols : (r+1)*cols][:len(p)]
			for c, v := range p {
				d[c] = g * (1 - t[c]/(v+PoissonEps))
			}
		}
	}
	return sum * scale
}
