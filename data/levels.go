package data

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// Levels are the distinct values of a stimulus that takes a few discrete
// values (orientations 0, 15, ..., 165; tones at fixed frequencies; positions
// of a few reward sites), ascending. On a periodic axis they are wrapped into
// [Min, Max).
type Levels struct {
	Values []float64
	Count  []int // trials at each value
}

// levelTol is the tolerance, relative to the bin width, within which two
// stimulus values are the same level and a level sits on a bin centre: 1e-5,
// above the rounding of values stored as float32 (relative 6e-8 of values a
// few bin widths from 0) and far below any spacing of a real design.
const levelTol = 1e-5

// StimulusLevels finds out whether the stimulus takes a few discrete values.
// It does when
//
//   - ids (user condition ids, one per trial; nil if not given) are given and
//     the trials of every id share one stimulus value, or
//   - the number of distinct values K is at most NumBins (NumBins+1 on a
//     bounded axis, where 11 sites 0, 10, ..., 100 on 0..100 in bins of 10
//     put two sites in the last bin until the axis is centred) and the trials
//     repeat them, T >= 2K (on average two trials per value: a continuous
//     stimulus sampled fewer times than there are bins is not mistaken for a
//     discrete design).
//
// Values closer than levelTol bin widths are one level (its value is the
// first one met, in ascending order). It returns the levels and true for a
// discrete stimulus, and false otherwise. Errors: an invalid axis, a NaN or
// infinite value (naming the trial), len(ids) != len(stim).
func (a Axis) StimulusLevels(stim []float64, ids []int) (Levels, bool, error) {
	if err := a.Validate(); err != nil {
		return Levels{}, false, err
	}
	if ids != nil && len(ids) != len(stim) {
		return Levels{}, false, fmt.Errorf("data: %d condition ids for %d trials", len(ids), len(stim))
	}
	w := a.width()
	tol := levelTol * w
	v := make([]float64, len(stim))
	for t, x := range stim {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return Levels{}, false, fmt.Errorf("data: trial %d (0-based): stimulus value %g is not a finite number", t, x)
		}
		if a.Periodic {
			x = a.Min + a.wrap(x)
			if x >= a.Max {
				x = a.Min
			}
		}
		v[t] = x
	}
	sorted := append([]float64(nil), v...)
	sort.Float64s(sorted)
	var lv Levels
	for _, x := range sorted {
		if k := len(lv.Values); k > 0 && x-lv.Values[k-1] <= tol {
			lv.Count[k-1]++
			continue
		}
		lv.Values = append(lv.Values, x)
		lv.Count = append(lv.Count, 1)
	}
	// On a periodic axis a value a hair below Max is the level at Min.
	if k := len(lv.Values); a.Periodic && k > 1 && lv.Values[0]+(a.Max-a.Min)-lv.Values[k-1] <= tol {
		lv.Count[0] += lv.Count[k-1]
		lv.Values, lv.Count = lv.Values[:k-1], lv.Count[:k-1]
	}
	K := len(lv.Values)
	if K == 0 {
		return lv, false, nil
	}
	if ids != nil && oneValuePerID(v, ids, tol, a) {
		return lv, true, nil
	}
	room := a.NumBins()
	if !a.Periodic {
		room++ // centring a bounded axis can add a bin: 0, 10, ..., 100 in 10 bins of 10
	}
	return lv, K <= room && len(stim) >= 2*K, nil
}

// oneValuePerID reports whether all trials with one id share a value.
func oneValuePerID(v []float64, ids []int, tol float64, a Axis) bool {
	first := map[int]float64{}
	for t, id := range ids {
		x, ok := first[id]
		if !ok {
			first[id] = v[t]
			continue
		}
		d := math.Abs(v[t] - x)
		if a.Periodic {
			d = math.Min(d, a.Max-a.Min-d)
		}
		if d > tol {
			return false
		}
	}
	return true
}

// width returns the bin width of a valid axis.
func (a Axis) width() float64 { return (a.Max - a.Min) / float64(a.NumBins()) }

