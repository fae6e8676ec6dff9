package train

import (
	"fmt"
	"math"
)

// OffsetWarnFraction is the distance of a condition's mean stimulus value
// from its bin centre, as a fraction of the bin width, above which
// offsetWarning speaks (when the distance is also systematic, see there).
const OffsetWarnFraction = 0.1

// conditionValues returns the stimulus value of each condition
// (data.Axis.ConditionValues: the mean stimulus value of the bin's trials,
// the bin centre for an empty bin) and, when some bin's value lies
// systematically off its centre, a warning for the user. After
// PrepareRecording has centred the axis on a discrete stimulus every value
// is its bin centre; the values differ from the centres where bins pool
// several stimulus values (24 directions in 12 bins) or sample a
// continuous stimulus unevenly.
//
// A bin's offset m (mean of value - centre over its k trials, wrapped on a
// periodic axis) is reported when |m| > OffsetWarnFraction x bin width and
// |m| > 3 s / sqrt(k), s the standard deviation of the offsets (ddof 1;
// any |m| > 0 counts when s = 0): a uniform continuous stimulus has offsets
// of mean 0 and standard error w / sqrt(12 k), so with few trials per bin
// single bins pass the first test by chance, but not the second.
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
	ss := make([]float64, nb)
	cnt := make([]int, nb)
	for t, x := range p.Rec.Stim {
		b := p.Cond[t]
		d := wrap(x-centers[b]) - wrap(vals[b]-centers[b])
		ss[b] += d * d
		cnt[b]++
	}
	worst, worstOff := -1, 0.0
	for b := range vals {
		m := wrap(vals[b] - centers[b])
		if math.Abs(m) <= 1e-9*w { // rounding of values on the centres
			vals[b] = centers[b]
			continue
		}
		if cnt[b] == 0 || math.Abs(m) <= OffsetWarnFraction*w {
			continue
		}
		if cnt[b] > 1 {
			s := math.Sqrt(ss[b] / float64(cnt[b]-1))
			if math.Abs(m) <= 3*s/math.Sqrt(float64(cnt[b])) {
				continue
			}
		}
		if math.Abs(m) > math.Abs(worstOff) {
			worst, worstOff = b, m
		}
	}
	if worst < 0 {
		return vals, ""
	}
	unit := ""
	if ax.Unit != "" {
		unit = " " + ax.Unit
	}
	return vals, fmt.Sprintf("the trials of %s have a mean stimulus value of %.6g%s, %.3g%s from the bin centre (%.0f %% of a bin width; other bins may be off too): tuning descriptors and figures place each condition at its trials' mean stimulus value, not at the bin centre. If the stimulus takes a few discrete values, bins of one value each give the clearest curves",
		ax.BinLabel(worst), vals[worst], unit, worstOff, unit, 100*math.Abs(worstOff)/w)
}
