package train

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// OffsetWarnFraction is the distance of a condition's mean stimulus value
// from its bin centre, as a fraction of the bin width, above which
// offsetWarning speaks (when the distance is also systematic, see there).
const OffsetWarnFraction = 0.1

// conditionValues returns the stimulus value of each condition
// (data.Axis.ConditionValues: the mean stimulus value of the bin's trials,
// the bin centre for an empty bin) and, when the values lie systematically
// off the bin centres, a warning for the user. After PrepareRecording has
// centred the axis on a discrete stimulus every value is its bin centre;
// the values differ from the centres where bins pool several stimulus
// values (24 directions 15 deg apart in 12 bins of 30 deg: every bin's
// trials average 7.5 deg below its centre) or sample a continuous stimulus
// unevenly.
//
// The offsets d = value - centre (wrapped on a periodic axis) of a uniform
// continuous stimulus average 0 with a standard error of w / sqrt(12 k)
// over k trials, so a bin with few trials is often more than a tenth of a
// bin off by chance. The warning therefore needs an offset that is both
// large and systematic [derived; levels are practice]: the mean offset of
// all trials, or of one bin's trials, is above OffsetWarnFraction x w and
// its one-sample t test against 0 rejects at 0.01 (for single bins at
// 0.01 / B, Bonferroni over the B bins with trials); a set of offsets
// without spread (a discrete value off its centre) always counts.
func (p *Prepared) conditionValues() ([]float64, string) {
	ax := p.Axis
	nb := ax.NumBins()
	vals := ax.ConditionValues(nil, p.Rec.Stim, p.Cond)
	centers := ax.Centers()
	period := ax.Max - ax.Min
	w := period / float64(nb)
	wrap := func(d float64) float64 {
		if !ax.Periodic {
			return d
		}
		d = math.Mod(d+period/2, period)
		if d < 0 {
			d += period
		}
		return d - period/2
	}
	// Per bin and over all trials: sum and sum of squares of the offsets.
	sum := make([]float64, nb+1)
	ss := make([]float64, nb+1)
	cnt := make([]int, nb+1)
	for t, x := range p.Rec.Stim {
		b := p.Cond[t]
		d := wrap(x - centers[b])
		for _, i := range []int{b, nb} {
			sum[i] += d
			ss[i] += d * d
			cnt[i]++
		}
	}
	used := 0
	for b := 0; b < nb; b++ {
		if cnt[b] > 0 {
			used++
		}
	}
	// systematic reports whether group i's mean offset m is large and its
	// t test rejects at level alpha (two-sided).
	systematic := func(i int, alpha float64) (float64, bool) {
		k := float64(cnt[i])
		if cnt[i] == 0 {
			return 0, false
		}
		m := sum[i] / k
		if math.Abs(m) <= OffsetWarnFraction*w {
			return m, false
		}
		if cnt[i] == 1 {
			return m, false
		}
		v := math.Max(0, (ss[i]-k*m*m)/(k-1))
		if v <= 1e-18*w*w {
			return m, true
		}
		tt := math.Abs(m) / math.Sqrt(v/k)
		crit := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: k - 1}.Quantile(1 - alpha/2)
		return m, tt > crit
	}
	worst, worstOff := -1, 0.0
	for b := 0; b < nb; b++ {
		m := wrap(vals[b] - centers[b])
		if math.Abs(m) <= 1e-9*w { // rounding of values on the centres
			vals[b] = centers[b]
			continue
		}
		if m, ok := systematic(b, 0.01/float64(used)); ok && math.Abs(m) > math.Abs(worstOff) {
			worst, worstOff = b, m
		}
	}
	mAll, all := systematic(nb, 0.01)
	if worst < 0 && !all {
		return vals, ""
	}
	unit := ""
	if ax.Unit != "" {
		unit = " " + ax.Unit
	}
	var what string
	if worst >= 0 {
		what = fmt.Sprintf("the trials of %s have a mean stimulus value of %.6g%s, %.3g%s from the bin centre (%.0f %% of a bin width)",
			ax.BinLabel(worst), vals[worst], unit, worstOff, unit, 100*math.Abs(worstOff)/w)
	} else {
		what = fmt.Sprintf("the trials' stimulus values lie on average %.3g%s from their bin centres (%.0f %% of a bin width)", mAll, unit, 100*math.Abs(mAll)/w)
	}
	return vals, what + ": tuning descriptors and figures place each condition at its trials' mean stimulus value, not at the bin centre. If the stimulus takes a few discrete values, bins holding one value each give the clearest curves"
}