// CenterOn returns an axis with the same bin width whose bin centres include
// every level, and a note for the user saying what changed ("" when a already
// has every level at a bin centre; a is then returned unchanged).
//
// The levels must be spaced by whole multiples of the bin width w (evenly
// spaced at w is the usual design; a multiple leaves empty bins between the
// levels). The new axis is a shifted by less than one bin:
//
//   - periodic: Min and Max move together by the offset in [-w/2, w/2) that
//     puts the levels on centres, so 0, 15, ..., 165 on 0..180 in bins of 15
//     gives -7.5..172.5 (bins [-7.5, 7.5), [7.5, 22.5), ..., [157.5, 172.5);
//     a value of 175 wraps to -5, in the bin of 0).
//   - bounded: the edges move onto the grid level +- w/2 and the range grows
//     to the nearest such edges outside [Min, Max], so that every value
//     allowed before is still allowed, except beyond half a bin past the
//     outermost levels, where a bin could hold no trial: 0, 10, ..., 100 on
//     0..100 in bins of 10 gives -5..105 with 11 bins; 0, 10, ..., 190 on
//     0..200 (positions on a 2 m track) gives -5..195 with 20 bins, not a
//     21st, empty bin [195, 205). The new axis is given by bin_width even
//     if a was given by bins, since the bin count changes.
//
// When the levels cannot be centred (uneven spacing, spacing not a multiple
// of the bin width, two levels in one bin) the error says why and gives the
// exact axis lines to write in the config when some bin width works, or how
// to re-express the stimulus otherwise. It also adds a hint when the values
// look like radians on an axis in degrees.
func (a Axis) CenterOn(levels []float64) (Axis, string, error) {
	if err := a.Validate(); err != nil {
		return a, "", err
	}
	if len(levels) == 0 {
		return a, "", nil
	}
	w := a.width()
	tol := levelTol * w
	v0 := levels[0]
	for _, x := range levels[1:] {
		q := (x - v0) / w
		if math.Abs(q-math.Round(q)) > levelTol {
			return a, "", a.cannotCenter(levels)
		}
	}
	// Offset of the first level from the first centre, in [-w/2, w/2).
	c0 := a.Min + w/2
	off := math.Mod(v0-c0, w)
	if off < 0 {
		off += w
	}
	if off >= w/2 {
		off -= w
	}
	if math.Abs(off) <= tol {
		return a, "", nil
	}
	b := a
	if a.Periodic {
		b.Min, b.Max = a.Min+off, a.Max+off
	} else {
		// Edges e = v0 - w/2 + j w; the largest <= Min and the smallest >= Max,
		// but no bin beyond the outermost levels (it could hold no trial).
		e0 := v0 - w/2
		vn := levels[len(levels)-1]
		lo := e0 + math.Floor((a.Min-e0)/w+levelTol)*w
		hi := e0 + math.Ceil((a.Max-e0)/w-levelTol)*w
		lo = math.Max(lo, e0)
		hi = math.Min(hi, vn+w/2)
		n := math.Round((hi - lo) / w)
		b.Min, b.Max = lo, lo+n*w
		b.Bins, b.BinWidth = 0, w
	}
	if err := b.Validate(); err != nil {
		return a, "", fmt.Errorf("data: cannot centre the %s axis on its stimulus values: %v", a.label(), err)
	}
	note := fmt.Sprintf("the %d %s values %s%s sat %g%s from the bin centres, so every condition's value (and every preferred stimulus) would have been reported that far off; the axis is moved by %g%s to put them on the centres: %s",
		len(levels), a.label(), listValues(levels), a.unitSuffix(), math.Abs(off), a.unitSuffix(), off, a.unitSuffix(), b.configLines())
	return b, note, nil
}

// CenterOnStimulus is StimulusLevels followed by CenterOn: for a discrete
// stimulus it returns the axis centred on its values and CenterOn's note (or
// error); for a continuous stimulus a itself and "". The caller bins the
// trials with the returned axis and records it as the resolved axis.
func (a Axis) CenterOnStimulus(stim []float64, ids []int) (Axis, string, error) {
	lv, discrete, err := a.StimulusLevels(stim, ids)
	if err != nil || !discrete {
		return a, "", err
	}
	return a.CenterOn(lv.Values)
}

