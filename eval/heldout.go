package eval

// heldOutBlock is the number of neurons one worker of HeldOutSumsOf sums at
// a time.
const heldOutBlock = 512

// HeldOutSumsOf returns the sums ScoreConditions forms from the held-out
// trials (rows of y, n neurons per row, conditions cond in [0, nbins)), so
// that ScoreSums(dst, HeldOutSumsOf(y, n, trials, cond, nbins), pred) gives
// the scores of ScoreConditions(dst, y, n, trials, cond, pred, nbins) bit
// for bit, for any pred: Ref is the response of trials[0], each sum runs
// over the trials in the order given, and trials are dealt to the split
// halves as ScoreConditions deals them. Several models scored on the same
// trials then read the responses once (stria compare scores every model of
// a fold from one HeldOutSums).
//
// Neurons are summed in blocks on all cores, every element in trial order,
// so the result does not depend on the number of cores. It panics with an
// "eval: " message on a trial or condition out of range; a memory fault
// while reading a mapped y (a truncated file, with
// debug.SetPanicOnFault) is raised again on the caller's goroutine, where
// format.Guard turns it into an error naming the file.
func HeldOutSumsOf(y []float32, n int, trials, cond []int, nbins int) *HeldOutSums {
	if n <= 0 || len(y)%n != 0 {
		panic("eval: HeldOutSumsOf: len(y) is not a multiple of n")
	}
	if nbins <= 0 {
		panic("eval: HeldOutSumsOf: nbins must be positive")
	}
	sh := newShared("HeldOutSumsOf", y, n, trials, cond, nil, nbins)
	h := &HeldOutSums{B: nbins, N: n, Count: sh.counts, CountA: sh.cntA, Ref: make([]float64, n), RefCond: -1,
		Sum: make([]float64, nbins*n), SumA: make([]float64, nbins*n), SumSq: make([]float64, nbins*n)}
	if len(trials) == 0 {
		return h
	}
	h.RefCond = sh.ci[0]
	r0 := trials[0]
	forBlocks(n, heldOutBlock, func() struct{} { return struct{}{} }, func(_ struct{}, n0, n1 int) {
		ref := h.Ref[n0:n1]
		for j, v := range y[r0*n+n0 : r0*n+n1] {
			ref[j] = float64(v)
		}
		// The arithmetic of scorer.blockConditions, element by element.
		for i, r := range trials {
			c := sh.ci[i]
			yr := y[r*n+n0 : r*n+n1]
			sy := h.Sum[c*n+n0 : c*n+n1]
			sq := h.SumSq[c*n+n0 : c*n+n1]
			for j, v := range yr {
				d := float64(v) - ref[j]
				sy[j] += d
				sq[j] += d * d
			}
			if !sh.half[i] {
				sa := h.SumA[c*n+n0 : c*n+n1]
				for j, v := range yr {
					sa[j] += float64(v) - ref[j]
				}
			}
		}
	})
	return h
}
