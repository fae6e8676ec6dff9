package eval

// ScoreConditions is ScorePopulation for a model whose prediction depends
// only on the condition (one-hot input): pred is nbins x n, row b the
// prediction for every trial of condition b. The scores are those of
// ScorePopulation with pred[cond[trials[i]]] as the prediction of trial i,
// equal up to rounding, but the held-out trials are read once and no
// trials x neurons prediction matrix is needed.
//
// For each neuron the sums over the trials of a condition (of y, y^2 and,
// for the split halves, y over half A) are taken relative to the neuron's
// value on the first held-out trial, so that a neuron constant over the
// held-out trials has exactly zero spread; the trial-level sums of squares
// then follow from the per-condition sums:
//
//	SSwithin_b = sum y^2 - N_b ybar_b^2,  SStot = sum_b SSwithin_b + N_b (ybar_b - ybar)^2,
//	SSE = sum_b SSwithin_b + N_b (ybar_b - yhat_b)^2, and likewise for the centred error.
//
// Shapes and panics are those of ScorePopulation.
func ScoreConditions(dst []Scores, y []float32, n int, trials, cond []int, pred []float64, nbins int) {
	if n <= 0 || len(y)%n != 0 {
		panic("eval: ScoreConditions: len(y) is not a multiple of n")
	}
	checkLen(len(dst), n, "ScoreConditions dst")
	if nbins <= 0 {
		panic("eval: ScoreConditions: nbins must be positive")
	}
	checkLen(len(pred), nbins*n, "ScoreConditions pred")
	sh := newShared("ScoreConditions", y, n, trials, cond, pred, nbins)
	eachBlock(dst, sh, func(sc *scorer, dst []Scores, n0, w int) { sc.blockConditions(dst, sh, n0, w) })
}

// blockConditions scores neurons n0..n0+w-1 from per-condition sums.
func (s *scorer) blockConditions(dst []Scores, sh *shared, n0, w int) {
	const nb = scoreBlock
	if s.sq == nil {
		s.sq = make([]float64, len(s.sumY))
	}
	sq := s.sq
	for _, a := range [][]float64{s.sumY, s.sumP, s.sumA, s.ssw, sq, s.totY, s.totP, s.ssTot, s.ssP, s.cYP, s.sse, s.sseC} {
		zero(a)
	}
	n := sh.n
	if len(sh.trials) == 0 {
		for j := range dst {
			dst[j] = s.finish(sh, j, 0)
		}
		return
	}
	r0 := sh.trials[0]
	c0 := sh.ci[0]
	for j := 0; j < w; j++ {
		s.refY[j] = float64(sh.y[r0*n+n0+j])
		s.refP[j] = sh.pred[c0*n+n0+j]
	}
	refY := s.refY[:w]
	// One pass: per-condition sums of y, y^2 and half A, relative to refY.
	for i, r := range sh.trials {
		c := sh.ci[i]
		yr := sh.y[r*n+n0 : r*n+n0+w]
		sy := s.sumY[c*nb : c*nb+w]
		sq2 := sq[c*nb : c*nb+w]
		for j, v := range yr {
			d := float64(v) - refY[j]
			sy[j] += d
			sq2[j] += d * d
		}
		if !sh.half[i] {
			sa := s.sumA[c*nb : c*nb+w]
			for j, v := range yr {
				sa[j] += float64(v) - refY[j]
			}
		}
	}
	M := float64(len(sh.trials))
	gy, gp := s.totY[:w], s.totP[:w]
	for c, k := range sh.counts {
		if k == 0 {
			continue
		}
		cnt := float64(k)
		sy := s.sumY[c*nb : c*nb+w]
		sp := s.sumP[c*nb : c*nb+w]
		ssw := s.ssw[c*nb : c*nb+w]
		sq2 := sq[c*nb : c*nb+w]
		pc := sh.pred[c*n+n0 : c*n+n0+w]
		for j := range sy {
			gy[j] += sy[j]
			m := sy[j] / cnt
			ssw[j] = max(0, sq2[j]-sy[j]*m)
			sy[j] = m                 // the condition mean of y (shifted)
			sp[j] = pc[j] - s.refP[j] // the condition's prediction (shifted)
			gp[j] += cnt * sp[j]
		}
	}
	for j := 0; j < w; j++ {
		gy[j] /= M
		gp[j] /= M
	}
	ssTot, ssP, cYP, sse, sseC := s.ssTot[:w], s.ssP[:w], s.cYP[:w], s.sse[:w], s.sseC[:w]
	for c, k := range sh.counts {
		if k == 0 {
			continue
		}
		cnt := float64(k)
		my := s.sumY[c*nb : c*nb+w]
		mp := s.sumP[c*nb : c*nb+w]
		ssw := s.ssw[c*nb : c*nb+w]
		for j := range my {
			dy := my[j] - gy[j]
			dp := mp[j] - gp[j]
			e := my[j] - mp[j] + (refY[j] - s.refP[j])
			ec := dy - dp
			ssTot[j] += ssw[j] + cnt*dy*dy
			ssP[j] += cnt * dp * dp
			cYP[j] += cnt * dy * dp
			sse[j] += ssw[j] + cnt*e*e
			sseC[j] += ssw[j] + cnt*ec*ec
		}
	}
	for j := 0; j < w; j++ {
		dst[j] = s.finish(sh, j, M)
	}
}