// cannotCenter explains why the levels cannot all be bin centres and what to
// write instead.
func (a Axis) cannotCenter(levels []float64) error {
	w := a.width()
	var sb strings.Builder
	fmt.Fprintf(&sb, "data: the stimulus takes %d discrete values %s%s, but they cannot all be centres of %s bins %g%s wide: ",
		len(levels), listValues(levels), a.unitSuffix(), a.label(), w, a.unitSuffix())
	gaps := gapsOf(levels, a)
	g := commonStep(gaps, a, w)
	minGap := math.Inf(1)
	for _, d := range gaps {
		minGap = math.Min(minGap, d)
	}
	switch {
	case minGap < w*(1-levelTol):
		fmt.Fprintf(&sb, "values %g%s apart share a bin", minGap, a.unitSuffix())
	default:
		fmt.Fprintf(&sb, "their spacing (%s%s) is not a whole multiple of the bin width", listValues(uniqueRounded(gaps)), a.unitSuffix())
	}
	if g > 0 {
		b := a
		b.Bins, b.BinWidth = 0, g
		if !a.Periodic { // g need not divide the range: round the range up to whole bins
			b.Max = a.Min + math.Ceil((a.Max-a.Min)/g-levelTol)*g
		}
		c, _, err := b.CenterOn(levels)
		if err == nil {
			fmt.Fprintf(&sb, ". Write the axis so that each value is a bin centre: %s", c.configLines())
			if g < minGap*(1-levelTol) {
				sb.WriteString(" (the bins between the values stay empty)")
			}
		}
	} else {
		sb.WriteString(". No equal-width bins put every value at a centre (the values are not on a common grid): re-express the stimulus so that its values are evenly spaced (for tones, log2 of the frequency), or give each trial the index of its value, 0.." +
			fmt.Sprint(len(levels)-1) + ", as the stimulus on an axis with min: -0.5, max: " + fmt.Sprintf("%g", float64(len(levels))-0.5) + ", bin_width: 1")
	}
	if h := a.RadiansHint(levels); h != "" {
		sb.WriteString(". " + h)
	}
	return fmt.Errorf("%s", sb.String())
}

// gapsOf returns the gaps between consecutive levels (and, on a periodic
// axis, from the last level round to the first).
func gapsOf(levels []float64, a Axis) []float64 {
	var g []float64
	for i := 1; i < len(levels); i++ {
		g = append(g, levels[i]-levels[i-1])
	}
	if a.Periodic {
		g = append(g, levels[0]+(a.Max-a.Min)-levels[len(levels)-1])
	}
	return g
}

// commonStep returns the largest step s that every gap is a whole multiple
// of, found among the smallest gap divided by 1..24, and that (on a periodic
// axis) divides the period and gives at most MaxBins bins; 0 if none.
func commonStep(gaps []float64, a Axis, w float64) float64 {
	if len(gaps) == 0 {
		return 0
	}
	m := math.Inf(1)
	for _, d := range gaps {
		if d > levelTol*w {
			m = math.Min(m, d)
		}
	}
	if math.IsInf(m, 0) {
		return 0
	}
	multiple := func(x, s float64) bool {
		q := x / s
		return math.Abs(q-math.Round(q)) <= levelTol*math.Max(1, q)
	}
	for k := 1; k <= 24; k++ {
		s := m / float64(k)
		if (a.Max-a.Min)/s > MaxBins {
			return 0
		}
		ok := !a.Periodic || multiple(a.Max-a.Min, s)
		for _, d := range gaps {
			ok = ok && multiple(d, s)
		}
		if ok {
			return s
		}
	}
	return 0
}

func uniqueRounded(x []float64) []float64 {
	var out []float64
	for _, v := range x {
		r := roundSig(v)
		dup := false
		for _, u := range out {
			dup = dup || u == r
		}
		if !dup {
			out = append(out, r)
		}
	}
	sort.Float64s(out)
	return out
}

// roundSig rounds to 6 significant digits for messages.
func roundSig(v float64) float64 {
	var r float64
	fmt.Sscan(fmt.Sprintf("%.6g", v), &r)
	return r
}

// listValues prints up to six values, eliding the middle of longer lists:
// "0, 15, 30, ..., 150, 165".
func listValues(x []float64) string {
	f := func(v []float64) string {
		s := make([]string, len(v))
		for i, u := range v {
			s[i] = fmt.Sprintf("%.6g", u)
		}
		return strings.Join(s, ", ")
	}
	if len(x) <= 6 {
		return f(x)
	}
	return f(x[:3]) + ", ..., " + f(x[len(x)-2:])
}

func (a Axis) unitSuffix() string {
	if a.Unit == "" {
		return ""
	}
	return " " + a.Unit
}

// configLines returns the axis as the lines of a config: "axis: {min: -7.5,
// max: 172.5, periodic: true, bin_width: 15}".
func (a Axis) configLines() string {
	size := fmt.Sprintf("bin_width: %.10g", a.BinWidth)
	if a.Bins > 0 {
		size = fmt.Sprintf("bins: %d", a.Bins)
	}
	per := ""
	if a.Periodic {
		per = "periodic: true, "
	}
	return fmt.Sprintf("axis: {min: %.10g, max: %.10g, %s%s}", a.Min, a.Max, per, size)
}

