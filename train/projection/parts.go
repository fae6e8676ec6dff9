package projection

import "github.com/strialab/stria/data/condstats"

// The projector's data from per-condition statistics: trainFromStats and
// valFromStats read condstats.Stats (absolute sums, train's in-memory
// path); trainFromParts and valFromParts read the PartStats of one pass
// over a recording (sums relative to a reference trial, the streamed
// path). Both fill the same fields: yc, ymean (recording units; converted
// by newProjector), within, and for the validation trials vrows, nv, dv,
// withN, valTot, withinV, Wv. inv[n] is the z-scoring factor of neuron n.

func (pj *projector) trainFromStats(st *condstats.Stats, inv []float64) {
	Bt, N := pj.Bt, pj.N
	pj.ymean = make([]float64, N)
	pj.yc = make([]float64, Bt*N)
	for r, b := range pj.rows {
		c := float64(st.Count[b])
		sum, sq := st.Sum[b*N:(b+1)*N], st.SumSq[b*N:(b+1)*N]
		yc := pj.yc[r*N : (r+1)*N]
		for n, s := range sum {
			m := s / c
			yc[n] = m
			pj.within += (sq[n] - s*m) * inv[n] * inv[n]
			pj.ymean[n] += s
		}
	}
	for n := range pj.ymean {
		pj.ymean[n] /= pj.W
	}
	for r := 0; r < Bt; r++ {
		yc := pj.yc[r*N : (r+1)*N]
		for n, m := range pj.ymean {
			yc[n] = (yc[n] - m) * inv[n]
		}
	}
}

func (pj *projector) valFromStats(sv *condstats.Stats, inv []float64) {
	N := pj.N
	for b, c := range sv.Count {
		if c > 0 {
			pj.vrows = append(pj.vrows, b)
		}
	}
	Bv := len(pj.vrows)
	pj.Bv = Bv
	pj.Wv = float64(trials(sv))
	pj.nv = make([]float64, Bv)
	pj.dv = make([]float64, Bv*N)
	pj.withN = make([]float64, N)
	pj.valTot = make([]float64, N)
	grand := make([]float64, N)
	for r, b := range pj.vrows {
		c := float64(sv.Count[b])
		pj.nv[r] = c
		sum, sq := sv.Sum[b*N:(b+1)*N], sv.SumSq[b*N:(b+1)*N]
		d := pj.dv[r*N : (r+1)*N]
		for n, s := range sum {
			m := s / c
			d[n] = (m - pj.ymean[n]) * inv[n]
			pj.withN[n] += sq[n] - s*m
			pj.valTot[n] += sq[n]
			grand[n] += s
		}
	}
	for n, w := range pj.withN {
		i2 := inv[n] * inv[n]
		pj.withN[n] = w * i2
		pj.withinV += w * i2
		pj.valTot[n] = (pj.valTot[n] - grand[n]*grand[n]/pj.Wv) * i2
	}
}

// trainFromParts fills the training data from ps (the within sums of
// squares over neurons come from blockSums), keeping yc in ps.Sum:
// yc_bn = (Sum_bn / N_b - g_n) inv_n with g_n = sum_b Sum_bn / W (the
// reference cancels), ymean_n = r_n + g_n, and each neuron's
// within-condition sum of squares TotSq_n - sum_b Sum_bn^2 / N_b
// (PartStats.WithinSS), kept for the per-neuron penalty.
func (pj *projector) trainFromParts(ps *condstats.PartStats, inv []float64) {
	Bt, N := pj.Bt, pj.N
	pj.withinN = ps.WithinSS(nil)
	for n, w := range pj.withinN {
		pj.withinN[n] = w * inv[n] * inv[n]
	}
	pj.ymean = ps.GrandMean(nil)
	ps.CentredMeans(ps.Sum)
	// Rows of the bins with trials, moved up over empty ones (r <= b, so
	// in place), then z-scored.
	for r, b := range pj.rows {
		if r != b {
			copy(ps.Sum[r*N:(r+1)*N], ps.Sum[b*N:(b+1)*N])
		}
		yc := ps.Sum[r*N : (r+1)*N]
		for n := range yc {
			yc[n] *= inv[n]
		}
	}
	pj.yc = ps.Sum[: Bt*N : Bt*N]
}

// valFromParts fills the validation data from ps, keeping dv in ps.Sum:
// dv_bn = (r_n + Sum_bn / N_b - ymean_n) inv_n.
func (pj *projector) valFromParts(ps, train *condstats.PartStats, inv []float64) {
	N := pj.N
	for b, c := range ps.Count {
		if c > 0 {
			pj.vrows = append(pj.vrows, b)
		}
	}
	Bv := len(pj.vrows)
	pj.Bv = Bv
	pj.Wv = float64(ps.Trials)
	pj.nv = make([]float64, Bv)
	pj.withN = ps.WithinSS(nil)
	pj.valTot = ps.TotalSS(nil)
	for n, w := range pj.withN {
		i2 := inv[n] * inv[n]
		pj.withN[n] = w * i2
		pj.valTot[n] *= i2
	}
	ps.Means(ps.Sum)
	for r, b := range pj.vrows {
		pj.nv[r] = float64(ps.Count[b])
		if r != b {
			copy(ps.Sum[r*N:(r+1)*N], ps.Sum[b*N:(b+1)*N])
		}
		d := ps.Sum[r*N : (r+1)*N]
		for n := range d {
			d[n] = (d[n] - pj.ymean[n]) * inv[n]
		}
	}
	pj.dv = ps.Sum[: Bv*N : Bv*N]
	pj.valStore = ps.Sum
}