// degreeUnits are the Unit strings taken to mean degrees.
var degreeUnits = map[string]bool{"deg": true, "degree": true, "degrees": true, "°": true}

// RadiansHint returns a hint when the axis is in degrees, its range is wider
// than a full turn in radians (2 pi), and all the given stimulus values lie
// in [-2 pi, 2 pi] with at least one away from 0: the values then look like
// radians. It returns "" otherwise. Callers add it to a warning or error.
func (a Axis) RadiansHint(values []float64) string {
	if !degreeUnits[strings.ToLower(a.Unit)] || a.Max-a.Min <= 2*math.Pi || len(values) == 0 {
		return ""
	}
	nonzero := false
	for _, x := range values {
		if math.IsNaN(x) || math.Abs(x) > 2*math.Pi+1e-9 {
			return ""
		}
		nonzero = nonzero || x != 0
	}
	if !nonzero {
		return ""
	}
	return fmt.Sprintf("All stimulus values lie within [-2 pi, 2 pi] = [-6.283, 6.283] on an axis of %g to %g %s: they look like radians; convert them to degrees (x 180/pi) or declare the axis in radians",
		a.Min, a.Max, a.Unit)
}

// ConditionValues writes into dst (length NumBins; allocated when nil) the
// stimulus value of each condition: the mean stimulus value of the trials in
// each bin (cond[t] the bin of trial t, as BinTrials returns), or the bin
// centre for a bin without trials. On a periodic axis the mean is taken of
// the values' offsets from the bin centre, wrapped into [-P/2, P/2), so a bin
// that straddles Min and Max averages correctly. For a discrete stimulus this
// is the level of each bin whatever the bin edges; for a continuous one it is
// close to the bin centre. Use it to place tuning curves and descriptors
// (eval/tuning.Describe) at the stimulus values. It panics if len(cond) !=
// len(stim), a cond is outside [0, NumBins) or dst has the wrong length.
func (a Axis) ConditionValues(dst []float64, stim []float64, cond []int) []float64 {
	n := a.NumBins()
	if dst == nil {
		dst = make([]float64, n)
	}
	if len(dst) != n || len(cond) != len(stim) {
		panic(fmt.Sprintf("data: ConditionValues dst %d (want %d), cond %d, stim %d", len(dst), n, len(cond), len(stim)))
	}
	centers := a.Centers()
	sum := make([]float64, n)
	cnt := make([]int, n)
	p := a.Max - a.Min
	for t, x := range stim {
		b := cond[t]
		if b < 0 || b >= n {
			panic(fmt.Sprintf("data: ConditionValues cond[%d] = %d outside [0, %d)", t, b, n))
		}
		d := x - centers[b]
		if a.Periodic {
			d = math.Mod(d+p/2, p)
			if d < 0 {
				d += p
			}
			d -= p / 2
		}
		sum[b] += d
		cnt[b]++
	}
	for b := range dst {
		dst[b] = centers[b]
		if cnt[b] > 0 {
			dst[b] += sum[b] / float64(cnt[b])
		}
	}
	return dst
}

// CenterOffset returns the bin whose condition value (values, as
// ConditionValues returns them) lies farthest from its bin centre, and that
// signed distance (value - centre, wrapped into [-P/2, P/2) on a periodic
// axis). A distance above a small fraction of the bin width (say 0.1) means
// the bin centres misplace the conditions, as with 24 directions 15 deg apart
// in 30-degree bins (every bin's trials average 7.5 deg below its centre):
// place curves and descriptors at values instead, or centre the bins. It
// panics if len(values) != NumBins.
func (a Axis) CenterOffset(values []float64) (bin int, off float64) {
	n := a.NumBins()
	if len(values) != n {
		panic(fmt.Sprintf("data: CenterOffset with %d values, axis has %d bins", len(values), n))
	}
	centers := a.Centers()
	p := a.Max - a.Min
	for b, v := range values {
		d := v - centers[b]
		if a.Periodic {
			d = math.Mod(d+p/2, p)
			if d < 0 {
				d += p
			}
			d -= p / 2
		}
		if math.Abs(d) > math.Abs(off) {
			bin, off = b, d
		}
	}
	return bin, off
}
